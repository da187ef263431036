"""Small file utilities shared by every stage: atomic outputs, checksums, provenance."""

from __future__ import annotations

import contextlib
import contextvars
import datetime as _dt
import gzip
import hashlib
import json
import os
import platform
import re
import sys
import tempfile
from collections.abc import Callable, Iterable, Iterator
from pathlib import Path
from typing import IO, Any, overload

import numpy as np

from .exceptions import InputError, OptionError, OutputError, OutputExistsError

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


class OutputSet:
    """The outputs of one command, committed together.

    Inside :func:`output_set`, every :func:`atomic_output` (and any writer that calls
    :func:`commit_output`) writes to a temporary file next to its final path; the renames
    happen together when the set closes without error, and on any error (or interruption)
    every temporary file is removed, so a command leaves either all its outputs or none.
    The set also knows the command's input files, which no output may replace (even with
    ``--force``).

    Parameters
    ----------
    inputs : iterable of path-like, optional
        The command's input files.
    """

    def __init__(self, inputs: Iterable[str | os.PathLike] = ()) -> None:
        self.inputs = [os.fspath(p) for p in inputs]
        self.pending: list[tuple[str, str]] = []
        self.defer = True
        self.callbacks: list[Callable[[], None]] = []

    def stage(self, tmp: str | os.PathLike, final: str | os.PathLike) -> None:
        """Rename ``tmp`` to ``final`` when the set commits (remove it if it aborts)."""
        self.pending.append((os.fspath(tmp), os.fspath(final)))

    def commit(self) -> None:
        """Rename every staged temporary file into place, all or none.

        Files being replaced are first moved aside; if any rename fails, the outputs
        already renamed are taken back and the old files restored.
        """
        done: list[tuple[str, str | None, bool]] = []  # (final, backup, renamed)
        try:
            for tmp, final in self.pending:
                backup = None
                if os.path.lexists(final):
                    backup = temporary_output(final, suffix=".old.tmp")
                    os.replace(final, backup)
                done.append((final, backup, False))
                os.replace(tmp, final)
                done[-1] = (final, backup, True)
        except BaseException as err:  # also an interruption between two renames
            for final, backup, renamed in reversed(done):
                with contextlib.suppress(OSError):
                    if renamed:
                        os.unlink(final)
                    if backup is not None:
                        os.replace(backup, final)
            if not isinstance(err, OSError):
                raise
            failed = done[-1][0] if done else self.pending[0][1]
            raise OutputError(failed, err.strerror or str(err)) from None
        for _final, backup, _renamed in done:
            if backup is not None:
                with contextlib.suppress(OSError):
                    os.unlink(backup)
        self.pending.clear()
        callbacks, self.callbacks = self.callbacks, []
        for fn in callbacks:
            fn()

    def abort(self) -> None:
        """Remove every staged temporary file; the final paths are untouched."""
        for tmp, _final in self.pending:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
        self.pending.clear()


_ACTIVE: contextvars.ContextVar[OutputSet | None] = contextvars.ContextVar(
    "driftband_output_set", default=None
)


@contextlib.contextmanager
def output_set(inputs: Iterable[str | os.PathLike] = (), defer: bool = True) -> Iterator[OutputSet]:
    """Collect the outputs written in the block and commit them together.

    Parameters
    ----------
    inputs : iterable of path-like, optional
        Input files that no output of the block may replace (added to those of an
        enclosing set).
    defer : bool
        Commit at the end of the block (true), or let each output be renamed into place
        as soon as it is written (false: only the input guard applies).

    Yields
    ------
    OutputSet
        See :class:`OutputSet`.
    """
    outer = _ACTIVE.get()
    inherited = outer.inputs if outer is not None else []
    oset = OutputSet([*inherited, *(os.fspath(p) for p in inputs)])
    oset.defer = defer
    token = _ACTIVE.set(oset)
    try:
        yield oset
        oset.commit()
    except BaseException:
        oset.abort()
        raise
    finally:
        _ACTIVE.reset(token)


def _same_file(a: str, b: str) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return os.path.abspath(a) == os.path.abspath(b)


def check_output_path(path: str | os.PathLike, force: bool = False) -> None:
    """Refuse an output path that cannot or must not be written.

    Parameters
    ----------
    path : path-like
        The output path.
    force : bool
        Allow overwriting an existing file (never an input of the command).

    Raises
    ------
    OutputExistsError
        The path exists and ``force`` is false.
    OptionError
        The path is an input of the command, a folder, or lies under a regular file.
    """
    p = os.fspath(path)
    active = _ACTIVE.get()
    if active is not None:
        for inp in active.inputs:
            if _same_file(p, inp):
                raise OptionError(
                    f"{p}: is an input of this command; choose another output path "
                    "(--force never overwrites an input)"
                )
    if os.path.isdir(p):
        raise OptionError(f"{p}: is a folder; give a file name for this output")
    parent = Path(p).absolute().parent
    for anc in (parent, *parent.parents):
        if os.path.lexists(anc):
            if not anc.is_dir():
                raise OptionError(f"{p}: {anc} is a file, not a folder; choose another path")
            break
    if not force and os.path.lexists(p):
        raise OutputExistsError(p)


