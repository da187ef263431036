"""Block bootstrap of DFE fits (resampling genomic blocks; no I/O).

The blocks of a population are resampled with replacement; the neutral and the selected
class of a block travel together. Each replicate is refitted warm-started from the point
estimate. Replicate block draws are made up front from ``numpy.random.SeedSequence(seed)``
per population, so results do not depend on how many workers run the refits.
"""

from __future__ import annotations

import dataclasses
import logging
import math
import warnings
import zlib
from typing import TYPE_CHECKING, Any

import numpy as np

from .._options import COMMAND_LINE, OptionSource
from .._parallel import parallel_map, resolve_workers
from .._progress import Progress
from ..defaults import MIN_BLOCKS
from ..exceptions import DriftbandWarning, InputError, OptionError
from ..prf.dfe import DfeExpectation
from .adaptive import ALPHA_KEYS, adaptive_replicate
from .likelihood import SpectrumPair
from .mle import fit_model, make_objective
from .models import DfeModel
from .optimize import central_gradient
from .options import FitOptions
from .results import (
    AveragedBootstrap,
    BootstrapResult,
    ConfidenceInterval,
    ModelBootstrap,
    PopulationFit,
    akaike_weights,
)
from .size_history import FittedHistory, recorded_history, replicate_history

if TYPE_CHECKING:
    from ..spectra import PopulationSpectra

__all__ = [
    "block_size_hint",
    "bootstrap_fits",
    "check_bootstrap_settings",
    "averaged_replicates",
    "default_batch",
    "mixture_interval",
    "percentile_interval",
    "resample_indices",
]

log = logging.getLogger("driftband")

#: One task of the refits: n, folded, the per-block neutral and selected spectra and
#: callable sites, the block draws of a batch of replicates, the options of the models
#: refitted and their warm starts (by model name; ``FitResult.x``, None for a fit read
#: from a file without it), and the point fit's size history (its summary, or None).
_ReplicateBatch = tuple[
    int,
    bool,
    np.ndarray,
    np.ndarray,
    np.ndarray,
    np.ndarray,
    np.ndarray,
    FitOptions,
    dict[str, np.ndarray | None],
    dict[str, Any] | None,
]


def check_bootstrap_settings(
    replicates: int, level: float, source: OptionSource = COMMAND_LINE
) -> None:
    """Check the replicate count and the confidence level of a bootstrap.

    Parameters
    ----------
    replicates : int
    level : float
    source : OptionSource
        Where the values came from (``--bootstrap`` or ``[bootstrap] replicates``).

    Raises
    ------
    OptionError or InputError
        ``replicates`` below 0 or ``level`` outside (0.5, 1).
    """
    key = "bootstrap" if source.section is None else "replicates"
    if isinstance(replicates, bool) or not isinstance(replicates, int) or replicates < 0:
        raise source.error(key, f"must be a whole number >= 0, got {replicates!r}")
    if not 0.5 < level < 1.0:
        raise source.error("level", "must lie between 0.5 and 1, e.g. 0.95")


def block_size_hint(covered: int, blocks: int = MIN_BLOCKS, smallest: int = 1000) -> str:
    """The advice of a warning about too few blocks: a block size that gives ``blocks``.

    Parameters
    ----------
    covered : int
        Base pairs covered by the blocks (0: unknown, no advice).
    blocks : int
        Blocks wanted.
    smallest : int
        Smallest block length worth proposing, in bp (shorter blocks would no longer
        hold the linkage between sites within a block).

    Returns
    -------
    str
        ``"; --block-size 15000 would give 20 blocks of the 300000 bp covered"``, a note
        that the assembly is too small, or empty.

    Examples
    --------
    >>> block_size_hint(300_000).split(" (")[0]
    '; --block-size 15000'
    >>> block_size_hint(10_000)
    '; the 10000 bp covered are too few for 20 blocks of at least 1000 bp: add more of the genome'
    """
    if covered <= 0:
        return ""
    size = covered // blocks // 1000 * 1000
    if size < smallest:
        return (
            f"; the {covered} bp covered are too few for {blocks} blocks of at least "
            f"{smallest} bp: add more of the genome"
        )
    return (
        f"; --block-size {size} (block_size in a study file) would give {blocks} blocks "
        f"of the {covered} bp covered"
    )


