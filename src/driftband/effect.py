"""The effect convention of the band edges: what ``s`` in |Ne·s| stands for (one home).

Two conventions are in use in published tables of selection coefficients:

``heterozygote`` (the default)
    Genotype fitnesses 1 : 1+s : 1+2s; ``s`` is the heterozygote effect and the scaled
    coefficient of Poisson random field theory is S = 4·Ne·s (Sawyer & Hartl 1992), so
    |Ne·s| < 1 means |S| < 4.
``homozygote``
    Genotype fitnesses 1 : 1+s/2 : 1+s; ``s`` is the homozygote effect, the heterozygote
    effect is s/2 and S = 2·Ne·s, so |Ne·s| < 1 means |S| < 2.

The fit always computes on S. Band edges given by the user are on |Ne·s| in the chosen
convention; :func:`core_edges` turns them into the edges on the heterozygote |Ne·s| (= |S|/4)
that the numerical core uses, and :func:`shown_edges` turns them back for every table a user
reads. A light module (no numpy), for the command line's help.
"""

from __future__ import annotations

from collections.abc import Iterable

__all__ = [
    "DEFAULT_EFFECT",
    "EFFECTS",
    "S_PER_NES",
    "check_effect",
    "convention_text",
    "core_edges",
    "shown_edges",
]

#: |S| per unit of |Ne·s| under each convention (S = 4·Ne·s or S = 2·Ne·s).
S_PER_NES: dict[str, float] = {"heterozygote": 4.0, "homozygote": 2.0}
#: The conventions, the default first.
EFFECTS: tuple[str, ...] = tuple(S_PER_NES)
DEFAULT_EFFECT = EFFECTS[0]
#: Genotype fitnesses (AA : Aa : aa) under each convention.
_FITNESS = {"heterozygote": "1 : 1+s : 1+2s", "homozygote": "1 : 1+s/2 : 1+s"}
#: The heterozygote convention is the core's: its |Ne·s| is |S|/4.
_CORE = S_PER_NES["heterozygote"]


def check_effect(effect: str) -> str:
    """``effect`` if it names a convention.

    Raises
    ------
    ValueError
        ``effect`` is not one of :data:`EFFECTS`.

    Examples
    --------
    >>> check_effect("homozygote")
    'homozygote'
    """
    if effect not in S_PER_NES:
        raise ValueError(f"{effect!r} is not an effect convention: choose {' or '.join(EFFECTS)}")
    return effect


def core_edges(edges: Iterable[float], effect: str) -> tuple[float, ...]:
    """Band edges on |Ne·s| under ``effect`` → the core's edges (heterozygote |Ne·s|).

    Parameters
    ----------
    edges : iterable of float
        Band edges on |Ne·s| as the user states them.
    effect : {"heterozygote", "homozygote"}

    Returns
    -------
    tuple of float

    Examples
    --------
    >>> core_edges((0, 1, 10, 100), "homozygote")
    (0.0, 0.5, 5.0, 50.0)
    """
    f = S_PER_NES[check_effect(effect)] / _CORE
    return tuple(float(e) * f for e in edges)


def shown_edges(edges: Iterable[float], effect: str) -> tuple[float, ...]:
    """The inverse of :func:`core_edges`: the core's edges as the user reads them.

    Examples
    --------
    >>> shown_edges((0.0, 0.5, 5.0, 50.0), "homozygote")
    (0.0, 1.0, 10.0, 100.0)
    """
    f = _CORE / S_PER_NES[check_effect(effect)]
    return tuple(float(e) * f for e in edges)


def convention_text(effect: str) -> str:
    """One line stating the convention, printed beside every band table.

    Examples
    --------
    >>> convention_text("homozygote")
    'Bands on |Ne·s| with s the homozygote effect (fitness 1 : 1+s/2 : 1+s; |S| = 2·|Ne·s|)'
    """
    return (
        f"Bands on |Ne·s| with s the {check_effect(effect)} effect (fitness "
        f"{_FITNESS[effect]}; |S| = {S_PER_NES[effect]:g}·|Ne·s|)"
    )
