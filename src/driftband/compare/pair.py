"""Tests between two populations (no I/O): shared DFE, neutral-band share, "only Ne differs".

For a pair of populations A, B and one DFE family:

``shared_dfe_lrt``
    Likelihood-ratio test of one DFE shared by both (each keeps its own θ, nuisance factors
    and misorientation rate) against separate DFEs; df = the family's DFE parameters.
``neutral_share_difference``
    share_B − share_A of the effectively neutral band with its paired-bootstrap interval
    and p-value (:mod:`driftband.compare.share`). Needs fits made with ``--bootstrap``.
``ne_only_free_lrt``
    Both populations share one distribution of s and differ only in Ne, so the DFE on
    S = 4·Ne·s of B is that of A scaled by ρ = Ne_B/Ne_A. The shape of the DFE is shared
    and ρ is fitted (df = DFE parameters − 1). The fitted ρ is reported beside the one
    from neutral diversity. It does not depend on π being at equilibrium.
``ne_only_lrt``
    The same null with ρ taken from the ratio of neutral diversity π_S (equal mutation
    rates unless relative rates are given: ρ = (π_B/μ_B)/(π_A/μ_A)); df = DFE
    parameters. The ratio's sampling uncertainty is carried by the block bootstrap (ρ is
    recomputed in each replicate, see :mod:`driftband.compare.linkage`). π reflects Ne
    only at equilibrium: after a recent change of size it does not, and the test then
    rejects a true null.

The likelihood-ratio statistics are read off χ² (``p_raw``; the χ̄² mixture of Self &
Liang 1987 where the null is on a boundary, :mod:`driftband.compare.lrt`) and, with a
bootstrap of at least 20 blocks, off the composite-likelihood reference that accounts for
linked sites (:mod:`driftband.compare.linkage`): ``p_value`` is then the adjusted p.

This module runs the tests of one pair; :mod:`driftband.compare.api` runs every pair and
adjusts the p-values across pairs.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy import stats

from ..defaults import COMPARE_TESTS, MIN_BLOCKS
from ..exceptions import ConvergenceWarning, DriftbandWarning, InputError
from ..fit.likelihood import Objective, SpectrumPair
from ..fit.models import DfeModel
from ..fit.options import FitOptions
from ..fit.results import PopulationFit
from ..fit.size_history import history_parts, recorded_history
from ..prf.dfe import DfeExpectation
from ..prf.families import band_shares
from ..spectra.stats import pi_theta_counts, tajimas_d
from .linkage import (
    LinkageAdjustment,
    interior_coordinates,
    linkage_adjustment,
    naive_covariance,
    replicate_vectors,
)
from .lrt import boundary_parameters, chibar2_sf, joint_fit, joint_starts, lrt_pvalue, scale_shift
from .share import share_difference
from .table import ComparisonRow

__all__ = [
    "DEPARTURE_LOG_R",
    "DEPARTURE_TAJIMA_D",
    "ComparisonRow",
    "boundary_parameters",
    "chibar2_sf",
    "compare_pair",
    "equilibrium_departure",
    "neutral_pi",
    "scale_shift",
]

#: Tajima's D of the neutral class beyond which a population counts as out of equilibrium
#: for the "only Ne differs" tests (genome-wide D is near 0 at equilibrium; a four-fold
#: change of size within the last Ne generations moves it by about 0.5 to 0.8, by
#: coalescent simulation with msprime).
DEPARTURE_TAJIMA_D = 0.2
#: Mean |log r_i| of the nuisance factors (weighted by the neutral counts) beyond which
#: a population counts as out of equilibrium (r_i = 1 at equilibrium; 0.18 = log 1.2).
DEPARTURE_LOG_R = math.log(1.2)


def neutral_pi(data: SpectrumPair) -> float:
    """π per site of the neutral class (Tajima 1983): :attr:`SpectrumPair.neutral_pi`."""
    return data.neutral_pi


def equilibrium_departure(pop: PopulationFit, model: str) -> str:
    """Plain words on a population's departure from equilibrium, or ``""`` when none shows.

    Tajima's D of the neutral class (Tajima 1989) beyond :data:`DEPARTURE_TAJIMA_D`, or
    nuisance factors r_i of the fit of ``model`` whose count-weighted mean |log r_i|
    exceeds :data:`DEPARTURE_LOG_R`.

    Parameters
    ----------
    pop : PopulationFit
    model : str

    Returns
    -------
    str
    """
    d = pop.data
    sfs = np.concatenate([[0.0], d.neutral])
    pi, _tw, seg = pi_theta_counts(sfs, d.n, d.folded)
    D = tajimas_d(pi, seg, d.n)
    signs = []
    if math.isfinite(D) and abs(D) > DEPARTURE_TAJIMA_D:
        signs.append(f"Tajima's D of the neutral class is {D:+.2f}")
    fit = pop.fits.get(model)
    if fit is not None and not fit.equilibrium:
        r = np.asarray(fit.nuisance, dtype=float)
        w = np.asarray(d.neutral, dtype=float)[: r.size]
        ok = (r > 0) & np.isfinite(r)
        if ok.any() and w[ok].sum() > 0:
            dev = float(np.sum(w[ok] * np.abs(np.log(r[ok]))) / w[ok].sum())
            if dev > DEPARTURE_LOG_R:
                signs.append(f"its nuisance factors depart from 1 by {math.expm1(dev):.0%}")
    return f"population {pop.population!r}: " + " and ".join(signs) if signs else ""


@dataclass
class _Linkage:
    """What the linkage adjustment of one pair and model needs (or why it cannot be made)."""

    c_naive: np.ndarray | None
    moves_a: np.ndarray | None
    moves_b: np.ndarray | None
    coordinates: list[int]
    why_not: str


def _linkage_inputs(
    pop_a: PopulationFit, pop_b: PopulationFit, model: DfeModel, objs: list[Objective]
) -> _Linkage:
    fa, fb = pop_a.fits[model.name], pop_b.fits[model.name]
    none = _Linkage(None, None, None, [], "")
    boots = [p.bootstrap for p in (pop_a, pop_b)]
    mbs = [p.model_bootstrap(model.name) for p in (pop_a, pop_b)]
    if any(b is None for b in boots) or any(m is None or not m.shares.size for m in mbs):
        none.why_not = f"the fits of {model.name} were made without --bootstrap B"
        return none
    blocks = min(b.blocks for b in boots if b is not None)
    if blocks < MIN_BLOCKS:
        none.why_not = f"only {blocks} genomic blocks (fewer than {MIN_BLOCKS})"
        return none
    if fa.x is None or fb.x is None:
        none.why_not = "a fit file without the optimiser's vector"
        return none
    xs = [np.asarray(f.x, dtype=float) for f in (fa, fb)]
    got = [naive_covariance(o, x, None if m is None else m.score) for o, x, m in zip(objs, xs, mbs)]
    ga, gb = got
    if ga is None or gb is None:
        none.why_not = "the Hessian of a fit is not positive definite"
        return none
    (ca, ma), (cb, mb) = ga, gb
    if ma is None or mb is None:  # older fit files: the refitted estimates
        ma, mb = (replicate_vectors(m, model) - x[: model.n_free] for m, x in zip(mbs, xs) if m)
    if ma.shape != mb.shape:
        none.why_not = "the two fit files' replicates do not pair up (an older fit file)"
        return none
    coords = interior_coordinates(model, xs[0], xs[1])
    return _Linkage(ca + cb, ma, mb, coords, "")


def _log_ratio_draws(
    pop_a: PopulationFit, pop_b: PopulationFit, mu: dict[str, float]
) -> np.ndarray | None:
    """log ρ from neutral π in each bootstrap replicate (None without the replicates' π)."""
    ba, bb = pop_a.bootstrap, pop_b.bootstrap
    if ba is None or bb is None or ba.neutral_pi is None or bb.neutral_pi is None:
        return None
    if ba.neutral_pi.shape != bb.neutral_pi.shape:
        return None
    ma, mb = mu.get(pop_a.population, 1.0), mu.get(pop_b.population, 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log((bb.neutral_pi / mb) / (ba.neutral_pi / ma))


def _log_theta_draws(pop_a: PopulationFit, pop_b: PopulationFit, model: str) -> np.ndarray | None:
    """log ρ from the refitted θ (current sizes) in each replicate, or None.

    The relative mutation rates are constants and cancel in the draws about the
    estimate."""
    ma, mb = pop_a.model_bootstrap(model), pop_b.model_bootstrap(model)
    if ma is None or mb is None or "theta" not in ma.params or "theta" not in mb.params:
        return None
    ta, tb = ma.params["theta"], mb.params["theta"]
    if ta.shape != tb.shape:
        return None
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.log(tb / ta)


def _finish_lrt(
    row: ComparisonRow,
    model: DfeModel,
    x_null: np.ndarray,
    link: _Linkage,
    draws: np.ndarray | None,
    free: np.ndarray | None = None,
) -> None:
    """The row's raw and linkage-adjusted p-values (``p_raw``; ``p_value``) and notes."""
    df = int(row.df)
    p_raw, boundary = lrt_pvalue(row.statistic, df, model, x_null)
    row.extra["p_raw"] = p_raw
    row.note += boundary
    adj: LinkageAdjustment | None = None
    why = link.why_not
    if not why and draws is not None:
        coords = [j for j in link.coordinates if j not in _boundary_coordinates(model, x_null)]
        adj = (
            linkage_adjustment(link.c_naive, draws, coords, free)
            if link.c_naive is not None
            else None
        )
        if adj is None:
            why = (
                "every DFE parameter is on a bound"
                if len(coords) - (free is not None) < 1
                else "too few converged bootstrap replicates in both populations"
            )
    if adj is None:
        row.p_value = p_raw
        row.note += f"; p not adjusted for linked sites: {why}"
        warnings.warn(
            f"{row.population_a} vs {row.population_b} / {row.model}: the p-value of "
            f"{row.test} is read off chi2 as if sites were unlinked ({why})",
            DriftbandWarning,
            stacklevel=4,
        )
        return
    stat_adj = row.statistic / adj.factor
    k_b = len(boundary_parameters(model, x_null))
    if k_b:
        p_adj = chibar2_sf(row.statistic / adj.mean, df, min(k_b, df))
    else:
        p_adj = float(stats.chi2.sf(stat_adj, adj.df))
    # With every λ_j ≥ 1 the limit Σ λ_j χ²₁ is stochastically larger than χ²(q), so its
    # p is at least the raw one; the two-moment c·χ²(ν) can cross below it at small W.
    row.p_value = max(p_adj, p_raw)
    row.extra.update(
        linkage_factor=adj.factor,
        statistic_linkage=stat_adj,
        df_linkage=adj.df,
        linkage_eigenvalues=adj.eigenvalues.tolist(),
        linkage_eigenvalues_raw=adj.raw_eigenvalues.tolist(),
    )
    used = (
        ""
        if len(adj.coordinates) == model.n_free
        else (
            f" from {len(adj.coordinates)} of {model.n_free} DFE coordinates, the others on a bound"
        )
    )
    floored = (
        ", eigenvalues estimated below 1 raised to 1 (linked sites cannot add information)"
        if adj.floored
        else ""
    )
    row.note += (
        f"; p adjusted for linked sites: statistic / {adj.factor:.3g} on "
        f"{adj.df:.3g} df (composite likelihood, {adj.replicates} paired block-bootstrap "
        f"replicates{used}{floored})"
    )


def _boundary_coordinates(model: DfeModel, x: np.ndarray) -> set[int]:
    """Coordinates of the null fit on a bound (their curvature is not usable)."""
    return set(range(model.n_free)) - set(interior_coordinates(model, x))


def _not_converged(row: ComparisonRow, converged: bool) -> None:
    """Record the joint fit's convergence in the row; note and warn when it failed."""
    row.extra["converged"] = bool(converged)
    if not converged:
        row.note += "; the joint fit did not converge (treat the test with caution)"
        warnings.warn(
            f"{row.population_a} vs {row.population_b} / {row.model}: the joint fit of "
            f"{row.test} did not converge; treat the test with caution",
            ConvergenceWarning,
            stacklevel=3,
        )


def _departure_note(
    rows: list[ComparisonRow], pops: tuple[PopulationFit, PopulationFit], model: str
) -> None:
    """Note and warn on the "only Ne differs" rows when a population is out of equilibrium."""
    found = [s for s in (equilibrium_departure(p, model) for p in pops) if s]
    if not found:
        return
    text = (
        "; ".join(found)
        + ": the population looks out of equilibrium, and the 'only Ne differs' tests "
        "assume equilibrium (refit with explicit size histories, --demography auto, for "
        "tests that do not); the version with the ratio from pi rejects a true null after "
        "a recent change of size"
    )
    for row in rows:
        row.note += "; " + text
        row.extra["out_of_equilibrium"] = True
    warnings.warn(
        f"{pops[0].population} vs {pops[1].population}: {text}", DriftbandWarning, stacklevel=3
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
        The two populations' fits (with their bootstrap for the share difference and
        for the linkage adjustment of the likelihood-ratio tests).
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
    for pf, f in ((pop_a, fa), (pop_b, fb)):
        if tuple(f.params) != model.param_names:
            raise InputError(
                f"population {pf.population!r}: its fit of {model.name} has the parameters "
                f"{', '.join(f.params)}, where this driftband's {model.name} has "
                f"{', '.join(model.param_names)} (a fit file of an older version: the "
                "discrete family's first band is split since fit schema 4); refit it "
                "with 'driftband fit', or compare another model with --model"
            )
    edges = options.edges_nes

    def objective(pf: PopulationFit) -> Objective:
        d = pf.data
        h = recorded_history(pf.fits[model.name])
        if h is not None:  # the fitted history, held fixed (the two-step approach)
            ex, neutral_g = history_parts(d.n, h, model.beneficial)
            return Objective(
                d, model, eps=options.eps, equilibrium=True, expectation=ex, neutral_g=neutral_g
            )
        ex = expectations.setdefault(d.n, DfeExpectation(d.n))
        return Objective(d, model, eps=options.eps, equilibrium=options.equilibrium, expectation=ex)

    objs = [objective(pop_a), objective(pop_b)]
    histories = recorded_history(fa) is not None and recorded_history(fb) is not None
    lrts = {"shared_dfe_lrt", "ne_only_free_lrt", "ne_only_lrt"} & set(tests)
    link = _linkage_inputs(pop_a, pop_b, model, objs) if lrts else None
    # each replicate's ψ: the difference of the populations' DFE vectors, about the estimate
    diff = (
        None
        if link is None or link.moves_a is None or link.moves_b is None
        else link.moves_b - link.moves_a
    )
    ll_sep = float(fa.loglik) + float(fb.loglik)
    rows: list[ComparisonRow] = []
    df = model.n_free
    zero = [np.zeros(df), np.zeros(df)]
    mu = relative_mu or {}
    rho_pi = (neutral_pi(pop_b.data) / mu.get(name_b, 1.0)) / (
        neutral_pi(pop_a.data) / mu.get(name_a, 1.0)
    )
    # with explicit histories: the ratio of the current sizes, theta = 4 N_now mu of each
    # fit; otherwise the ratio of neutral diversity
    rho_ne = (
        (fb.theta / mu.get(name_b, 1.0)) / (fa.theta / mu.get(name_a, 1.0)) if histories else rho_pi
    )

    def lrt_row(test: str, ll_null: float, dof: int, **kw: object) -> ComparisonRow:
        stat = max(0.0, 2.0 * (ll_sep - ll_null))
        return ComparisonRow(name_a, name_b, test, model.name, stat, dof, **kw)  # type: ignore[arg-type]

    for test in (t for t in COMPARE_TESTS if t in tests):
        if test == "shared_dfe_lrt":
            ll, z, ok = joint_fit(objs, model, zero, joint_starts(model, fa, fb, objs, zero))
            row = lrt_row(
                test,
                ll,
                df,
                estimate=float(band_shares(model.to_dfe(z[:df]), edges)[0]),
                extra={"loglik_separate": ll_sep, "loglik_shared": ll},
                note="estimate: neutral-band share under the shared DFE",
            )
            _finish_lrt(row, model, z[:df], link or _Linkage(None, None, None, [], ""), diff)
        elif test == "neutral_share_difference":
            rows.append(share_difference(pop_a, pop_b, model.name))
            continue
        elif test == "ne_only_free_lrt":
            direction = scale_shift(model, 1.0)
            ll, z, ok = joint_fit(
                objs,
                model,
                zero,
                joint_starts(model, fa, fb, objs, zero, direction, (math.log(rho_ne),)),
                free=direction,
            )
            rho = math.exp(float(z[df]))
            row = lrt_row(
                test,
                ll,
                df - 1,
                estimate=rho,
                extra={
                    "ne_ratio": rho,
                    "ne_ratio_pi": float(rho_pi),
                    **({"ne_ratio_history": float(rho_ne)} if histories else {}),
                    "predicted_share_b": float(
                        band_shares(model.to_dfe(z[:df] + z[df] * direction), edges)[0]
                    ),
                    "observed_share_b": float(fb.shares[0]),
                    "loglik_constrained": ll,
                    "loglik_separate": ll_sep,
                },
                note="estimate: Ne_B/Ne_A fitted (the DFE's shape shared, its scale free)",
            )
            _finish_lrt(
                row, model, z[:df], link or _Linkage(None, None, None, [], ""), diff, direction
            )
        else:  # ne_only_lrt
            shift_b = scale_shift(model, float(np.log(rho_ne)))
            shifts = [np.zeros(df), shift_b]
            ll, z, ok = joint_fit(objs, model, shifts, joint_starts(model, fa, fb, objs, shifts))
            assumption = (
                "equal mutation rates"
                if not mu
                else "relative mutation rates " + ", ".join(f"{k}={v:g}" for k, v in mu.items())
            )
            row = lrt_row(
                test,
                ll,
                df,
                estimate=float(rho_ne),
                extra={
                    "ne_ratio": float(rho_ne),
                    "ne_ratio_pi": float(rho_pi),
                    "predicted_share_a": float(band_shares(model.to_dfe(z[:df]), edges)[0]),
                    "predicted_share_b": float(
                        band_shares(model.to_dfe(z[:df] + shift_b), edges)[0]
                    ),
                    "observed_share_a": float(fa.shares[0]),
                    "observed_share_b": float(fb.shares[0]),
                    "loglik_constrained": ll,
                    "loglik_separate": ll_sep,
                },
                note=(
                    "estimate: Ne_B/Ne_A, the ratio of the current sizes of the fitted "
                    f"size histories (theta of each fit), assuming {assumption}"
                    if histories
                    else f"estimate: Ne_B/Ne_A from neutral pi ratio, assuming {assumption}"
                ),
            )
            draws = diff
            log_rho = (
                _log_theta_draws(pop_a, pop_b, model.name)
                if histories
                else _log_ratio_draws(pop_a, pop_b, mu)
            )
            if draws is not None and log_rho is not None:
                draws = draws - np.outer(log_rho, scale_shift(model, 1.0))
            elif draws is not None:
                row.note += (
                    "; the pi ratio's own uncertainty is not included (fit files without "
                    "the replicates' pi: refit with this version)"
                )
            _finish_lrt(row, model, z[:df], link or _Linkage(None, None, None, [], ""), draws)
        _not_converged(row, ok)
        rows.append(row)
    ne_rows = [r for r in rows if r.test.startswith("ne_only")]
    if ne_rows and not histories:  # explicit histories: no equilibrium assumed
        _departure_note(ne_rows, (pop_a, pop_b), model.name)
    failed = [p.population for p, f in ((pop_a, fa), (pop_b, fb)) if not f.success]
    if failed:
        text = (
            f"the {model.name} fit of {' and '.join(repr(n) for n in failed)} did not "
            "converge: the tests that use it are unreliable"
        )
        for row in rows:
            row.note += "; " + text
        warnings.warn(f"{name_a} vs {name_b}: {text}", ConvergenceWarning, stacklevel=2)
    return rows