def resample_indices(n_blocks: int, replicates: int, seed: int, stream: int = 0) -> np.ndarray:
    """Block indices of each replicate, shape (replicates, n_blocks), reproducible.

    Parameters
    ----------
    n_blocks : int
    replicates : int
    seed : int
    stream : int
        Separates populations (their draws are independent).
    """
    rng = np.random.default_rng(np.random.SeedSequence([seed, stream]))
    return rng.integers(0, n_blocks, size=(replicates, n_blocks))


def percentile_interval(values: np.ndarray, level: float = 0.95) -> ConfidenceInterval:
    """Percentile interval of bootstrap values (NaNs from failed refits dropped).

    Parameters
    ----------
    values : ndarray, shape (replicates,)
    level : float

    Returns
    -------
    ConfidenceInterval
        NaN ends when no value is finite.
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return ConfidenceInterval(float("nan"), float("nan"))
    a = (1.0 - level) / 2.0
    lo, hi = np.quantile(v, [a, 1.0 - a])
    return ConfidenceInterval(float(lo), float(hi))


def mixture_interval(
    values: np.ndarray, weights: np.ndarray, level: float = 0.95
) -> ConfidenceInterval:
    """Percentile interval of the weighted mixture of several models' bootstrap values.

    Every replicate ``r`` contributes each model's value ``values[r, m]`` with that
    replicate's weight ``weights[r, m]`` (each row normalised to sum 1 over its finite
    values), and the interval is read off the pooled, weighted distribution function. This
    is the bootstrap form of the model-averaged tail-area (MATA) interval of Turek &
    Fletcher (2012), whose ends solve Σ_m w_m·P_m(θ ≤ end) = α/2: each model's sampling
    distribution is kept around its own estimate, so the spread *between* models widens
    the interval, where the quantiles of the per-replicate averages Σ_m w_m·θ_m would
    shrink it towards the average. With one model it is the percentile interval (Hazen
    plotting positions).

    Parameters
    ----------
    values : ndarray, shape (B, models)
        NaN where a refit failed.
    weights : ndarray, shape (B, models)
        Akaike weights of each replicate (NaN rows are left out).
    level : float

    Returns
    -------
    ConfidenceInterval
        NaN ends when no value has weight.

    Examples
    --------
    Two models whose bootstrap values sit apart, weighted 3:1 in every replicate:

    >>> v = np.column_stack([np.linspace(0.0, 1.0, 101), np.linspace(2.0, 3.0, 101)])
    >>> w = np.tile([0.75, 0.25], (101, 1))
    >>> lo, hi = mixture_interval(v, w, 0.9)
    >>> round(lo, 3), round(hi, 3)
    (0.062, 2.803)
    """
    v = np.asarray(values, dtype=float)
    w = np.asarray(weights, dtype=float)
    w = np.where(np.isfinite(v) & np.isfinite(w), w, 0.0)
    tot = w.sum(axis=1, keepdims=True)
    keep = tot[:, 0] > 0
    if not keep.any():
        return ConfidenceInterval(float("nan"), float("nan"))
    w = w[keep] / tot[keep]
    v = np.where(w > 0, v[keep], 0.0).ravel()
    w = w.ravel()
    order = np.argsort(v, kind="stable")
    v, w = v[order], w[order]
    pos = (np.cumsum(w) - 0.5 * w) / w.sum()  # Hazen positions, weighted
    used = w > 0
    a = (1.0 - level) / 2.0
    lo, hi = np.interp([a, 1.0 - a], pos[used], v[used])
    return ConfidenceInterval(float(lo), float(hi))


def _block_arrays(
    pop: PopulationSpectra, options: FitOptions
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    cn, cs = pop.classes[options.neutral], pop.classes[options.selected]
    return cn.block_sfs, cs.block_sfs, cn.block_sites, cs.block_sites


def _replicate_task(args: _ReplicateBatch) -> list[dict[str, Any]]:
    """Refit one batch of replicates of one population (runs in a worker)."""
    (n, folded, bn, bs, ln, ls, idx_batch, options, starts, hist) = args
    ex = DfeExpectation(n)
    out: list[dict[str, Any]] = []
    for idx in idx_batch:
        counts = np.bincount(idx, minlength=bn.shape[0])
        try:
            data = SpectrumPair.from_arrays(
                n, folded, counts @ bn, counts @ bs, float(counts @ ln), float(counts @ ls)
            )
        except InputError:
            out.append({})
            continue
        history = None
        if hist is not None:
            try:
                history = replicate_history(
                    data, hist, options.eps, any(m.beneficial for m in options.models)
                )
            except (OptionError, ValueError, FloatingPointError):
                out.append({})
                continue
        rep: dict[str, dict[str, Any]] = {}
        for m in options.models:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                f = fit_model(
                    data,
                    m,
                    eps=options.eps,
                    equilibrium=options.equilibrium,
                    edges_nes=options.edges_nes,
                    expectation=ex,
                    # a None start becomes NaNs here, as it would in the
                    # optimiser: every such refit fails and is counted failed
                    starts=[np.asarray(starts[m.name], dtype=float)],
                    grid_starts=1,  # and the best grid point: two dispersed starts
                    stderr=False,
                    history=history,
                )
            rep[m.name] = {
                "params": f.params,
                "misorientation_rate": f.eps,
                "shares": f.shares.tolist(),
                "fixation_ratio": f.fixation_ratio,
                "theta": f.theta,
                "loglik": f.loglik,
                "success": f.success,
            }
            rep[m.name].update(adaptive_replicate(data, f))
            rep[m.name]["score"] = _score(data, m, options, ex, starts[m.name], history)
            if history is not None:
                rep[m.name]["size_history"] = history.params
        out.append(rep)
    return out


def _score(
    data: SpectrumPair,
    model: DfeModel,
    options: FitOptions,
    ex: DfeExpectation,
    x: np.ndarray | None,
    history: FittedHistory | None = None,
) -> list[float] | None:
    """Gradient of the replicate's negative profile log-likelihood at the point estimate.

    Over the replicates its covariance estimates the variability J of the score (the
    block draws carry the linkage between sites), for the composite-likelihood
    adjustment of the tests between populations (:mod:`driftband.compare.linkage`).
    """
    if x is None:
        return None
    obj = make_objective(data, model, options.eps, options.equilibrium, ex, history)
    x = np.asarray(x, dtype=float)
    g = obj.gradient(x) if obj.analytic_gradient else central_gradient(obj, x)
    return g.tolist()


def default_batch(replicates: int, workers: int) -> int:
    """Replicates per task: about four tasks per worker, between 1 and 10 replicates."""
    return max(1, min(10, math.ceil(replicates / (4 * max(1, workers)))))


def bootstrap_fits(
    fits: list[PopulationFit],
    pops: dict[str, PopulationSpectra],
    options: FitOptions,
    replicates: int,
    seed: int = 1,
    level: float = 0.95,
    workers: int | None = None,
    scheduler: Any = None,
    batch: int | None = None,
    models: dict[str, list[str]] | None = None,
    covered: dict[str, int] | None = None,
) -> None:
    """Block-bootstrap every population fit in place (sets ``PopulationFit.bootstrap``).

    Parameters
    ----------
    fits : list of PopulationFit
        Point estimates (their ``x`` warm-start the refits).
    pops : dict of str to PopulationSpectra
        The per-block spectra of each population (by the names in ``fits``).
    options : FitOptions
    replicates : int
    seed : int
    level : float
        Confidence level of the percentile intervals.
    workers : int, optional
        Local worker processes (default: available cores; 1 runs in this process).
    scheduler : str or distributed.Client, optional
        A dask.distributed scheduler address (or Client) to run the refits on instead.
    batch : int, optional
        Replicates per task (default :func:`default_batch`); the results do not depend
        on it.
    models : dict of str to list of str, optional
        The models refitted for each population (default: every model of ``options``
        that the population has).
    covered : dict of str to int, optional
        Base pairs covered by each population's blocks
        (:func:`driftband.fit.api.covered_bp`): with fewer than 20 blocks the warning
        then proposes a block size that would give 20.

    Raises
    ------
    InputError
        A population without per-block spectra (fewer than 2 blocks).
    OptionError
        Bad ``replicates`` or ``level``.
    """
    check_bootstrap_settings(replicates, level)
    if batch is None:
        nw = 1 if scheduler is not None else resolve_workers(workers)
        batch = default_batch(replicates, nw)
    tasks: list[_ReplicateBatch] = []
    owners: list[int] = []
    wanted: list[list[str]] = []
    distinct: list[int] = []
    pis: list[np.ndarray] = []
    for k, pf in enumerate(fits):
        pop = pops[pf.population]
        names = [
            m.name
            for m in options.models
            if m.name in pf.fits and (models is None or m.name in models.get(pf.population, ()))
        ]
        wanted.append(names)
        bn, bs, ln, ls = _block_arrays(pop, options)
        nb = bn.shape[0]
        if nb < 2:
            raise InputError(
                f"population {pf.population!r}: the spectra have {nb} block; "
                "a block bootstrap needs per-block spectra (from 'driftband "
                "spectra' or 'driftband simulate')"
            )
        if nb < MIN_BLOCKS:
            warnings.warn(
                f"population {pf.population!r}: only {nb} blocks; bootstrap "
                f"intervals from fewer than {MIN_BLOCKS} blocks are unreliable"
                + block_size_hint((covered or {}).get(pf.population, 0)),
                DriftbandWarning,
                stacklevel=2,
            )
        # Populations of one dataset share genomic blocks: resample them jointly (paired),
        # so that between-population comparisons keep the covariance of shared regions.
        stream = zlib.crc32(pf.dataset.encode())
        idx = resample_indices(nb, replicates, seed, stream)
        distinct.append(len({tuple(np.sort(row)) for row in idx}))
        pis.append(_replicate_pi(pf.data, bn, ln, idx))
        opts = dataclasses.replace(options, models=tuple(options.model(n) for n in names))
        starts = {name: pf.fits[name].x for name in names}
        hist = next((recorded_history(pf.fits[nm]) for nm in names), None)
        for b0 in range(0, replicates, batch):
            tasks.append(
                (
                    pf.data.n,
                    pf.data.folded,
                    bn,
                    bs,
                    ln,
                    ls,
                    idx[b0 : b0 + batch],
                    opts,
                    starts,
                    hist,
                )
            )
            owners.append(k)
    log.info("bootstrap: %d replicates x %d populations", replicates, len(fits))
    if scheduler is None and len(tasks) <= 1:
        workers = 1
    sizes = [len(t[6]) * len(t[7].models) for t in tasks]
    with Progress("bootstrap", sum(sizes), "refits") as prog:
        results = parallel_map(
            _replicate_task,
            tasks,
            workers=workers,
            scheduler=scheduler,
            name="bootstrap",
            on_result=lambda i, _r: prog.advance(sizes[i]),
        )
    per_pop: dict[int, list[dict[str, Any]]] = {}
    for k, res in zip(owners, results):
        per_pop.setdefault(k, []).extend(res)
    for k, pf in enumerate(fits):
        reps = per_pop.get(k, [])
        blocks = int(pops[pf.population].classes[options.neutral].block_sfs.shape[0])
        boots = {
            name: _summarise(pf.fits[name], [r.get(name) for r in reps], level)
            for name in wanted[k]
        }
        every = set(wanted[k]) == set(pf.fits) and len(pf.fits) > 1
        pf.bootstrap = BootstrapResult(
            replicates,
            blocks,
            seed,
            level,
            boots,
            _averaged(pf, boots, level) if every else None,
            distinct[k],
            pis[k],
        )


def _replicate_pi(
    data: SpectrumPair, bn: np.ndarray, ln: np.ndarray, idx: np.ndarray
) -> np.ndarray:
    """π per site of the neutral class (Tajima 1983) in each replicate's block draw.

    NaN where a replicate's draw has no callable neutral site.
    """
    n = data.n
    if not len(idx):
        return np.empty(0)
    counts = np.stack([np.bincount(row, minlength=bn.shape[0]) for row in idx])
    sfs, sites = counts @ bn, counts @ ln
    i = np.arange(1, n // 2 + 1 if data.folded else n)
    total = sfs[:, i] @ (i * (n - i) / (n * (n - 1) / 2.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(sites > 0, total / sites, np.nan)


def averaged_replicates(
    shares: np.ndarray, loglik: np.ndarray, n_params: np.ndarray, ok: np.ndarray, level: float
) -> tuple[np.ndarray, np.ndarray, list[ConfidenceInterval]]:
    """Model-averaged shares of every replicate and the intervals of their mixture.

    In each replicate the Akaike weights (:func:`~driftband.fit.results.akaike_weights`)
    come from that replicate's refits; a family whose refit does not count gets weight 0,
    and a replicate where none counts is left out (NaN).

    Parameters
    ----------
    shares : ndarray, shape (B, models, bands)
    loglik : ndarray, shape (B, models)
    n_params : ndarray, shape (models,)
    ok : ndarray of bool, shape (B, models)
        Whether each refit counts (converged, finite shares).
    level : float

    Returns
    -------
    averaged : ndarray, shape (B, bands)
        Σ_m w_m·share_m per replicate.
    weights : ndarray, shape (B, models)
    intervals : list of ConfidenceInterval
        One per band, from :func:`mixture_interval`.
    """
    B, M, K = shares.shape
    averaged = np.full((B, K), np.nan)
    weights = np.full((B, M), np.nan)
    pooled = np.full((B, M, K), np.nan)
    names = [str(i) for i in range(M)]
    for r in range(B):
        aic = {
            names[i]: 2 * float(n_params[i]) - 2 * float(loglik[r, i]) if ok[r, i] else math.nan
            for i in range(M)
        }
        w = np.array(list(akaike_weights(aic).values()))
        if not np.isfinite(w).all():
            continue
        use = w > 0
        averaged[r] = np.sum(w[use, None] * shares[r, use], axis=0)
        weights[r] = w
        pooled[r, use] = shares[r, use]
    return averaged, weights, [mixture_interval(pooled[:, :, j], weights, level) for j in range(K)]


def _averaged(
    pf: PopulationFit, models: dict[str, ModelBootstrap], level: float
) -> AveragedBootstrap:
    """The families' replicates of one population, averaged (:func:`averaged_replicates`)."""
    names = list(models)
    mbs = list(models.values())
    B = mbs[0].shares.shape[0]
    K = len(pf.best.shares)
    loglik = np.column_stack(
        [mb.loglik if mb.loglik is not None else np.full(B, np.nan) for mb in mbs]
    )
    ok = np.column_stack([mb.ok if mb.loglik is not None else np.zeros(B, bool) for mb in mbs])
    shares, w, intervals = averaged_replicates(
        np.stack([mb.shares.reshape(B, K) for mb in mbs], axis=1),
        loglik,
        np.array([pf.fits[m].n_params for m in names]),
        ok,
        level,
    )
    return AveragedBootstrap(shares, {m: w[:, i] for i, m in enumerate(names)}, intervals)


