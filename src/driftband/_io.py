"""Small file utilities shared by every stage: checksums, provenance, strict JSON, text.

Output writing lives in :mod:`driftband._outputs` (re-exported here).
"""

from __future__ import annotations

import datetime as _dt
import gzip
import hashlib
import json
import os
import platform
import re
import sys
from typing import IO, Any, overload

import numpy as np

from ._outputs import (
    OutputSet,
    add_inputs,
    after_commit,
    atomic_output,
    check_output_path,
    check_outputs,
    commit_output,
    output_set,
    temporary_output,
)
from .exceptions import InputError

__all__ = [
    "OutputSet",
    "add_inputs",
    "after_commit",
    "atomic_output",
    "check_output_path",
    "check_outputs",
    "commit_output",
    "file_record",
    "json_ready",
    "load_json",
    "open_text",
    "output_set",
    "provenance",
    "sha256sum",
    "temporary_output",
    "tsv_cell",
]


def sha256sum(path: str | os.PathLike, chunk: int = 1 << 20) -> str:
    """Hex SHA-256 checksum of a file; of a folder (a VCF Zarr store), of the relative
    paths and contents of its files in path order."""
    h = hashlib.sha256()
    for rel, full in _files(path):
        if rel:
            h.update(rel.encode() + b"\0")
        with open(full, "rb") as fh:
            while block := fh.read(chunk):
                h.update(block)
    return h.hexdigest()


def _files(path: str | os.PathLike) -> list[tuple[str, str]]:
    """``[("", path)]`` for a file; for a folder, its files as (relative path, path)."""
    p = os.fspath(path)
    if not os.path.isdir(p):
        return [("", p)]
    out = []
    for top, dirs, names in os.walk(p):
        dirs.sort()
        for n in names:
            full = os.path.join(top, n)
            out.append((os.path.relpath(full, p).replace(os.sep, "/"), full))
    return sorted(out)


@overload
def file_record(path: str | os.PathLike) -> dict[str, Any]: ...
@overload
def file_record(path: None) -> None: ...
@overload
def file_record(path: str | os.PathLike | None) -> dict[str, Any] | None: ...
def file_record(path: str | os.PathLike | None) -> dict[str, Any] | None:
    """Path, size and SHA-256 of an input file or folder (``-`` for standard input)."""
    if path is None:
        return None
    p = os.fspath(path)
    if p == "-":
        return {"path": "-", "size": None, "sha256": None}
    size = sum(os.path.getsize(f) for _, f in _files(p))
    return {"path": os.path.abspath(p), "size": size, "sha256": sha256sum(p)}


def provenance(
    options: dict[str, Any] | None = None, inputs: dict[str, Any] | None = None
) -> dict[str, Any]:
    """Provenance dictionary embedded in every output: version, command, options, inputs.

    Parameters
    ----------
    options : dict, optional
        The options the result depends on (JSON-serialisable).
    inputs : dict, optional
        Input name → :func:`file_record` (or list of them).
    """
    import numpy
    import scipy

    from . import __version__

    return {
        "software": "driftband",
        "version": __version__,
        "command": [os.path.basename(sys.argv[0]), *sys.argv[1:]],
        "date": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
        "options": options or {},
        "inputs": inputs or {},
        "environment": {
            "python": platform.python_version(),
            "platform": platform.platform(),
            "numpy": numpy.__version__,
            "scipy": scipy.__version__,
        },
    }


_JSON_CONSTANT = re.compile(r"[:\[,]\s*(-?Infinity|NaN)\b")


def load_json(path: str | os.PathLike, what: str) -> Any:
    """Read a JSON file strictly: UTF-8 and no ``NaN`` or ``Infinity`` (not JSON).

    Parameters
    ----------
    path : path-like
        The file.
    what : str
        What the file should be, for messages (e.g. ``"spectra JSON file"``).

    Returns
    -------
    object
        The parsed document.

    Raises
    ------
    InputError
        Missing or unreadable file, not UTF-8, not JSON, or a NaN/Infinity value (with
        its line).
    """

    def reject(token: str) -> Any:
        raise ValueError(token)

    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except FileNotFoundError:
        raise InputError("file not found", path) from None
    except IsADirectoryError:
        raise InputError(f"is a folder, not a {what}", path) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        raise InputError(f"not a {what} (not UTF-8 text: {err.reason})", path) from None
    try:
        return json.loads(text, parse_constant=reject)
    except json.JSONDecodeError as err:
        raise InputError(
            f"not a {what} ({err.msg}, column {err.colno})", path, err.lineno
        ) from None
    except ValueError as err:
        m = _JSON_CONSTANT.search(text)
        line = text.count("\n", 0, m.start(1)) + 1 if m else None
        raise InputError(
            f"{err} is not a number in JSON; a value must be finite (null where unknown)",
            path,
            line,
        ) from None
    except RecursionError:
        raise InputError(f"not a {what} (nested too deeply)", path) from None


def json_ready(x: Any) -> Any:
    """A JSON-safe copy of ``x``: numpy arrays and scalars to Python, NaN and inf to None.

    Parameters
    ----------
    x : object
        Nested dicts, lists, tuples, numpy arrays and scalars.

    Returns
    -------
    object
        The same structure with plain Python values (dict keys as str).

    Examples
    --------
    >>> json_ready({"a": np.array([1.0, np.nan]), 2: (np.int64(3),)})
    {'a': [1.0, None], '2': [3]}
    """
    if isinstance(x, dict):
        return {str(k): json_ready(v) for k, v in x.items()}
    if isinstance(x, list | tuple):
        return [json_ready(v) for v in x]
    if isinstance(x, np.ndarray):
        # Whole arrays at once where nothing needs replacing (the common case: counts).
        if x.dtype.kind in "iub" or (x.dtype.kind == "f" and np.isfinite(x).all()):
            return x.tolist()
        return json_ready(x.tolist())
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, float | np.floating):
        x = float(x)
        return x if np.isfinite(x) else None
    return x


def tsv_cell(v: Any) -> str:
    """One cell of a TSV table: empty for missing (None, NaN), ``inf``, 6 significant digits.

    Examples
    --------
    >>> [tsv_cell(v) for v in (None, float("nan"), float("inf"), 0.123456789, 3, "gamma")]
    ['', '', 'inf', '0.123457', '3', 'gamma']
    """
    if v is None:
        return ""
    if isinstance(v, float | np.floating):
        v = float(v)
        if v != v:
            return ""
        return "inf" if v == float("inf") else f"{v:.6g}"
    return str(v)


def open_text(path: str | os.PathLike, errors: str = "strict") -> IO[str]:
    """Open a UTF-8 text file that may be gzip-compressed (told by its magic bytes).

    Parameters
    ----------
    path : path-like
    errors : str
        How undecodable bytes are handled (see :func:`open`).

    Returns
    -------
    file object
        In text mode, with universal newlines off (``newline=""``).
    """
    p = os.fspath(path)
    with open(p, "rb") as fh:
        magic = fh.read(2)
    if magic == b"\x1f\x8b":
        return gzip.open(p, "rt", encoding="utf-8", errors=errors, newline="")
    return open(p, encoding="utf-8", errors=errors, newline="")
