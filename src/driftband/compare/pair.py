"""Tests between populations (no I/O): shared DFE, neutral-band share, "only Ne differs".

For a pair of populations A, B and one DFE family:

``shared_dfe_lrt``
    Likelihood-ratio test of one DFE shared by both (each keeps its own θ, nuisance factors
    and misorientation rate) against separate DFEs; χ² with as many degrees of freedom as
    the family has DFE parameters.
``neutral_share_difference``
    share_B − share_A of new selected-class mutations in the effectively neutral band, with
    the percentile interval of the bootstrap differences and a two-sided bootstrap p-value
    (2·min of the tail fractions, (k+1)/(B+1) rule). Needs fits made with ``--bootstrap``.
``ne_only_lrt``
    Both populations share one distribution of s and differ only in Ne, so the DFE on
    S = 4·Ne·s of B is that of A scaled by ρ = Ne_B/Ne_A. ρ is taken from the ratio of
    neutral diversity π_S (equal mutation rates unless relative rates are given:
    ρ = (π_B/μ_B)/(π_A/μ_A)) and held fixed. The constrained joint fit is tested against
    separate DFEs (χ², df = DFE parameters); the predicted neutral share of B is reported
    beside the observed one.

Where the null fit puts a DFE parameter on the boundary of its space (a beneficial mass
p_b at its lower bound, the stand-in for 0, or a band mass of the discrete family at 0),
the χ² reference is replaced by the χ̄² mixture of Self & Liang (1987): for one such
parameter, 0.5·χ²(df − 1) + 0.5·χ²(df) (:func:`chibar2_sf`), and the row's note says so.
With the shared value at 0 a difference between the populations can only lie on one side
of it, which is what the mixture accounts for.

This module runs the tests of one pair and does no I/O; :mod:`driftband.compare.api`
runs every pair and adjusts the p-values across pairs.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import stats

from ..defaults import COMPARE_TESTS, MIN_BLOCKS
from ..exceptions import ConvergenceWarning, InputError, OptionError
from ..fit.likelihood import Objective, SpectrumPair
from ..fit.mle import FitResult
from ..fit.models import DfeModel
from ..fit.optimize import minimize_multistart
from ..fit.options import FitOptions
from ..fit.results import PopulationFit
from ..prf.dfe import DfeExpectation
from ..prf.families import band_shares
from ..spectra.stats import pi_theta_counts

__all__ = [
    "ComparisonRow",
    "boundary_parameters",
    "chibar2_sf",
    "compare_pair",
    "neutral_pi",
    "scale_shift",
]


@dataclass
class ComparisonRow:
    """One row of ``compare.tsv``."""

    population_a: str
    population_b: str
    test: str
    model: str
    statistic: float = float("nan")
    df: float = float("nan")
    p_value: float = float("nan")
    p_adjusted: float = float("nan")
    estimate: float = float("nan")
    ci_low: float = float("nan")
    ci_high: float = float("nan")
    extra: dict[str, Any] = field(default_factory=dict)
    note: str = ""


def scale_shift(model: DfeModel, log_rho: float) -> np.ndarray:
    """Shift of the unconstrained DFE vector that multiplies every S by ρ = e^log_rho.

    Only families with a scale parameter can be scaled: gamma (mean S̄), lognormal (μ);
    a beneficial S_b is scaled too, p_b is kept.
    """
    if model.family == "gamma":
        d = [0.0, log_rho]
    elif model.family == "lognormal":
        d = [log_rho, 0.0]
    else:
        raise OptionError(
            "the 'only Ne differs' test needs a DFE family with a scale "
            "parameter (gamma or lognormal), not 'discrete'"
        )
    if model.beneficial:
        d += [0.0, log_rho]
    return np.array(d)


def neutral_pi(data: SpectrumPair) -> float:
    """π per site of the neutral class (Tajima 1983) from the polymorphic entries."""
    sfs = np.concatenate([[0.0], data.neutral])
    return pi_theta_counts(sfs, data.n, data.folded)[0] / data.sites_neutral


def boundary_parameters(model: DfeModel, x: np.ndarray) -> list[str]:
    """DFE parameters of ``x`` on the boundary of their space (not only of the box).

    ``p_b`` at its lower bound (which stands in for 0) and discrete band masses at 0;
    the other bounds of :meth:`DfeModel.bounds` keep the optimiser in a sane region and
    are not boundaries of the parameter space.

    Parameters
    ----------
    model : DfeModel
    x : ndarray
        Unconstrained DFE vector (of the null fit).

    Returns
    -------
    list of str
    """
    return [
        n
        for n, side, _v in model.at_bounds(x)
        if side == "lower" and (n == "p_b" or n.startswith("mass_"))
    ]


def chibar2_sf(stat: float, df: int, k: int) -> float:
    r"""p-value P(T ≥ t) of the χ̄² mixture for ``k`` parameters on the boundary.

    .. math::

        P(T \ge t) = \sum_{j=0}^{k} \binom{k}{j} 2^{-k}\, P(\chi^2_{df-k+j} > t),

    with χ²₀ a point mass at 0 (Self & Liang 1987). For ``k = 1`` this is the 50:50
    mixture of χ²(df − 1) and χ²(df); for ``k > 1`` the binomial weights hold for
    asymptotically independent boundary parameters. ``k = 0`` is the plain χ²(df).

    Parameters
    ----------
    stat : float
        The likelihood-ratio statistic (≥ 0).
    df : int
        Degrees of freedom of the test without the boundary.
    k : int
        Parameters on the boundary (at most ``df``).

    Returns
    -------
    float

    Examples
    --------
    >>> round(chibar2_sf(2.706, 1, 1), 3)  # half of the chi2(1) tail
    0.05
    """
    k = max(0, min(int(k), int(df)))
    total = 0.0
    for j in range(k + 1):
        d = df - k + j
        tail = (1.0 if stat <= 0 else 0.0) if d == 0 else float(stats.chi2.sf(stat, d))
        total += math.comb(k, j) / 2.0**k * tail
    return total


def _lrt_p(stat: float, df: int, model: DfeModel, x_null: np.ndarray) -> tuple[float, str]:
    """p-value of an LRT (χ², or χ̄² where the null is on a boundary) and a note."""
    at = boundary_parameters(model, x_null)
    if not at:
        return float(stats.chi2.sf(stat, df)), ""
    k = min(len(at), df)
    mix = " + ".join(
        f"{math.comb(k, j) / 2.0**k:g}\u00b7\u03c7\u00b2({df - k + j})" for j in range(k + 1)
    )
    note = (
        f"; p from the \u03c7\u0304\u00b2 mixture {mix} (Self & Liang 1987): the null fit puts "
        f"{', '.join(at)} on the boundary of its space"
        + (" (weights for independent boundary parameters)" if k > 1 else "")
    )
    return chibar2_sf(stat, df, k), note


def _joint_fit(
    objs: list[Objective], model: DfeModel, shifts: list[np.ndarray], starts: list[np.ndarray]
) -> tuple[float, np.ndarray, bool]:
    """Maximise Σ log L_k(x + shift_k, ε_k) over a shared DFE vector x and per-pop ε.

    Returns the maximum (the objective at the maximiser, which lies within the bounds),
    the maximiser and the optimiser's convergence flag.
    """
    k = model.n_free
    n_eps = [1 if o.free_eps else 0 for o in objs]
    bounds = list(model.bounds()) + [(-13.8, -0.01)] * sum(n_eps)

    def f(z: np.ndarray) -> float:
        x = z[:k]
        tot, j = 0.0, k
        for o, sh, ne in zip(objs, shifts, n_eps):
            v = np.concatenate([x + sh, z[j : j + ne]])
            j += ne
            tot += o(v)
            if tot >= 1e299:
                return 1e300
        return tot

    opt = minimize_multistart(f, starts, bounds, polish="always")
    return -opt.fun, opt.x, opt.success


def _starts(
    model: DfeModel, fa: FitResult, fb: FitResult, objs: list[Objective], shifts: list[np.ndarray]
) -> list[np.ndarray]:
    """Joint starts: each population's own estimate (shifted back) and the model grid."""
    k = model.n_free
    xa, xb = (np.asarray(f.x, dtype=float) for f in (fa, fb))
    eps_part = [x[k:] for x, o in zip((xa, xb), objs) if o.free_eps]
    eps_vec = np.concatenate(eps_part) if eps_part else np.empty(0)
    base = [xa[:k] - shifts[0], xb[:k] - shifts[1]]
    base += [s for s in model.starts()[::3]]
    return [np.concatenate([b, eps_vec]) for b in base]


