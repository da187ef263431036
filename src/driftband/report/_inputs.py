"""Reading and checking the files the report renders: fit JSON, compare TSV, spectra JSON.

The report only reads plain dictionaries; the layouts are those of ``driftband fit``
(:mod:`driftband.fit.io`), ``driftband compare`` (:mod:`driftband.cli.compare`) and
``driftband spectra`` (:mod:`driftband.spectra.io`); schemas and their versions are
checked by those modules' own checks. Problems are raised as
:class:`~driftband.exceptions.InputError` naming the file and the record.
"""

from __future__ import annotations

import csv
import math
import os
from typing import Any

from .._io import load_json
from ..compare.table import COLUMNS
from ..effect import DEFAULT_EFFECT, check_effect
from ..exceptions import InputError
from ..fit.io import check_fit_schema, fits_from_doc, read_fit_json
from ..spectra.io import check_spectra_schema, upgrade_spectra_doc

__all__ = [
    "NUMERIC_COMPARE_COLUMNS",
    "check_compare_rows",
    "check_fit_doc",
    "check_spectra_doc",
    "read_compare_tsv",
    "read_fit_doc",
    "read_spectra_doc",
]

#: Columns of compare.tsv read as numbers (empty or ``nan`` → None).
#: Columns of compare.tsv that hold words or flags, not numbers.
TEXT_COMPARE_COLUMNS = (
    "population_a",
    "population_b",
    "test",
    "model",
    "adjust",
    "p_at_floor",
    "out_of_equilibrium",
    "note",
)
NUMERIC_COMPARE_COLUMNS = tuple(c for c in COLUMNS if c not in TEXT_COMPARE_COLUMNS)
_REQUIRED_COMPARE = ("population_a", "population_b", "test", "model")


def _load_json(path: str | os.PathLike, what: str) -> Any:
    return load_json(path, f"{what} JSON file")


def _is_num(v: Any) -> bool:
    return isinstance(v, int | float) and not isinstance(v, bool)


def check_fit_doc(doc: Any, path: str | os.PathLike | None = None) -> None:
    """Check that ``doc`` has the layout of a fit file, as far as the report reads it.

    Parameters
    ----------
    doc : dict
        A parsed fit file.
    path : path-like, optional
        Its file, named in the error message.

    Raises
    ------
    InputError
        Not a fit file, an unsupported version, or a population record the report cannot
        render (the message names the population and the model).
    """
    check_fit_schema(doc, path)
    try:
        check_effect((doc.get("options") or {}).get("effect", DEFAULT_EFFECT))
    except ValueError as err:
        raise InputError(f"options: effect {err}; the file is damaged", path) from None
    pops = doc.get("populations")
    if not isinstance(pops, dict) or not pops:
        raise InputError("the fit file holds no populations; rerun 'driftband fit'", path)
    for name, p in pops.items():
        where = f"population {name!r}"
        if not isinstance(p, dict) or not isinstance(p.get("models"), dict) or not p["models"]:
            raise InputError(f"{where} has no fitted models; the file is damaged", path)
        best = p.get("best_model")
        if best not in p["models"]:
            raise InputError(
                f"{where}: best_model {best!r} is not among its models "
                f"({', '.join(p['models'])}); the file is damaged",
                path,
            )
        if not isinstance(p.get("data"), dict) or not _is_num(p["data"].get("n")):
            raise InputError(
                f"{where} has no 'data' record with the sample size n; the file is damaged", path
            )
        for m, f in p["models"].items():
            if not isinstance(f, dict):
                raise InputError(f"{where}, model {m!r}: not a record", path)
            shares, edges = f.get("shares"), f.get("band_edges")
            if (
                not isinstance(shares, list)
                or not isinstance(edges, list)
                or len(shares) != len(edges)
                or not shares
            ):
                raise InputError(
                    f"{where}, model {m!r}: 'shares' and 'band_edges' must be "
                    "lists of equal length (one per |Ne*s| band); the file is "
                    "damaged or from another driftband version",
                    path,
                )
            if not all(_is_num(e) for e in edges) or edges[0] != 0:
                raise InputError(
                    f"{where}, model {m!r}: 'band_edges' must be numbers on |Ne*s| starting at 0",
                    path,
                )


def read_fit_doc(path: str | os.PathLike) -> dict[str, Any]:
    """Read a fit file (``driftband fit`` output) and check its layout.

    Parameters
    ----------
    path : path-like

    Returns
    -------
    dict
        The parsed document.

    Raises
    ------
    InputError
        Missing file, not JSON, not a fit file, or a damaged record.
    """
    doc = read_fit_json(path)
    check_fit_doc(doc, path)
    fits_from_doc(doc, path)  # every value in range (e.g. shares in [0, 1])
    return doc