def _summarise(f: Any, reps: list[dict[str, Any] | None], level: float) -> ModelBootstrap:
    """The replicates of one model, each in its place (NaN where the refit failed), and
    percentile intervals from the converged ones."""
    B = len(reps)
    nan = float("nan")

    def col(get: Any) -> np.ndarray:
        return np.array([get(r) if r else nan for r in reps], dtype=float)

    shares = np.array([r["shares"] if r else [nan] * len(f.shares) for r in reps], dtype=float)
    shares = shares.reshape(B, len(f.shares))
    converged = np.array([bool(r and r["success"]) for r in reps], dtype=bool)
    params = {p: col(lambda r, p=p: r["params"][p]) for p in f.params}
    params["misorientation_rate"] = col(lambda r: r["misorientation_rate"])
    params["fixation_ratio"] = col(lambda r: r["fixation_ratio"])
    if any(r and "size_history" in r for r in reps):
        # theta on the current size: the Ne ratio of the comparisons on explicit histories
        params["theta"] = col(lambda r: r["theta"])
    for key in ALPHA_KEYS:
        if any(r and key in r for r in reps):
            params[key] = col(lambda r, key=key: r.get(key, nan))
    # the refitted size history's parameters (e.g. history_nu, history_tau)
    for hp in sorted({k for r in reps if r for k in r.get("size_history") or {}}):
        params[f"history_{hp}"] = col(lambda r, hp=hp: (r.get("size_history") or {}).get(hp, nan))
    dim = max((len(r["score"]) for r in reps if r and r.get("score") is not None), default=0)
    score = np.array(
        [r["score"] if r and r.get("score") is not None else [nan] * dim for r in reps],
        dtype=float,
    ).reshape(B, dim)
    mb = ModelBootstrap(
        0, 0, params, shares, {}, [], converged, col(lambda r: r["loglik"]), score if dim else None
    )
    ok = mb.ok
    mb.replicates, mb.failed = int(ok.sum()), int(B - ok.sum())
    mb.params_ci = {p: percentile_interval(v[ok], level) for p, v in params.items()}
    mb.shares_ci = [percentile_interval(shares[ok, j], level) for j in range(shares.shape[1])]
    return mb
