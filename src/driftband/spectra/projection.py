"""From summed counts to spectra: sample size, hypergeometric projection, entry 0, folding.

:func:`spectra_from_counts` turns the counts of all regions
(:class:`~driftband.spectra.counting.RegionCounts`, summed) into spectra: it chooses the
sample size ``n`` of each population, projects every site to ``n`` copies
(:func:`projection_matrix`), fills entry 0 with the callable sites not seen as variable,
and folds when asked. Because projection comes after summation, results do not depend on
the region order.

Default sample size (``project=None``): per population, the largest ``n`` such that at
least 90 % of the usable records (biallelic SNPs and monomorphic records at callable class
sites) have ``n`` or more called gene copies (:func:`choose_sample_size`). Without missing
data this is all gene copies and nothing is projected.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from ..exceptions import InputError, OptionError
from ._types import Block, ClassSpectrum, PopulationSpectra, SpectraSet
from .counting import CountDesign, RegionCounts
from .io import add_diversity

__all__ = [
    "DEFAULT_KEEP_FRACTION",
    "choose_sample_size",
    "projection_matrix",
    "spectra_from_counts",
]

#: Fraction of the usable records that the default sample size keeps.
DEFAULT_KEEP_FRACTION = 0.9


def projection_matrix(m: int, n: int) -> np.ndarray:
    r"""Hypergeometric projection from ``m`` to ``n`` gene copies.

    .. math:: P_{d j} = \binom{d}{j} \binom{m - d}{n - j} \Big/ \binom{m}{n}

    the probability that ``n`` copies drawn without replacement from ``m``, ``d`` of them
    derived, hold ``j`` derived copies.

    Parameters
    ----------
    m, n : int
        ``0 <= n <= m``.

    Returns
    -------
    ndarray of float64, shape (m + 1, n + 1)
        Rows sum to 1.

    Examples
    --------
    >>> projection_matrix(4, 2)[2].round(4).tolist()
    [0.1667, 0.6667, 0.1667]
    """
    if not 0 <= n <= m:
        raise ValueError(f"projection needs 0 <= n <= m, got n={n}, m={m}")
    return _projection_rows(m, n, np.arange(m + 1))


def _log_factorials(m: int) -> np.ndarray:
    """``log(k!)`` for k = 0..m (math.lgamma: no scipy import on the command line's path)."""
    return np.array([math.lgamma(k + 1.0) for k in range(m + 1)])


def _projection_band(m: int, n: int, d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The non-zero band of :func:`projection_matrix` for sites with ``d`` derived copies.

    Entry ``(d, j)`` can be non-zero only for ``d - (m - n) <= j <= d``. Returns ``j``
    and the probabilities, both shape (len(d), m - n + 1); columns with ``j`` outside
    ``0..n`` hold 0.
    """
    q = m - n
    lf = _log_factorials(m)
    d = np.asarray(d, dtype=np.int64)[:, None]
    t = np.arange(q + 1, dtype=np.int64)[None, :]
    j = d - q + t
    ok = (j >= 0) & (j <= n)
    jc = np.clip(j, 0, n)
    logp = lf[d] + lf[m - d] - lf[jc] - lf[n - jc] - lf[q - t] - lf[t] - (lf[m] - lf[n] - lf[q])
    return j, np.where(ok, np.exp(np.where(ok, logp, 0.0)), 0.0)


def _projection_rows(m: int, n: int, d: np.ndarray) -> np.ndarray:
    """Rows ``d`` of :func:`projection_matrix`, from a table of log-factorials."""
    lf = _log_factorials(m)
    d = np.asarray(d, dtype=np.int64)[:, None]
    j = np.arange(n + 1, dtype=np.int64)[None, :]
    ok = (j <= d) & (n - j <= m - d)
    jj = np.minimum(j, d)
    kk = np.clip(n - j, 0, m - d)
    logp = (
        lf[d]
        - lf[jj]
        - lf[d - jj]
        + lf[m - d]
        - lf[kk]
        - lf[m - d - kk]
        - (lf[m] - lf[n] - lf[m - n])
    )
    return np.where(ok, np.exp(np.where(ok, logp, 0.0)), 0.0)


def choose_sample_size(
    m: np.ndarray, weights: np.ndarray, keep: float = DEFAULT_KEEP_FRACTION
) -> int:
    """The default projection: the largest ``n`` kept by at least ``keep`` of the sites.

    Parameters
    ----------
    m : ndarray of int, shape (k,)
        Called gene copies.
    weights : ndarray of int, shape (k,)
        Number of sites with each ``m``.
    keep : float
        Fraction of sites that must have ``m >= n``.

    Examples
    --------
    >>> choose_sample_size(np.array([10, 9, 8]), np.array([85, 10, 5]))
    9
    """
    m = np.asarray(m, np.int64)
    w = np.asarray(weights, np.int64)
    if not w.sum():
        raise ValueError("no sites")
    order = np.argsort(-m, kind="stable")
    cum = np.cumsum(w[order])
    need = keep * cum[-1]
    i = int(np.searchsorted(cum, need - 1e-9 * cum[-1]))
    return int(m[order][min(i, m.size - 1)])


def _fold(sfs: np.ndarray, n: int) -> np.ndarray:
    """Fold spectra (rows) of ``n`` copies: entry j + entry n - j, middle entry once."""
    h = n // 2
    out = sfs[:, : h + 1] + sfs[:, ::-1][:, : h + 1]
    if n % 2 == 0:
        out[:, h] = sfs[:, h]
    return out


def spectra_from_counts(
    counts: RegionCounts,
    design: CountDesign,
    blocks: Sequence[Block],
    project: int | Mapping[str, int] | None = None,
    keep: float = DEFAULT_KEEP_FRACTION,
) -> SpectraSet:
    """Assemble spectra from summed counts: choose ``n``, project, fill entry 0, fold.

    Parameters
    ----------
    counts : RegionCounts
        Sum over all regions.
    design : CountDesign
    blocks : sequence of Block
        The plan's blocks (the block indices of ``counts``).
    project : int or mapping of str to int, optional
        Sample size for all populations, or per population; others get the default rule.
    keep : float
        Fraction of sites the default rule keeps.

    Returns
    -------
    SpectraSet
        Spectra are int64 when nothing was projected, float64 (expected counts) otherwise;
        ``provenance`` is left empty.

    Raises
    ------
    OptionError
        A sample size that is impossible for a population.
    InputError
        A class left without callable sites in a population.
    """
    C, B = len(design.classes), len(blocks)
    L = np.zeros(C * B, np.int64)
    R = np.zeros(C * B, np.int64)
    if counts.callable.size:
        np.add.at(L, counts.callable[:, 0] * B + counts.callable[:, 1], counts.callable[:, 2])
    if counts.removed.size:
        np.add.at(R, counts.removed[:, 0] * B + counts.removed[:, 1], counts.removed[:, 2])
    per = {} if project is None or isinstance(project, int) else dict(project)
    default = project if isinstance(project, int) else per.pop("*", None)
    for p in per:
        if p not in design.populations:
            raise OptionError(
                f"--project {p}={per[p]}: {p!r} is not a focal population "
                f"({', '.join(design.populations)})"
            )
    skipped = dict(counts.skipped)
    pops: dict[str, PopulationSpectra] = {}
    folded = design.ancestral == "fold"
    for p in design.populations:
        rows = counts.rows.get(p, np.zeros((0, 5), np.int64))
        tgt, m, d, w = rows[:, 0] * B + rows[:, 1], rows[:, 2], rows[:, 3], rows[:, 4]
        n = per.get(p, default)
        mmax = int(m.max()) if m.size else 0
        if n is None:
            if not w.sum():
                raise InputError(
                    f"population {p!r}: no usable record at callable class "
                    "sites; give the sample size with --project",
                    None,
                )
            n = choose_sample_size(m, w, keep)
            if n < 2:
                raise InputError(
                    f"population {p!r}: too much missing data (the default "
                    f"rule gives n={n} gene copies); lower it with --project "
                    "or filter samples",
                    None,
                )
        else:
            if n < 2:
                raise OptionError(f"--project {p}={n}: a spectrum needs n >= 2 gene copies")
            if m.size and n > mmax:
                raise OptionError(
                    f"--project {p}={n}: at most {mmax} gene copies are called "
                    f"at any site of population {p!r}"
                )
        kept = m >= n
        dropped = np.bincount(tgt[~kept], weights=w[~kept], minlength=C * B).astype(np.int64)
        counted = np.bincount(tgt[kept], weights=w[kept], minlength=C * B).astype(np.int64)
        sites = L - R - dropped
        skipped[f"missing_data:{p}"] = int(dropped.sum())
        exact = kept & (m == n)
        S: np.ndarray = (
            np.bincount(
                tgt[exact] * (n + 1) + d[exact], weights=w[exact], minlength=C * B * (n + 1)
            )
            .astype(np.int64)
            .reshape(C * B, n + 1)
        )
        proj = kept & (m > n)
        if proj.any():
            Sf = S.astype(np.float64)
            flat = Sf.reshape(-1)
            for mm in np.unique(m[proj]).tolist():
                sel = proj & (m == mm)
                j, prob = _projection_band(mm, n, d[sel])
                idx = tgt[sel, None] * (n + 1) + j
                ok = (j >= 0) & (j <= n)
                flat += np.bincount(idx[ok], weights=(prob * w[sel, None])[ok], minlength=flat.size)
            S = Sf
        S[:, 0] += sites - counted
        if np.any(S[:, 0] < -1e-6):
            raise RuntimeError("negative entry 0: callable-site accounting is inconsistent")
        if S.dtype.kind == "f":
            S[:, 0] = np.maximum(S[:, 0], 0.0)  # round-off of the projection
        if folded:
            S = _fold(S, n)
        classes = {}
        for ci, c in enumerate(design.classes):
            cs = ClassSpectrum(S[ci * B : (ci + 1) * B], sites[ci * B : (ci + 1) * B])
            if cs.sites <= 0:
                raise InputError(
                    f"class {c!r} has no callable sites left in population "
                    f"{p!r} after filtering (mask, FILTER, missing data with "
                    f"n={n}); check the inputs or lower --project",
                    None,
                )
            classes[c] = cs
        ps = PopulationSpectra(p, int(n), folded, classes, design.polarisation)
        add_diversity(ps)
        pops[p] = ps
    return SpectraSet(pops, list(blocks), skipped, {})
