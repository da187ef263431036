"""Small file utilities shared by every stage: atomic outputs, checksums, provenance."""

from __future__ import annotations

import contextlib
import datetime as _dt
import gzip
import hashlib
import os
import platform
import sys
import tempfile
from collections.abc import Iterable, Iterator
from pathlib import Path
from typing import IO, Any, overload

import numpy as np

from .exceptions import OutputExistsError

__all__ = [
    "atomic_output",
    "check_outputs",
    "file_record",
    "json_ready",
    "open_text",
    "provenance",
    "sha256sum",
    "tsv_cell",
]


def check_outputs(paths: Iterable[str | os.PathLike | None], force: bool = False) -> None:
    """Refuse, before any work is done, to overwrite existing outputs without ``force``.

    Parameters
    ----------
    paths : iterable of path-like or None
        Output paths; ``None`` entries are skipped. ``-`` means standard output.
    force : bool
        Allow overwriting.

    Raises
    ------
    OutputExistsError
        If a path exists and ``force`` is false.
    """
    for p in paths:
        if p is None or os.fspath(p) == "-":
            continue
        if not force and os.path.exists(p):
            raise OutputExistsError(p)


@contextlib.contextmanager
def atomic_output(
    path: str | os.PathLike, mode: str = "w", force: bool = False, **open_kwargs: Any
) -> Iterator[IO]:
    """Open ``path`` for writing through a temporary file renamed into place on success.

    If the block raises, the temporary file is removed and ``path`` is untouched, so an
    error never leaves a half-written output.

    Parameters
    ----------
    path : path-like
        Final output path.
    mode : {"w", "wb"}
        Text or binary.
    force : bool
        Overwrite an existing file.
    **open_kwargs
        Passed to :func:`open` (e.g. ``encoding``, ``newline``).

    Yields
    ------
    file object
        The open temporary file.
    """
    path = Path(path)
    if not force and path.exists():
        raise OutputExistsError(path)
    directory = path.parent if str(path.parent) else Path(".")
    directory.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=directory)
    os.close(fd)
    # mkstemp makes the file private (0600); outputs follow the umask like open() would.
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)
    if "b" not in mode:
        open_kwargs.setdefault("encoding", "utf-8")
    try:
        with open(tmp, mode, **open_kwargs) as fh:
            yield fh
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def sha256sum(path: str | os.PathLike, chunk: int = 1 << 20) -> str:
    """Hex SHA-256 checksum of a file."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            h.update(block)
    return h.hexdigest()


@overload
def file_record(path: str | os.PathLike) -> dict[str, Any]: ...
@overload
def file_record(path: None) -> None: ...
@overload
def file_record(path: str | os.PathLike | None) -> dict[str, Any] | None: ...
def file_record(path: str | os.PathLike | None) -> dict[str, Any] | None:
    """Path, size and SHA-256 of an input file (``-`` for standard input)."""
    if path is None:
        return None
    p = os.fspath(path)
    if p == "-":
        return {"path": "-", "size": None, "sha256": None}
    return {"path": os.path.abspath(p), "size": os.path.getsize(p), "sha256": sha256sum(p)}


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
