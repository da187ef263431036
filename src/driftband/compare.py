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

p-values are adjusted across pairs, test by test, with ``statsmodels.stats.multitest``
(Holm by default).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import optimize, stats

from .exceptions import InputError, OptionError
from .fit.likelihood import Objective, SpectrumPair
from .fit.models import DfeModel
from .prf.dfe import DfeExpectation, band_shares

__all__ = ["COLUMNS", "TESTS", "ComparisonRow", "adjust_pvalues", "compare_pair",
           "neutral_pi", "resolve_pairs", "scale_shift", "write_compare_tsv"]

TESTS = ("shared_dfe_lrt", "neutral_share_difference", "ne_only_lrt")

#: Columns of ``compare.tsv``.
COLUMNS = ["population_a", "population_b", "test", "model", "statistic", "df", "p_value",
           "p_adjusted", "estimate", "ci_low", "ci_high", "ne_ratio", "predicted_share_b",
           "observed_share_b", "note"]


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


def resolve_pairs(tokens: list[str] | None, names: list[str], label: str, holder: str,
                  error: type[Exception] = OptionError) -> list[tuple[str, str]]:
    """Pairs given as ``A:B`` checked against the population names; every pair if none.

    Parameters
    ----------
    tokens : list of str or None
        ``A:B`` items; empty or None means all pairs of ``names`` in their order.
    names : list of str
        The populations available.
    label : str
        The option or study key named in error messages (e.g. ``--pairs``).
    holder : str
        What holds the populations, for the message (e.g. ``the fit files hold``).
    error : exception class
        Raised on a malformed item or an unknown population.
    """
    if not tokens:
        return list(itertools.combinations(names, 2))
    pairs = []
    for tok in tokens:
        a, sep, b = tok.partition(":")
        if not sep or not a or not b:
            raise error(f"{label} {tok!r}: write pairs as A:B")
        for nm in (a, b):
            if nm not in names:
                raise error(f"{label} {tok!r}: no population {nm!r} ({holder} "
                            f"{', '.join(names)})")
        pairs.append((a, b))
    return pairs


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
        raise OptionError("the 'only Ne differs' test needs a DFE family with a scale "
                          "parameter (gamma or lognormal), not 'discrete'")
    if model.beneficial:
        d += [0.0, log_rho]
    return np.array(d)


def neutral_pi(data: SpectrumPair) -> float:
    """π per site of the neutral class (Tajima 1983) from the polymorphic entries."""
    n = data.n
    i = np.arange(1, data.m + 1)
    return float(np.sum(i * (n - i) * data.neutral) / (n * (n - 1) / 2) / data.sites_neutral)


def _joint_fit(objs: list[Objective], model: DfeModel, shifts: list[np.ndarray],
               starts: list[np.ndarray]) -> tuple[float, np.ndarray]:
    """Maximise Σ log L_k(x + shift_k, ε_k) over a shared DFE vector x and per-pop ε."""
    k = model.n_free
    n_eps = [1 if o.free_eps else 0 for o in objs]
    bounds = list(model.bounds()) + [(-13.8, -0.01)] * sum(n_eps)

    def f(z):
        x = z[:k]
        tot, j = 0.0, k
        for o, sh, ne in zip(objs, shifts, n_eps):
            v = np.concatenate([x + sh, z[j:j + ne]])
            j += ne
            tot += o(v)
            if tot >= 1e299:
                return 1e300
        return tot

    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    best = None
    for s in starts:
        s = np.clip(s, lo, hi)
        r = optimize.minimize(f, s, method="L-BFGS-B", bounds=bounds,
                              options={"maxiter": 500, "ftol": 1e-12})
        if best is None or r.fun < best.fun:
            best = r
    pol = optimize.minimize(f, best.x, method="Nelder-Mead",
                            options={"xatol": 1e-7, "fatol": 1e-9, "maxiter": 4000})
    if pol.fun < best.fun:
        return -float(pol.fun), np.clip(pol.x, lo, hi)
    return -float(best.fun), best.x


