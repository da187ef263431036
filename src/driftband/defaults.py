"""Defaults shared by the stages, the command line and study files (one home each).

A light module (no numpy, no scipy), so that the command line can show the defaults in
its help without loading the numerical core.
"""

from __future__ import annotations

__all__ = [
    "COMPARE_TESTS",
    "DEFAULT_BLOCK_SIZE",
    "DEFAULT_EDGES_NES",
    "DEFAULT_LEVEL",
    "DEFAULT_MODELS",
    "DEFAULT_REPLICATES",
    "DEFAULT_SEED",
    "HEADLINES",
    "MIN_BLOCKS",
    "format_edges",
]

#: Band edges on |Ne·s| (= |S|/4): 0, 1, 10, 100 and an open last band; the first band
#: (|Ne·s| < 1) is the effectively neutral one.
DEFAULT_EDGES_NES: tuple[float, ...] = (0.0, 1.0, 10.0, 100.0)
#: DFE families fitted unless told otherwise.
DEFAULT_MODELS: tuple[str, ...] = ("gamma", "lognormal", "discrete")
#: The tests between two populations, in the order they are run and reported.
COMPARE_TESTS: tuple[str, ...] = (
    "shared_dfe_lrt",
    "neutral_share_difference",
    "ne_only_free_lrt",
    "ne_only_lrt",
)
#: How the headline shares are made: averaged over the DFE families by Akaike weight (the
#: default), or from the AIC-best family alone.
HEADLINES: tuple[str, ...] = ("averaged", "best")
#: Bootstrap replicates of ``driftband run``: percentile intervals from B = 200 cover within
#: one point of nominal at 95 % (benchmarks/bench_interval_coverage.py: 94.2 %).
DEFAULT_REPLICATES = 200
#: Length of the genomic blocks of the block bootstrap, in bp.
DEFAULT_BLOCK_SIZE = 100_000
#: Confidence level of bootstrap intervals.
DEFAULT_LEVEL = 0.95
#: Seed of the bootstrap's random draws.
DEFAULT_SEED = 1
#: Fewer blocks than this make a bootstrap interval unreliable (flagged wherever shown).
MIN_BLOCKS = 20


def format_edges(edges: tuple[float, ...] = DEFAULT_EDGES_NES) -> str:
    """Band edges as written on the command line.

    Examples
    --------
    >>> format_edges()
    '0,1,10,100'
    """
    return ",".join(f"{v:g}" for v in edges)
