"""Tests between populations: one shared DFE, the neutral-band share, "only Ne differs".

:mod:`~driftband.compare.pair` runs the tests of one pair (no I/O), with
:mod:`~driftband.compare.lrt` (joint fits, χ̄²), :mod:`~driftband.compare.linkage` (the
adjustment for linked sites) and :mod:`~driftband.compare.share` (the share difference);
:mod:`~driftband.compare.api` every pair with the p-values adjusted across pairs
(the API behind ``driftband compare`` and the compare stage of ``driftband run``), and
:mod:`~driftband.compare.table` writes ``compare.tsv``.
"""

from .api import adjust_pvalues, check_compare_settings, compare_fits, resolve_pairs
from .lrt import scale_shift
from .pair import compare_pair, neutral_pi
from .table import COLUMNS, ComparisonRow, write_compare_tsv

__all__ = [
    "COLUMNS",
    "ComparisonRow",
    "adjust_pvalues",
    "check_compare_settings",
    "compare_fits",
    "compare_pair",
    "neutral_pi",
    "resolve_pairs",
    "scale_shift",
    "write_compare_tsv",
]
