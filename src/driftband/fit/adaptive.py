r"""Adaptive substitutions from polymorphism and divergence (no I/O).

With unfolded spectra polarised by an outgroup or INFO/AA, entry ``n`` (fixed derived in
the sample) counts divergence: D_S at neutral, D_N at selected sites; P_S and P_N are the
polymorphic counts.

* McDonald & Kreitman (1991) table, with Fisher's exact test (scipy.stats.fisher_exact).
* Classic α = 1 − (D_S P_N)/(D_N P_S) (Smith & Eyre-Walker 2002).
* Asymptotic α (Messer & Petrov 2013): α(x) = 1 − (D_S/D_N)(P_N(x)/P_S(x)) over derived
  frequency classes x = i/n, fitted by α(x) = a + b·e^{−c x} and evaluated at x = 1 (a
  straight line when the exponential fit fails or is not better).
* DFE-corrected α and ω_a (Eyre-Walker & Keightley 2009): the non-adaptive substitution
  rate of selected sites relative to neutral is ω_na = (1 − p_b) · r̄_del, with
  r̄_del = E[S/(1 − e^{−S})] over the deleterious part of the DFE and p_b the share of
  beneficial new mutations (0 without a beneficial class); α = 1 − ω_na · d_S/d_N and
  ω_a = d_N/d_S − ω_na, where d = D/L per site. The beneficial class's own fixations are
  adaptive: counting them in the non-adaptive rate would make α ≈ 0 whenever the model
  fits divergence.
* α implied by the DFE alone, α_model = p_b u(S_b) / ((1 − p_b) r̄_del + p_b u(S_b)) with
  u(S) = S/(1 − e^{−S}) (Kimura 1962): the share of substitutions that the fitted DFE
  predicts to be adaptive, with no use of the divergence counts.

With fewer than :data:`MIN_SUBSTITUTIONS` substitutions in either class the entry carries a
caveat (:func:`small_count_caveat`).
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
from scipy import optimize, stats

from ..prf.expected import fixation_ratio as kimura_u
from .likelihood import SpectrumPair
from .mle import FitResult

__all__ = [
    "ALPHA_KEYS",
    "MIN_SUBSTITUTIONS",
    "adaptive_replicate",
    "adaptive_summary",
    "alpha_asymptotic",
    "alpha_classic",
    "alpha_dfe",
    "mk_table",
    "small_count_caveat",
]

#: A choice, not a standard: below 20 substitutions in a class its Poisson relative
#: standard error 1/√D exceeds 0.22 (that of d_N/d_S, √(1/D_N + 1/D_S), is 0.32 at 20 and
#: 20), single substitutions move α visibly, and a block bootstrap of a few counts gives
#: lumpy intervals (most blocks hold none).
MIN_SUBSTITUTIONS = 20
#: The α values of one bootstrap replicate (:func:`adaptive_replicate`).
ALPHA_KEYS = ("alpha_dfe", "omega_a", "alpha_model", "alpha_classic", "alpha_asymptotic")


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
        "polymorphic_selected": pn,
        "polymorphic_neutral": ps,
        "divergent_selected": dn,
        "divergent_neutral": ds,
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


def alpha_dfe(
    data: SpectrumPair,
    fixation_ratio_del: float,
    p_b: float = 0.0,
    s_b: float = float("nan"),
) -> dict[str, float]:
    r"""DFE-corrected α and ω_a (Eyre-Walker & Keightley 2009), and the DFE's own α.

    .. math::

        \omega_{na} = (1 - p_b)\,\bar r_{del}, \qquad
        \alpha = 1 - \omega_{na}\,\frac{d_S}{d_N}, \qquad
        \omega_a = \frac{d_N}{d_S} - \omega_{na}, \qquad
        \alpha_{model} = \frac{p_b u(S_b)}{\omega_{na} + p_b u(S_b)}

    with :math:`d = D/L` per site and :math:`u(S) = S/(1 - e^{-S})` (Kimura 1962).

    Parameters
    ----------
    data : SpectrumPair
        Unfolded spectra with divergence counts.
    fixation_ratio_del : float
        :math:`\bar r_{del}`, the mean substitution rate relative to neutral over the
        deleterious part of the fitted DFE (the whole DFE without a beneficial class).
    p_b, s_b : float
        Share and S of the beneficial class (``p_b = 0``: none).

    Returns
    -------
    dict
        ``alpha``, ``omega_a``, ``omega`` (d_N/d_S), ``omega_na`` and ``alpha_model`` (NaN
        without a beneficial class); α and the ω are NaN without both divergence counts.

    Examples
    --------
    >>> d = SpectrumPair(4, False, [1.0] * 3, [1.0] * 3, 100.0, 100.0, 40.0, 20.0)
    >>> alpha_dfe(d, 0.25)["alpha"]  # 1 - 0.25 * (40/100) / (20/100)
    0.5
    """
    nan = float("nan")
    omega_na = (1.0 - p_b) * fixation_ratio_del
    adaptive = p_b * float(kimura_u(s_b)) if p_b > 0 else 0.0
    alpha_model = adaptive / (omega_na + adaptive) if p_b > 0 else nan
    dn, ds = float(data.fixed_selected or 0.0), float(data.fixed_neutral or 0.0)
    if dn <= 0 or ds <= 0:
        return {
            "alpha": nan,
            "omega_a": nan,
            "omega": nan,
            "omega_na": float(omega_na),
            "alpha_model": float(alpha_model),
        }
    d_n, d_s = dn / data.sites_selected, ds / data.sites_neutral
    return {
        "alpha": float(1.0 - omega_na * d_s / d_n),
        "omega_a": float(d_n / d_s - omega_na),
        "omega": float(d_n / d_s),
        "omega_na": float(omega_na),
        "alpha_model": float(alpha_model),
    }


def small_count_caveat(dn: float, ds: float) -> str | None:
    """A plain-words caveat when either divergence count is below ``MIN_SUBSTITUTIONS``.

    Examples
    --------
    >>> small_count_caveat(40, 25) is None
    True
    >>> small_count_caveat(4, 10)[:31]
    'only 4 selected and 10 neutral '
    """
    if min(dn, ds) >= MIN_SUBSTITUTIONS:
        return None
    return (
        f"only {dn:.0f} selected and {ds:.0f} neutral substitutions (fewer than "
        f"{MIN_SUBSTITUTIONS} in a class): α and ω_a from these counts are rough, and a "
        "bootstrap interval of so few counts is not reliable"
    )


def _dfe_alpha(data: SpectrumPair, fit: FitResult) -> dict[str, float]:
    p_b, s_b = fit.beneficial()
    return alpha_dfe(data, fit.fixation_ratio_deleterious, p_b, s_b)


def adaptive_summary(data: SpectrumPair, fit: FitResult) -> dict[str, Any] | None:
    """All α estimates of one population under one fitted model, or None without
    divergence data.

    Parameters
    ----------
    data : SpectrumPair
    fit : FitResult
        The model's fit (its deleterious r̄ and beneficial class).

    Returns
    -------
    dict or None
        ``mk``, ``alpha_classic``, ``alpha_asymptotic``, ``alpha_dfe`` (see
        :func:`alpha_dfe`) and ``caveat`` (:func:`small_count_caveat`, None when the
        counts suffice).
    """
    if data.folded or not (data.fixed_neutral or data.fixed_selected):
        return None
    mk = mk_table(data)
    return {
        "mk": mk,
        "alpha_classic": alpha_classic(
            mk["polymorphic_selected"],
            mk["polymorphic_neutral"],
            mk["divergent_selected"],
            mk["divergent_neutral"],
        ),
        "alpha_asymptotic": alpha_asymptotic(data),
        "alpha_dfe": _dfe_alpha(data, fit),
        "caveat": small_count_caveat(mk["divergent_selected"], mk["divergent_neutral"]),
    }


def adaptive_replicate(data: SpectrumPair, fit: FitResult) -> dict[str, float]:
    """The :data:`ALPHA_KEYS` values of one bootstrap replicate ({} without divergence;
    ``alpha_model`` only with a beneficial class)."""
    if data.folded or not (data.fixed_neutral or data.fixed_selected):
        return {}
    pn, ps = float(data.selected.sum()), float(data.neutral.sum())
    dn, ds = float(data.fixed_selected or 0.0), float(data.fixed_neutral or 0.0)
    d = _dfe_alpha(data, fit)
    out = {
        "alpha_dfe": d["alpha"],
        "omega_a": d["omega_a"],
        "alpha_classic": alpha_classic(pn, ps, dn, ds),
        "alpha_asymptotic": float(alpha_asymptotic(data)["alpha"]),
    }
    if fit.beneficial()[0] > 0:
        out["alpha_model"] = d["alpha_model"]
    return out