def _not_converged(rows: list[ComparisonRow], converged: bool) -> None:
    """Record the joint fit's convergence in the last row; note and warn when it failed."""
    row = rows[-1]
    row.extra["converged"] = bool(converged)
    if not converged:
        row.note += "; the joint fit did not converge (treat the test with caution)"
        warnings.warn(
            f"{row.population_a} vs {row.population_b} / {row.model}: the joint fit of "
            f"{row.test} did not converge; treat the test with caution",
            ConvergenceWarning,
            stacklevel=3,
        )


def compare_pair(
    pop_a: PopulationFit,
    pop_b: PopulationFit,
    model: DfeModel,
    options: FitOptions,
    relative_mu: dict[str, float] | None = None,
    tests: tuple[str, ...] = COMPARE_TESTS,
    expectations: dict[int, DfeExpectation] | None = None,
) -> list[ComparisonRow]:
    """Run the requested tests for one pair of populations.

    Parameters
    ----------
    pop_a, pop_b : PopulationFit
        The two populations' fits (with their bootstrap for the share difference).
    model : DfeModel
        The family compared (it must have been fitted to both).
    options : FitOptions
        The fit options (misorientation, equilibrium, band edges).
    relative_mu : dict, optional
        Relative mutation rates per population (default 1).
    tests : tuple of str
    expectations : dict, optional
        Cache n → DfeExpectation.

    Returns
    -------
    list of ComparisonRow
    """
    expectations = {} if expectations is None else expectations
    name_a, name_b = pop_a.population, pop_b.population
    for pf in (pop_a, pop_b):
        if model.name not in pf.fits:
            raise InputError(
                f"population {pf.population!r} has no fit of model "
                f"{model.name!r} (it has {', '.join(pf.fits)}); choose one "
                "with --model"
            )
    fa, fb = pop_a.fits[model.name], pop_b.fits[model.name]
    edges = options.edges_nes
    da, db = pop_a.data, pop_b.data

    def objective(d: SpectrumPair) -> Objective:
        ex = expectations.setdefault(d.n, DfeExpectation(d.n))
        return Objective(d, model, eps=options.eps, equilibrium=options.equilibrium, expectation=ex)

    ll_sep = float(fa.loglik) + float(fb.loglik)
    rows: list[ComparisonRow] = []
    df = model.n_free
    if "shared_dfe_lrt" in tests:
        objs = [objective(da), objective(db)]
        zero = [np.zeros(df), np.zeros(df)]
        ll_joint, z, ok = _joint_fit(objs, model, zero, _starts(model, fa, fb, objs, zero))
        stat = max(0.0, 2.0 * (ll_sep - ll_joint))
        shared = model.to_dfe(z[:df])
        p, boundary = _lrt_p(stat, df, model, z[:df])
        rows.append(
            ComparisonRow(
                name_a,
                name_b,
                "shared_dfe_lrt",
                model.name,
                stat,
                df,
                p,
                estimate=float(band_shares(shared, edges)[0]),
                extra={"loglik_separate": ll_sep, "loglik_shared": ll_joint},
                note="estimate: neutral-band share under the shared DFE" + boundary,
            )
        )
        _not_converged(rows, ok)
    if "neutral_share_difference" in tests:
        rows.append(_share_difference(pop_a, pop_b, model.name))
    if "ne_only_lrt" in tests:
        mu = relative_mu or {}
        rho = (neutral_pi(db) / mu.get(name_b, 1.0)) / (neutral_pi(da) / mu.get(name_a, 1.0))
        shift_b = scale_shift(model, float(np.log(rho)))
        objs = [objective(da), objective(db)]
        shifts = [np.zeros(df), shift_b]
        ll_c, z, ok = _joint_fit(objs, model, shifts, _starts(model, fa, fb, objs, shifts))
        stat = max(0.0, 2.0 * (ll_sep - ll_c))
        pred_b = float(band_shares(model.to_dfe(z[:df] + shift_b), edges)[0])
        pred_a = float(band_shares(model.to_dfe(z[:df]), edges)[0])
        p, boundary = _lrt_p(stat, df, model, z[:df])
        assumption = (
            "equal mutation rates"
            if not mu
            else "relative mutation rates " + ", ".join(f"{k}={v:g}" for k, v in mu.items())
        )
        rows.append(
            ComparisonRow(
                name_a,
                name_b,
                "ne_only_lrt",
                model.name,
                stat,
                df,
                p,
                estimate=float(rho),
                extra={
                    "ne_ratio": float(rho),
                    "predicted_share_a": pred_a,
                    "predicted_share_b": pred_b,
                    "observed_share_a": float(fa.shares[0]),
                    "observed_share_b": float(fb.shares[0]),
                    "loglik_constrained": ll_c,
                    "loglik_separate": ll_sep,
                },
                note=f"estimate: Ne_B/Ne_A from neutral pi ratio, assuming {assumption}" + boundary,
            )
        )
        _not_converged(rows, ok)
    return rows