def check_outputs(paths: Iterable[str | os.PathLike | None], force: bool = False) -> None:
    """Refuse, before any work is done, outputs that cannot or must not be written.

    Parameters
    ----------
    paths : iterable of path-like or None
        Output paths; ``None`` entries are skipped. ``-`` means standard output.
    force : bool
        Allow overwriting (never an input of the command).

    Raises
    ------
    OutputExistsError
        If a path exists and ``force`` is false.
    OptionError
        See :func:`check_output_path`.
    """
    seen: set[str] = set()
    for p in paths:
        if p is None or os.fspath(p) == "-":
            continue
        key = os.path.realpath(p)
        if key in seen:
            raise OptionError(f"{os.fspath(p)}: named for two outputs; give each its own file")
        seen.add(key)
        check_output_path(p, force)


def temporary_output(path: str | os.PathLike, suffix: str = ".tmp") -> str:
    """Create an empty temporary file beside ``path`` (umask permissions); return its name.

    Parameters
    ----------
    path : path-like
        The final output path (its folder is created if needed).
    suffix : str
        Ending of the temporary name.

    Returns
    -------
    str
        The temporary file's path. Errors name ``path``, never the temporary file.
    """
    path = Path(path)
    directory = path.parent if str(path.parent) else Path(".")
    try:
        directory.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=suffix, dir=directory)
    except (FileExistsError, NotADirectoryError):
        raise OptionError(f"{path}: a parent of this path is a file, not a folder") from None
    except OSError as err:
        raise OutputError(path, err.strerror or str(err)) from None
    os.close(fd)
    # mkstemp makes the file private (0600); outputs follow the umask like open() would.
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)
    return tmp


def add_inputs(*paths: str | os.PathLike) -> None:
    """Files a reader found beside an input (an index): no output may replace them either.

    Parameters
    ----------
    *paths : path-like
        Added to the inputs of the active :func:`output_set` (if any).
    """
    active = _ACTIVE.get()
    if active is not None:
        active.inputs.extend(os.fspath(p) for p in paths)


def after_commit(fn: Callable[[], None]) -> None:
    """Call ``fn`` once the outputs are in place: at the end of the active deferred
    :func:`output_set` (never, if it fails), or now. For messages such as "wrote FILE".

    Parameters
    ----------
    fn : callable
        Called without arguments.
    """
    active = _ACTIVE.get()
    if active is not None and active.defer:
        active.callbacks.append(fn)
    else:
        fn()


def commit_output(tmp: str | os.PathLike, path: str | os.PathLike) -> None:
    """Rename ``tmp`` to ``path`` now, or when the active :func:`output_set` commits.

    Parameters
    ----------
    tmp : path-like
        A finished temporary file (from :func:`temporary_output`).
    path : path-like
        Its final path.
    """
    active = _ACTIVE.get()
    if active is not None and active.defer:
        active.stage(tmp, path)
        return
    try:
        os.replace(tmp, path)
    except OSError as err:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise OutputError(path, err.strerror or str(err)) from None


@contextlib.contextmanager
def atomic_output(
    path: str | os.PathLike, mode: str = "w", force: bool = False, **open_kwargs: Any
) -> Iterator[IO]:
    """Open ``path`` for writing through a temporary file renamed into place on success.

    If the block raises, the temporary file is removed and ``path`` is untouched, so an
    error never leaves a half-written output. Inside :func:`output_set` the rename waits
    for the whole set. Errors name ``path``, never the temporary file.

    Parameters
    ----------
    path : path-like
        Final output path.
    mode : {"w", "wb"}
        Text or binary.
    force : bool
        Overwrite an existing file (never an input of the command).
    **open_kwargs
        Passed to :func:`open` (e.g. ``encoding``, ``newline``).

    Yields
    ------
    file object
        The open temporary file.
    """
    check_output_path(path, force)
    tmp = temporary_output(path)
    if "b" not in mode:
        open_kwargs.setdefault("encoding", "utf-8")
    try:
        try:
            fh = open(tmp, mode, **open_kwargs)
        except OSError as err:
            raise OutputError(path, err.strerror or str(err)) from None
        with fh:
            try:
                yield fh
            except OSError as err:
                if err.filename not in (None, tmp):
                    raise
                raise OutputError(path, err.strerror or str(err)) from None
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    commit_output(tmp, path)


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
