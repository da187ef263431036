"""Options of a fit: the classes compared, the DFE models, misorientation, band edges.

The one home of the option checks shared by ``driftband fit``, ``driftband run`` (its
``[fit]`` study section) and the readers of fit files.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..defaults import DEFAULT_EDGES_NES, HEADLINES
from ..effect import DEFAULT_EFFECT, check_effect, shown_edges
from ..exceptions import OptionError
from .models import DfeModel, parse_models
from .size_history import check_demography, explicit

__all__ = ["FitOptions", "check_edges", "format_misorientation", "parse_misorientation"]


def check_edges(edges: tuple[float, ...]) -> tuple[float, ...]:
    """Validate |Ne·s| band edges: start at 0, strictly increasing, finite.

    Parameters
    ----------
    edges : tuple of float

    Returns
    -------
    tuple of float

    Raises
    ------
    OptionError
    """
    e = tuple(float(v) for v in edges)
    if (
        len(e) < 2
        or e[0] != 0.0
        or any(b <= a for a, b in zip(e, e[1:]))
        or not all(np.isfinite(e))
    ):
        raise OptionError(
            f"--bands {','.join(f'{v:g}' for v in e)}: edges on |Ne*s| must "
            "start at 0 and increase strictly, e.g. 0,1,10,100"
        )
    return e


def parse_misorientation(text: str) -> float | None:
    """``free`` → None; ``fixed:E`` → E (checked to lie in [0, 0.5)).

    Parameters
    ----------
    text : str

    Returns
    -------
    float or None

    Raises
    ------
    OptionError

    Examples
    --------
    >>> parse_misorientation("fixed:0.0123456789"), parse_misorientation("free")
    (0.0123456789, None)
    """
    if text == "free":
        return None
    if text.startswith("fixed:"):
        try:
            e = float(text.split(":", 1)[1])
        except ValueError:
            e = float("nan")
        if not 0.0 <= e < 0.5:
            raise OptionError(f"--misorientation {text}: the rate must be a number in [0, 0.5)")
        return e
    raise OptionError(f"--misorientation {text!r}: use 'free' or 'fixed:RATE'")


def format_misorientation(eps: float | None) -> str:
    """The inverse of :func:`parse_misorientation`, exact (shortest repr of the float).

    Examples
    --------
    >>> format_misorientation(None), format_misorientation(0.0), format_misorientation(0.0123456789)
    ('free', 'fixed:0', 'fixed:0.0123456789')
    """
    if eps is None:
        return "free"
    text = repr(float(eps))
    return f"fixed:{text[:-2] if text.endswith('.0') else text}"


@dataclass(frozen=True)
class FitOptions:
    """Options of a fit (recorded in the fit file).

    Attributes
    ----------
    neutral, selected : str
        Class names.
    models : tuple of DfeModel
    eps : float or None
        Fixed misorientation rate or None (estimated).
    demography : str
        ``nuisance`` (nuisance factors r_i), ``equilibrium`` (all r_i = 1), an explicit
        size history (``one-change``, ``two-change``, ``growth``, ``auto``) or
        ``demes:FILE`` (:mod:`driftband.fit.size_history`).
    edges_nes : tuple of float
        Band edges on the core's |Ne·s| = |S|/4 (first 0; the last band is open), whatever
        the convention the user stated them in (see :mod:`driftband.effect`).
    headline : {"averaged", "best"}
        Headline shares averaged over the families by Akaike weight, or from the AIC-best
        family alone.
    effect : {"heterozygote", "homozygote"}
        The convention of ``s`` in the band tables a user reads (:attr:`shown_edges`).
    """

    neutral: str = "4fold"
    selected: str = "0fold"
    models: tuple[DfeModel, ...] = (DfeModel("gamma"),)
    eps: float | None = None
    demography: str = "nuisance"
    edges_nes: tuple[float, ...] = DEFAULT_EDGES_NES
    headline: str = "averaged"
    effect: str = DEFAULT_EFFECT

    def __post_init__(self) -> None:
        object.__setattr__(self, "demography", check_demography(self.demography))
        if self.headline not in HEADLINES:
            raise OptionError(f"--headline {self.headline!r}: choose {' or '.join(HEADLINES)}")
        try:
            check_effect(self.effect)
        except ValueError as err:
            raise OptionError(f"--effect: {err}") from None
        if self.eps is not None and not 0.0 <= self.eps < 0.5:
            raise OptionError(
                f"--misorientation {format_misorientation(self.eps)}: the rate must be in [0, 0.5)"
            )

    @property
    def equilibrium(self) -> bool:
        """Constant size, all r_i = 1, for fits without an explicit history (a fit under
        one has all r_i = 1 whatever this says; ``auto`` that kept the nuisance factors
        has them)."""
        return self.demography == "equilibrium"

    @property
    def explicit_history(self) -> bool:
        """An explicit size history (fitted to the neutral class, or from a demes file)."""
        return explicit(self.demography)

    @property
    def shown_edges(self) -> tuple[float, ...]:
        """The band edges on |Ne·s| under :attr:`effect`, as tables show them."""
        return shown_edges(self.edges_nes, self.effect)

    def model(self, name: str) -> DfeModel:
        """The model called ``name`` (e.g. ``gamma+beneficial``), with these band edges.

        Raises
        ------
        OptionError
            ``name`` is not a model name.
        """
        found = [m for m in self.models if m.name == name]
        if found:
            return found[0]
        fam, _, extra = name.partition("+")
        if extra not in ("", "beneficial"):
            raise OptionError(f"model {name!r}: only '+beneficial' may follow a family name")
        return DfeModel(fam, bool(extra), self.edges_nes)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready (the ``options`` of a fit file)."""
        return {
            "neutral": self.neutral,
            "selected": self.selected,
            "models": [m.name for m in self.models],
            "misorientation": format_misorientation(self.eps),
            "demography": self.demography,
            "band_edges_nes": list(self.edges_nes),
            "headline": self.headline,
            "effect": self.effect,
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> FitOptions:
        """The options back from :meth:`to_dict` (a fit file's ``options``).

        Raises
        ------
        OptionError, KeyError, TypeError, ValueError
            Missing or malformed entries.
        """
        edges = check_edges(tuple(d.get("band_edges_nes", DEFAULT_EDGES_NES)))
        names = d.get("models") or ["gamma"]
        return cls(
            str(d.get("neutral", "4fold")),
            str(d.get("selected", "0fold")),
            tuple(parse_models(",".join(names), False, edges)),
            parse_misorientation(str(d.get("misorientation", "free"))),
            # files before size histories: a flag for equilibrium
            str(d.get("demography") or ("equilibrium" if d.get("equilibrium") else "nuisance")),
            edges,
            str(d.get("headline", "best")),  # files before the averaged headline: the best
            str(d.get("effect", DEFAULT_EFFECT)),
        )
