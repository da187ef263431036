"""The ``driftband`` command line: a thin layer over the importable API.

Each subcommand lives in its own module of this package with an ``add_parser(subparsers)``
function that registers it and sets ``runner`` (a function of the parsed arguments that
returns an exit code). User errors (:class:`driftband.exceptions.DriftbandError`) become
one line on stderr and exit code 2; nothing else is printed.
"""

from __future__ import annotations

import argparse
import importlib
import logging
import os
import sys
from collections.abc import Sequence
from typing import NoReturn

from .._io import output_set
from .._parallel import interruptible, single_blas_thread
from .._progress import console_filter, set_live
from .._version import __version__
from .._warnings import plain_warnings
from ..exceptions import DriftbandError

__all__ = ["get_parser", "main"]

# Subcommand modules, in the order of the pipeline.
_SUBCOMMANDS = [
    "classify",
    "spectra",
    "fit",
    "compare",
    "report",
    "check",
    "run",
    "demo",
    "simulate",
]

log = logging.getLogger("driftband")


def _available_subcommands() -> list:
    mods = []
    for name in _SUBCOMMANDS:
        try:
            mods.append(importlib.import_module(f"{__name__}.{name}"))
        except ModuleNotFoundError as err:
            if err.name != f"{__name__}.{name}":
                raise
    return mods


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line (and exit code 2), like the tool's."""

    def error(self, message: str) -> NoReturn:
        """Print ``PROG: error: MESSAGE (see 'PROG --help')`` on stderr and exit 2."""
        self.exit(2, f"{self.prog}: error: {_one_line(message)} (see '{self.prog} --help')\n")


def get_parser() -> argparse.ArgumentParser:
    """Build the argument parser of the ``driftband`` command (all subcommands)."""
    parser = _Parser(
        prog="driftband",
        description=(
            "Distribution of fitness effects of new mutations per population, and the share "
            "that is effectively neutral (|Ne*s| < 1), from variant calls."
        ),
        epilog="Run 'driftband SUBCOMMAND --help' for the options and examples of each step.",
    )
    parser.add_argument("--version", action="version", version=f"driftband {__version__}")
    sub = parser.add_subparsers(title="subcommands", metavar="SUBCOMMAND")
    for mod in _available_subcommands():
        mod.add_parser(sub)
    return parser


class _ConsoleFormatter(logging.Formatter):
    """``driftband: MESSAGE``, and ``driftband: warning: MESSAGE`` for warnings."""

    def __init__(self) -> None:
        super().__init__("driftband: %(message)s")

    def format(self, record: logging.LogRecord) -> str:
        text = super().format(record)
        if record.levelno == logging.WARNING and not record.getMessage().startswith("warning:"):
            text = text.replace("driftband: ", "driftband: warning: ", 1)
        return text


def _setup_logging(verbosity: int) -> None:
    level = logging.WARNING - 10 * min(verbosity, 2) + (10 if verbosity < 0 else 0)
    level = max(logging.DEBUG, min(logging.WARNING, level)) if verbosity >= 0 else logging.ERROR
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(_ConsoleFormatter())
    handler.addFilter(console_filter)
    set_live(verbosity >= 0 and sys.stderr.isatty())
    log.handlers[:] = [handler]
    log.setLevel(level)
    log.propagate = False
    logging.captureWarnings(True)
    plain_warnings()
    wlog = logging.getLogger("py.warnings")
    wlog.handlers[:] = [handler]
    wlog.propagate = False


#: Argument names that name outputs (every other argument naming an existing file is an
#: input, which no output may replace). A subcommand adds its own with
#: ``set_defaults(output_dests=...)``.
OUTPUT_DESTS = frozenset({"output", "tsv", "summary", "bands_tsv", "out_dir"})


def _input_files(args: argparse.Namespace) -> list[str]:
    """The existing files named by the arguments that are not outputs, and the folders
    that are Zarr stores (a VCF Zarr input: ``.zgroup`` or ``zarr.json`` at its top), whose
    files no output may replace either."""
    outs = OUTPUT_DESTS | frozenset(getattr(args, "output_dests", ()))
    found: list[str] = []
    for dest, value in vars(args).items():
        if dest in outs:
            continue
        for v in value if isinstance(value, list | tuple) else [value]:
            if not isinstance(v, str | os.PathLike) or os.fspath(v) == "-":
                continue
            v = os.fspath(v)
            # LABEL=PATH values (report --spectra, fit --label) name a file after the '='
            for cand in (v, v.partition("=")[2]) if "=" in v else (v,):
                store = os.path.isdir(cand) and any(
                    os.path.isfile(os.path.join(cand, m)) for m in (".zgroup", "zarr.json")
                )
                if cand and (os.path.isfile(cand) or store):
                    found.append(cand)
    return found


def _one_line(text: str) -> str:
    r"""A message as one printable line: control characters (from quoted input) escaped.

    Examples
    --------
    >>> _one_line("record 'a\nb\x00': bad")
    "record 'a\\nb\\x00': bad"
    """
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``driftband`` command.

    Parameters
    ----------
    argv : sequence of str, optional
        Arguments without the program name (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        Exit code: 0 success, 2 bad input or options, 1 an internal error, 130 interrupted.
    """
    parser = get_parser()
    args = parser.parse_args(argv)
    if not hasattr(args, "runner"):
        parser.print_help(sys.stderr)
        return 2
    _setup_logging(getattr(args, "verbose", 0) - getattr(args, "quiet", 0))
    prog = f"driftband {getattr(args, 'subcommand', '')}".strip()
    # Every output of the command is committed together at the end (all or nothing),
    # except for commands that commit their own steps (run: one stage at a time).
    defer = getattr(args, "commit_at_end", True)
    try:
        with interruptible(), single_blas_thread(), output_set(_input_files(args), defer=defer):
            return int(args.runner(args) or 0)
    except DriftbandError as err:
        print(f"{prog}: error: {_one_line(str(err))}", file=sys.stderr)
        return 2
    except OSError as err:
        name = f"{err.filename}: " if err.filename is not None else ""
        print(f"{prog}: error: {_one_line(name + str(err.strerror or err))}", file=sys.stderr)
        return 2
    except KeyboardInterrupt as err:
        what = f" by {err}" if str(err).startswith("SIG") else ""
        again = "; rerun the same command to resume" if not defer else "; nothing was written"
        print(f"{prog}: interrupted{what}{again}", file=sys.stderr)
        return 130
    except Exception as err:  # a bug: say so in one line, traceback only on request
        if os.environ.get("DRIFTBAND_DEBUG") or getattr(args, "verbose", 0) >= 2:
            raise
        print(
            f"{prog}: internal error: {type(err).__name__}: {err} "
            "(rerun with -vv for the traceback, and please report it)",
            file=sys.stderr,
        )
        return 1


def _entry() -> None:  # pragma: no cover - console script shim
    rc = main()
    if rc == 130:
        # Interrupted: everything is cleaned up and the one line printed. Leave without
        # the interpreter's exit handlers, whose joins of the (now ended) worker pool's
        # threads can print tracebacks of closed pipes.
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(rc)
    sys.exit(rc)