def _number(text: str, path: str | os.PathLike, line: int, column: str) -> float | None:
    t = text.strip()
    if t == "" or t.lower() in ("nan", "na", "none"):
        return None
    try:
        v = float(t)
    except ValueError:
        raise InputError(f"column {column!r}: {text!r} is not a number", path, line) from None
    return None if math.isnan(v) else v


def read_compare_tsv(path: str | os.PathLike) -> list[dict[str, Any]]:
    """Read a comparison table (``driftband compare`` output).

    Parameters
    ----------
    path : path-like

    Returns
    -------
    list of dict
        One dict per row, keyed by column name; the columns of
        :data:`NUMERIC_COMPARE_COLUMNS` as float or None, the others as str.

    Raises
    ------
    InputError
        Missing file, missing columns, a row with the wrong number of fields or a
        non-number in a numeric column (file and line named), or no rows at all.
    """
    try:
        with open(path, encoding="utf-8", newline="") as fh:
            lines = list(csv.reader(fh, delimiter="\t"))
    except FileNotFoundError:
        raise InputError("file not found", path) from None
    except IsADirectoryError:
        raise InputError("is a directory, not a comparison table", path) from None
    except UnicodeDecodeError:
        raise InputError("not a comparison table (not UTF-8 text)", path) from None
    if not lines:
        raise InputError("empty file; expected the table written by 'driftband compare'", path)
    header = [h.strip() for h in lines[0]]
    missing = [c for c in _REQUIRED_COMPARE if c not in header]
    if missing:
        raise InputError(
            f"not a comparison table from 'driftband compare' (no column "
            f"{missing[0]!r} in the header)",
            path,
            1,
        )
    rows = []
    for ln, fields in enumerate(lines[1:], start=2):
        if not fields or all(not f.strip() for f in fields):
            continue
        if len(fields) != len(header):
            raise InputError(f"{len(fields)} fields, the header has {len(header)}", path, ln)
        row: dict[str, Any] = {}
        for col, val in zip(header, fields):
            row[col] = _number(val, path, ln, col) if col in NUMERIC_COMPARE_COLUMNS else val
        row["_line"] = ln
        rows.append(row)
    if not rows:
        raise InputError(
            "the comparison table has a header but no rows; rerun 'driftband compare'", path
        )
    return rows


def check_compare_rows(
    rows: list[dict[str, Any]], fit_doc: dict[str, Any], path: str | os.PathLike | None = None
) -> None:
    """Check that every comparison names populations of the fit file.

    Raises
    ------
    InputError
        A row naming a population the fit file does not hold (line named).
    """
    pops = fit_doc["populations"]
    for k, r in enumerate(rows):
        for col in _REQUIRED_COMPARE:
            if not isinstance(r.get(col), str) or not r[col]:
                raise InputError(
                    f"comparison row {k + 1}: no value in column {col!r}", path, r.get("_line")
                )
        for col in ("population_a", "population_b"):
            if r[col] not in pops:
                raise InputError(
                    f"population {r[col]!r} is not in the fit file (it holds "
                    f"{', '.join(pops)}); was 'driftband compare' run on another "
                    "fit file?",
                    path,
                    r.get("_line"),
                )


def check_spectra_doc(doc: Any, path: str | os.PathLike | None = None) -> None:
    """Check that ``doc`` has the layout of a spectra file, as far as the report reads it.

    Parameters
    ----------
    doc : dict
        A parsed spectra file.
    path : path-like, optional
        Its file, named in the error message.

    Raises
    ------
    InputError
        Not a spectra file, an unsupported version (the check of
        :func:`driftband.spectra.io.check_spectra_schema`), no populations.
    """
    check_spectra_schema(doc, path)
    pops = doc.get("populations")
    if not isinstance(pops, dict) or not pops:
        raise InputError("the spectra file holds no populations", path)
    for name, p in pops.items():
        if not isinstance(p, dict) or not _is_num(p.get("n")):
            raise InputError(f"population {name!r} has no sample size n; the file is damaged", path)


def read_spectra_doc(path: str | os.PathLike) -> dict[str, Any]:
    """Read a spectra file (``driftband spectra`` output) and check its layout.

    Raises
    ------
    InputError
        Missing file, not JSON, not a spectra file.
    """
    doc = _load_json(path, "spectra")
    check_spectra_doc(doc, path)
    return upgrade_spectra_doc(doc, path)
