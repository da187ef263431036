r"""Adaptive substitutions from polymorphism and divergence (no I/O).

With unfolded spectra polarised by an outgroup or INFO/AA, entry ``n`` (fixed derived in
the sample) counts divergence: D_S at neutral, D_N at selected sites; P_S and P_N are the
polymorphic counts.

* McDonald & Kreitman (1991) table, with Fisher's exact test (scipy.stats.fisher_exact).
* Classic α = 1 − (D_S P_N)/(D_N P_S) (Smith & Eyre-Walker 2002).
* Asymptotic α (Messer & Petrov 2013): α(x) = 1 − (D_S/D_N)(P_N(x)/P_S(x)) over derived
  frequency classes x = i/n, fitted by α(x) = a + b·e^{−c x} and evaluated at x = 1 (a
  straight line when the exponential fit fails or is not better).
* DFE-corrected α and ω_a (Eyre-Walker & Keightley 2009): with r̄ = E_DFE[S/(1 − e^{−S})]
  the expected substitution rate of non-adaptive selected mutations relative to neutral,
  α = 1 − r̄ · d_S/d_N and ω_a = d_N/d_S − r̄, where d = D/L per site.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
from scipy import optimize, stats

from .likelihood import SpectrumPair

__all__ = ["alpha_classic", "alpha_asymptotic", "alpha_dfe", "mk_table", "adaptive_summary"]


def mk_table(data: SpectrumPair) -> dict[str, float]:
    """McDonald–Kreitman counts and Fisher's exact test (two-sided).

    Returns
    -------
    dict
        ``P_N, P_S, D_N, D_S, fisher_odds_ratio, fisher_p``.
    """
    pn, ps = float(data.selected.sum()), float(data.neutral.sum())
    dn, ds = float(data.fixed_selected or 0.0), float(data.fixed_neutral or 0.0)
    table = np.rint([[dn, ds], [pn, ps]]).astype(int)
    odds, p = stats.fisher_exact(table)
    return {
        "P_N": pn,
        "P_S": ps,
        "D_N": dn,
        "D_S": ds,
        "fisher_odds_ratio": float(odds),
        "fisher_p": float(p),
    }


def alpha_classic(pn: float, ps: float, dn: float, ds: float) -> float:
    """α = 1 − (D_S P_N)/(D_N P_S) (Smith & Eyre-Walker 2002); NaN when undefined.

    Examples
    --------
    >>> alpha_classic(pn=20, ps=40, dn=30, ds=30)
    0.5
    """
    if dn <= 0 or ps <= 0:
        return float("nan")
    return float(1.0 - (ds * pn) / (dn * ps))


def alpha_asymptotic(data: SpectrumPair, x_min: float = 0.1) -> dict[str, float | str]:
    """Asymptotic α of Messer & Petrov (2013) over derived-frequency classes.

    Parameters
    ----------
    data : SpectrumPair
        Unfolded spectra with divergence.
    x_min : float
        Classes with derived frequency below this are left out of the fit (they carry the
        slightly deleterious polymorphisms the method is meant to discount least well).

    Returns
    -------
    dict
        ``alpha`` (at x = 1), ``fit`` ("exponential" or "linear"), and the curve parameters.
    """
    n = data.n
    dn, ds = float(data.fixed_selected or 0.0), float(data.fixed_neutral or 0.0)
    x = np.arange(1, n) / n
    if dn <= 0:
        return {"alpha": float("nan"), "fit": "none"}
    with np.errstate(divide="ignore", invalid="ignore"):
        ax = 1.0 - (ds / dn) * (data.selected / data.neutral)
    ok = np.isfinite(ax) & (x >= x_min) & (data.neutral > 0)
    if ok.sum() < 3:
        return {"alpha": float("nan"), "fit": "none"}
    xs, ys = x[ok], ax[ok]
    w = np.sqrt(data.neutral[ok])
    lin = np.polyfit(xs, ys, 1, w=w)
    lin_rss = float(np.sum((w * (np.polyval(lin, xs) - ys)) ** 2))
    out: dict[str, float | str] = {
        "alpha": float(np.polyval(lin, 1.0)),
        "fit": "linear",
        "slope": float(lin[0]),
        "intercept": float(lin[1]),
    }
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            p, _ = optimize.curve_fit(
                lambda t, a, b, c: a + b * np.exp(-c * t),
                xs,
                ys,
                p0=(ys[-1], ys[0] - ys[-1], 5.0),
                sigma=1 / w,
                maxfev=5000,
            )
        rss = float(np.sum((w * (p[0] + p[1] * np.exp(-p[2] * xs) - ys)) ** 2))
        if np.all(np.isfinite(p)) and p[2] > 0 and rss < lin_rss:
            out = {
                "alpha": float(p[0] + p[1] * np.exp(-p[2])),
                "fit": "exponential",
                "a": float(p[0]),
                "b": float(p[1]),
                "c": float(p[2]),
            }
    except (RuntimeError, ValueError):
        pass
    return out


def alpha_dfe(data: SpectrumPair, fixation_ratio: float) -> dict[str, float]:
    """DFE-corrected α and ω_a (Eyre-Walker & Keightley 2009).

    Parameters
    ----------
    data : SpectrumPair
    fixation_ratio : float
        r̄, the fitted DFE's mean substitution rate relative to neutral.
    """
    dn, ds = float(data.fixed_selected or 0.0), float(data.fixed_neutral or 0.0)
    if dn <= 0 or ds <= 0:
        return {"alpha": float("nan"), "omega_a": float("nan"), "omega": float("nan")}
    d_n, d_s = dn / data.sites_selected, ds / data.sites_neutral
    return {
        "alpha": float(1.0 - fixation_ratio * d_s / d_n),
        "omega_a": float(d_n / d_s - fixation_ratio),
        "omega": float(d_n / d_s),
    }


def adaptive_summary(data: SpectrumPair, fixation_ratio: float) -> dict[str, Any] | None:
    """All α estimates of one population, or None without divergence data."""
    if data.folded or not (data.fixed_neutral or data.fixed_selected):
        return None
    mk = mk_table(data)
    return {
        "mk": mk,
        "alpha_classic": alpha_classic(mk["P_N"], mk["P_S"], mk["D_N"], mk["D_S"]),
        "alpha_asymptotic": alpha_asymptotic(data),
        "alpha_dfe": alpha_dfe(data, fixation_ratio),
    }
