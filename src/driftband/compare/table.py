"""The comparison table ``compare.tsv``: its rows, its columns and its writer."""

from __future__ import annotations

import csv
import os
from dataclasses import dataclass, field
from typing import Any

from .._io import atomic_output, tsv_cell

__all__ = ["COLUMNS", "ComparisonRow", "write_compare_tsv"]


@dataclass
class ComparisonRow:
    """One row of ``compare.tsv`` (test-specific values in ``extra``, by column name)."""

    population_a: str
    population_b: str
    test: str
    model: str
    statistic: float = float("nan")
    df: float = float("nan")
    p_value: float = float("nan")
    p_adjusted: float = float("nan")
    adjust: str = ""
    estimate: float = float("nan")
    ci_low: float = float("nan")
    ci_high: float = float("nan")
    extra: dict[str, Any] = field(default_factory=dict)
    note: str = ""


#: Columns of ``compare.tsv``.
COLUMNS = [
    "population_a",
    "population_b",
    "test",
    "model",
    "statistic",
    "df",
    "p_raw",
    "linkage_factor",
    "statistic_linkage",
    "df_linkage",
    "p_value",
    "p_adjusted",
    "adjust",
    "p_at_floor",
    "estimate",
    "ci_low",
    "ci_high",
    "ne_ratio",
    "ne_ratio_pi",
    "predicted_share_b",
    "observed_share_b",
    "out_of_equilibrium",
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