def _averaged_draws(pop: PopulationFit) -> np.ndarray | None:
    """The model-averaged neutral-share draws, when the population's headline is averaged
    and every family was bootstrapped."""
    boot = pop.bootstrap
    if boot is None or boot.averaged is None or pop.headline_method != "averaged":
        return None
    return boot.averaged.share_draws(0)


def _share_difference(pop_a: PopulationFit, pop_b: PopulationFit, model: str) -> ComparisonRow:
    """share_B − share_A with its paired-bootstrap interval and p-value.

    The headline shares are compared when both populations' headlines are model-averaged,
    else the shares of ``model``. The replicates pair up by index (the same block draw for
    the populations of one dataset); a replicate that failed in either population is left
    out of both.
    """
    xa, xb = _averaged_draws(pop_a), _averaged_draws(pop_b)
    if xa is not None and xb is not None:
        which = "averaged"
        sa, sb = (float(p.headline().shares[0]) for p in (pop_a, pop_b))
    else:
        which = model
        xa, xb = _draws_of(pop_a, model), _draws_of(pop_b, model)
        sa, sb = (float(p.fits[model].shares[0]) for p in (pop_a, pop_b))
    row = ComparisonRow(
        pop_a.population,
        pop_b.population,
        "neutral_share_difference",
        which,
        estimate=sb - sa,
        extra={"share_a": sa, "share_b": sb},
    )
    if xa is None or xb is None or not xa.size or not xb.size:
        row.note = "no bootstrap in the fit files: rerun 'driftband fit' with --bootstrap B"
        return row
    notes = []
    if xa.size == xb.size:
        d = xb - xa
    else:  # files without placeholders for failed replicates (schema version 1)
        m = min(xa.size, xb.size)
        d = xb[:m] - xa[:m]
        notes.append("replicates paired by position (an older fit file)")
    d = d[np.isfinite(d)]
    if d.size < 2:
        row.note = "fewer than two bootstrap replicates converged in both populations"
        return row
    level = pop_a.bootstrap.level if pop_a.bootstrap is not None else 0.95
    a = (1 - level) / 2
    row.ci_low, row.ci_high = (float(v) for v in np.quantile(d, [a, 1 - a]))
    tail = min(np.sum(d <= 0), np.sum(d >= 0))
    row.statistic = float((sb - sa) / np.std(d, ddof=1))
    row.extra["replicates"] = int(d.size)
    few = [p.bootstrap.blocks for p in (pop_a, pop_b) if p.bootstrap and p.bootstrap.few_blocks]
    notes.insert(0, f"bootstrap: {d.size} replicates, level {level:g}")
    if few:
        nb = min(few)
        notes.append(
            f"no p-value: only {nb} genomic blocks (fewer than {MIN_BLOCKS}), "
            "so the interval is unreliable too"
        )
    else:
        row.p_value = float(min(1.0, 2.0 * (tail + 1) / (d.size + 1)))
        if tail == 0:
            row.extra["p_at_floor"] = True
            notes.append(
                f"no replicate crossed zero: p <= 2/(B+1) = {row.p_value:.2g}, "
                "the smallest p this B can give"
            )
    row.note = "; ".join(notes)
    return row


def _draws_of(pop: PopulationFit, model: str) -> np.ndarray | None:
    mb = pop.model_bootstrap(model)
    return None if mb is None or not mb.shares.size else mb.share_draws(0)