def _starts(model: DfeModel, fa: dict, fb: dict, objs: list[Objective],
            shifts: list[np.ndarray]) -> list[np.ndarray]:
    """Joint starts: each population's own estimate (shifted back) and the model grid."""
    k = model.n_free
    eps_part = [np.asarray(f["x"])[k:] for f, o in zip((fa, fb), objs) if o.free_eps]
    eps_vec = np.concatenate(eps_part) if eps_part else np.empty(0)
    base = [np.asarray(fa["x"])[:k] - shifts[0], np.asarray(fb["x"])[:k] - shifts[1]]
    base += [s for s in model.starts()[::3]]
    return [np.concatenate([b, eps_vec]) for b in base]


def compare_pair(name_a: str, name_b: str, pop_a: dict, pop_b: dict, model: DfeModel,
                 options: dict, relative_mu: dict[str, float] | None = None,
                 tests: tuple[str, ...] = TESTS, expectations: dict | None = None,
                 ) -> list[ComparisonRow]:
    """Run the requested tests for one pair of populations.

    Parameters
    ----------
    name_a, name_b : str
    pop_a, pop_b : dict
        The populations' entries of a fit file (``data``, ``models``, ``bootstrap``).
    model : DfeModel
        The family compared (it must have been fitted to both).
    options : dict
        The fit options (``misorientation``, ``equilibrium``, ``band_edges_nes``).
    relative_mu : dict, optional
        Relative mutation rates per population (default 1).
    tests : tuple of str
    expectations : dict, optional
        Cache n → DfeExpectation.

    Returns
    -------
    list of ComparisonRow
    """
    from .fit.io import pair_from_dict

    expectations = {} if expectations is None else expectations
    for nm, p in ((name_a, pop_a), (name_b, pop_b)):
        if model.name not in p["models"]:
            raise InputError(f"population {nm!r} has no fit of model {model.name!r} "
                             f"(it has {', '.join(p['models'])}); choose one with --model")
    fa, fb = pop_a["models"][model.name], pop_b["models"][model.name]
    mis = options.get("misorientation", "free")
    eps = None if mis == "free" else float(mis.split(":", 1)[1])
    equilibrium = bool(options.get("equilibrium", False))
    edges = tuple(options.get("band_edges_nes", (0, 1, 10, 100)))
    da, db = pair_from_dict(pop_a["data"]), pair_from_dict(pop_b["data"])

    def objective(d):
        ex = expectations.setdefault(d.n, DfeExpectation(d.n))
        return Objective(d, model, eps=eps, equilibrium=equilibrium, expectation=ex)

    ll_sep = float(fa["loglik"]) + float(fb["loglik"])
    rows: list[ComparisonRow] = []
    df = model.n_free
    if "shared_dfe_lrt" in tests:
        objs = [objective(da), objective(db)]
        zero = [np.zeros(df), np.zeros(df)]
        ll_joint, z = _joint_fit(objs, model, zero, _starts(model, fa, fb, objs, zero))
        stat = max(0.0, 2.0 * (ll_sep - ll_joint))
        shared = model.to_dfe(z[:df])
        rows.append(ComparisonRow(
            name_a, name_b, "shared_dfe_lrt", model.name, stat, df,
            float(stats.chi2.sf(stat, df)),
            estimate=float(band_shares(shared, edges)[0]),
            extra={"loglik_separate": ll_sep, "loglik_shared": ll_joint},
            note="estimate: neutral-band share under the shared DFE"))
    if "neutral_share_difference" in tests:
        sa, sb = float(fa["shares"][0]), float(fb["shares"][0])
        row = ComparisonRow(name_a, name_b, "neutral_share_difference", model.name,
                            estimate=sb - sa, extra={"share_a": sa, "share_b": sb})
        ba = (pop_a.get("bootstrap") or {}).get("models", {}).get(model.name)
        bb = (pop_b.get("bootstrap") or {}).get("models", {}).get(model.name)
        if ba and bb and ba["shares"] and bb["shares"]:
            xa = np.array(ba["shares"])[:, 0]
            xb = np.array(bb["shares"])[:, 0]
            m = min(xa.size, xb.size)
            d = xb[:m] - xa[:m]
            d = d[np.isfinite(d)]
            level = float((pop_a.get("bootstrap") or {}).get("level", 0.95))
            a = (1 - level) / 2
            row.ci_low, row.ci_high = (float(v) for v in np.quantile(d, [a, 1 - a]))
            tail = min(np.sum(d <= 0), np.sum(d >= 0))
            row.p_value = float(min(1.0, 2.0 * (tail + 1) / (d.size + 1)))
            row.statistic = float((sb - sa) / np.std(d, ddof=1)) if d.size > 1 else np.nan
            row.note = f"bootstrap: {d.size} replicates, level {level:g}"
            if tail == 0:
                row.note += (f"; no replicate crossed zero, so p is at the floor "
                             f"2/(B+1) = {row.p_value:.2g} of this B")
        else:
            row.note = "no bootstrap in the fit files: rerun 'driftband fit' with --bootstrap B"
        rows.append(row)
    if "ne_only_lrt" in tests:
        mu = relative_mu or {}
        rho = (neutral_pi(db) / mu.get(name_b, 1.0)) / (neutral_pi(da) / mu.get(name_a, 1.0))
        shift_b = scale_shift(model, float(np.log(rho)))
        objs = [objective(da), objective(db)]
        shifts = [np.zeros(df), shift_b]
        ll_c, z = _joint_fit(objs, model, shifts, _starts(model, fa, fb, objs, shifts))
        stat = max(0.0, 2.0 * (ll_sep - ll_c))
        pred_b = float(band_shares(model.to_dfe(z[:df] + shift_b), edges)[0])
        pred_a = float(band_shares(model.to_dfe(z[:df]), edges)[0])
        assumption = ("equal mutation rates" if not mu else
                      "relative mutation rates " + ", ".join(f"{k}={v:g}" for k, v in mu.items()))
        rows.append(ComparisonRow(
            name_a, name_b, "ne_only_lrt", model.name, stat, df,
            float(stats.chi2.sf(stat, df)), estimate=float(rho),
            extra={"ne_ratio": float(rho), "predicted_share_a": pred_a,
                   "predicted_share_b": pred_b, "observed_share_a": float(fa["shares"][0]),
                   "observed_share_b": float(fb["shares"][0]), "loglik_constrained": ll_c,
                   "loglik_separate": ll_sep},
            note=f"estimate: Ne_B/Ne_A from neutral pi ratio, assuming {assumption}"))
    return rows


def adjust_pvalues(rows: list[ComparisonRow], method: str = "holm") -> None:
    """Fill ``p_adjusted`` per test across pairs (statsmodels.stats.multitest)."""
    from statsmodels.stats.multitest import multipletests

    for t in {r.test for r in rows}:
        sel = [r for r in rows if r.test == t and np.isfinite(r.p_value)]
        if not sel:
            continue
        _rej, padj, _a, _b = multipletests([r.p_value for r in sel], method=method)
        for r, p in zip(sel, padj):
            r.p_adjusted = float(p)


def _fmt(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        return "" if np.isnan(v) else f"{v:.6g}"
    return str(v)


def write_compare_tsv(rows: list[ComparisonRow], path, force: bool = False) -> None:
    """Write ``compare.tsv`` (columns :data:`COLUMNS`) atomically."""
    import csv

    from ._io import atomic_output

    with atomic_output(path, force=force, newline="") as fh:
        w = csv.writer(fh, delimiter="\t", lineterminator="\n")
        w.writerow(COLUMNS)
        for r in rows:
            d = {**r.__dict__, **r.extra}
            w.writerow([_fmt(d.get(c)) for c in COLUMNS])
