"""Diversity statistics from a site frequency spectrum (no I/O).

Formulas: Watterson (1975) θ_W = S / a_n with a_n = Σ_{i<n} 1/i; nucleotide diversity
π = Σ_i i (n − i) ξ_i / C(n, 2) (Tajima 1983); Tajima's D with the constants of
Tajima (1989), eqs. (3)–(4) and the a_1, a_2, b_1, b_2, c_1, c_2, e_1, e_2 of that paper.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["diversity", "pi_theta_counts", "tajimas_d", "watterson_a"]


def watterson_a(n: int) -> float:
    """Watterson's a_n = Σ_{i=1}^{n−1} 1/i.

    Examples
    --------
    >>> round(watterson_a(4), 6)
    1.833333
    """
    return float(np.sum(1.0 / np.arange(1, n)))


def pi_theta_counts(sfs: np.ndarray, n: int, folded: bool) -> tuple[float, float, int]:
    """Sum of pairwise differences (π·L), θ_W·L and segregating sites of one spectrum.

    Parameters
    ----------
    sfs : array_like, shape (n + 1,) or (n // 2 + 1,)
        Unfolded (entries 1..n−1 are polymorphic) or folded (entries 1..n//2).
    n : int
        Gene copies.
    folded : bool
        Whether ``sfs`` is folded.

    Returns
    -------
    pi_total, theta_w_total : float
        Not yet divided by the number of sites.
    segregating : int
    """
    sfs = np.asarray(sfs, dtype=float)
    if folded:
        i = np.arange(1, n // 2 + 1)
        poly = sfs[1 : n // 2 + 1]
    else:
        i = np.arange(1, n)
        poly = sfs[1:n]
    seg = float(poly.sum())
    pi = float(np.sum(i * (n - i) * poly) / (n * (n - 1) / 2.0))
    return pi, seg / watterson_a(n), int(round(seg))


def tajimas_d(pi_total: float, segregating: int, n: int) -> float:
    """Tajima's D (Tajima 1989) from π (summed over sites) and the segregating-site count.

    Returns NaN when there are no segregating sites or n < 4.

    Examples
    --------
    >>> round(tajimas_d(5.0, 20, 10), 4)
    -1.3762
    """
    if segregating <= 0 or n < 4:
        return float("nan")
    a1 = watterson_a(n)
    a2 = float(np.sum(1.0 / np.arange(1, n) ** 2))
    b1 = (n + 1) / (3.0 * (n - 1))
    b2 = 2.0 * (n * n + n + 3) / (9.0 * n * (n - 1))
    c1 = b1 - 1.0 / a1
    c2 = b2 - (n + 2) / (a1 * n) + a2 / a1**2
    e1 = c1 / a1
    e2 = c2 / (a1**2 + a2)
    s = float(segregating)
    return float((pi_total - s / a1) / math.sqrt(e1 * s + e2 * s * (s - 1)))


def diversity(sfs: np.ndarray, n: int, folded: bool, sites: int) -> dict[str, float]:
    """Per-site π, θ_W, segregating sites and Tajima's D of one class spectrum.

    Parameters
    ----------
    sfs : array_like
        Spectrum (unfolded or folded).
    n : int
        Gene copies.
    folded : bool
        Whether ``sfs`` is folded.
    sites : int
        Callable sites of the class.

    Returns
    -------
    dict
        ``segregating``, ``pi``, ``theta_w`` (both per site), ``tajimas_d``; and
        ``fixed_derived`` (entry n) for unfolded spectra.
    """
    pi, tw, seg = pi_theta_counts(sfs, n, folded)
    out: dict[str, float] = {
        "segregating": seg,
        "pi": pi / sites if sites else float("nan"),
        "theta_w": tw / sites if sites else float("nan"),
        "tajimas_d": tajimas_d(pi, seg, n),
    }
    if not folded:
        out["fixed_derived"] = int(np.asarray(sfs)[n])
    return out
