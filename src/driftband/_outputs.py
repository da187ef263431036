"""All-or-nothing outputs: the one home of how driftband writes its output files.

Every output goes to a temporary file beside its final path (:func:`atomic_output`). Inside
an :func:`output_set` (the command line opens one around every command) the renames wait
until the command has finished and then happen together; on any error or interruption
every temporary file is removed and files about to be replaced are restored. No output
may replace an input of the command, a folder, or a path under a regular file, and every
message names the user's path, never a temporary file.
"""

from __future__ import annotations

import contextlib
import contextvars
import os
import tempfile
from collections.abc import Callable, Iterable, Iterator
from pathlib import Path
from typing import IO, Any

from .exceptions import OptionError, OutputError, OutputExistsError

__all__ = [
    "OutputSet",
    "add_inputs",
    "after_commit",
    "atomic_output",
    "check_output_path",
    "check_outputs",
    "commit_output",
    "output_set",
    "temporary_output",
]


class OutputSet:
    """The outputs of one command, committed together.

    Inside :func:`output_set`, every :func:`atomic_output` (and any writer that calls
    :func:`commit_output`) writes to a temporary file next to its final path; the renames
    happen together when the set closes without error, and on any error (or interruption)
    every temporary file is removed, so a command leaves either all its outputs or none.
    The set also knows the command's input files (and input folders: a VCF Zarr store),
    which no output may replace or lie in (even with ``--force``).

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


def _inside(path: str, folder: str) -> bool:
    """Whether ``path`` lies inside ``folder`` (links resolved)."""
    p, f = os.path.realpath(path), os.path.realpath(folder)
    return os.path.commonpath([p, f]) == f and p != f


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
            if os.path.isdir(inp) and _inside(p, inp):
                raise OptionError(
                    f"{p}: lies inside {inp}, an input folder of this command; choose an "
                    "output path outside it"
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
