"""The neutral-band share difference of two populations, from their paired bootstrap (no I/O).

share_B − share_A of new selected-class mutations in the effectively neutral band, with the
percentile interval of the bootstrap differences and a two-sided bootstrap p-value
(2·min of the tail fractions, with the (k+1)/(B+1) rule of Davison & Hinkley 1997, sec.
4.4, so that p is never 0). The genomic blocks carry the linkage between sites, so the
test needs no further adjustment for it; it does need enough blocks.
"""

from __future__ import annotations

import numpy as np

from ..defaults import MIN_BLOCKS
from ..fit.results import PopulationFit
from .table import ComparisonRow

__all__ = ["share_difference"]


def _averaged_draws(pop: PopulationFit) -> np.ndarray | None:
    """The model-averaged neutral-share draws, when the population's headline is averaged
    and every family was bootstrapped."""
    boot = pop.bootstrap
    if boot is None or boot.averaged is None or pop.headline_method != "averaged":
        return None
    return boot.averaged.share_draws(0)


def share_difference(pop_a: PopulationFit, pop_b: PopulationFit, model: str) -> ComparisonRow:
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
