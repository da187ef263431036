"""The comparison table ``compare.tsv``: its columns and its writer."""

from __future__ import annotations

import csv
import os

from .._io import atomic_output, tsv_cell
from .pair import ComparisonRow

__all__ = ["COLUMNS", "write_compare_tsv"]

#: Columns of ``compare.tsv``.
COLUMNS = [
    "population_a",
    "population_b",
    "test",
    "model",
    "statistic",
    "df",
    "p_value",
    "p_adjusted",
    "p_at_floor",
    "estimate",
    "ci_low",
    "ci_high",
    "ne_ratio",
    "predicted_share_b",
    "observed_share_b",
    "note",
]


def write_compare_tsv(
    rows: list[ComparisonRow], path: str | os.PathLike, force: bool = False
) -> None:
    """Write ``compare.tsv`` (columns :data:`COLUMNS`) atomically.

    Parameters
    ----------
    rows : list of ComparisonRow
    path : path-like
    force : bool
        Overwrite an existing file.
    """
    with atomic_output(path, force=force, newline="") as fh:
        w = csv.writer(fh, delimiter="\t", lineterminator="\n")
        w.writerow(COLUMNS)
        for r in rows:
            d = {**r.__dict__, **r.extra}
            w.writerow([tsv_cell(d.get(c)) for c in COLUMNS])
