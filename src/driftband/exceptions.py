"""Exceptions and warnings of driftband.

Every problem a user can fix (bad input, an existing output, impossible options) is raised
as a :class:`DriftbandError`; the command line prints its one-line message and exits 2.
Anything else escaping to the command line is a bug in driftband.
"""

from __future__ import annotations

import os

__all__ = [
    "BoundWarning",
    "ConvergenceWarning",
    "DriftbandError",
    "DriftbandWarning",
    "InputError",
    "OptionError",
    "OutputError",
    "OutputExistsError",
    "VcfFormatError",
]


class DriftbandError(Exception):
    """Base class of the errors a user can fix; ``str(err)`` is one line."""


class InputError(DriftbandError):
    """A problem in an input file.

    Parameters
    ----------
    message : str
        What is wrong and, where possible, how to fix it.
    path : str or os.PathLike, optional
        The file in question.
    line : int, optional
        1-based line number (or record number) in that file.
    """

    def __init__(
        self, message: str, path: str | os.PathLike | None = None, line: int | None = None
    ) -> None:
        self.path = None if path is None else os.fspath(path)
        self.line = line
        self.reason = message
        where = ""
        if self.path is not None:
            where = self.path if line is None else f"{self.path}:{line}"
            where += ": "
        super().__init__(f"{where}{message}")


class VcfFormatError(InputError):
    """A VCF/BCF file that cannot be read as the specification says."""


class OptionError(DriftbandError, ValueError):
    """An impossible option or argument value (names the option)."""


class OutputExistsError(DriftbandError):
    """An output file exists and ``force`` was not given."""

    def __init__(self, path: str | os.PathLike) -> None:
        self.path = os.fspath(path)
        super().__init__(f"{self.path}: output exists; use --force to overwrite it")


class OutputError(DriftbandError):
    """An output file cannot be written (named by the user's path, not a temporary file)."""

    def __init__(self, path: str | os.PathLike, reason: str) -> None:
        self.path = os.fspath(path)
        super().__init__(f"{self.path}: cannot write this output: {reason}")


class DriftbandWarning(UserWarning):
    """Base class of driftband's warnings."""


class ConvergenceWarning(DriftbandWarning):
    """An optimisation did not converge; the result is kept and flagged."""


class BoundWarning(DriftbandWarning):
    """A fitted parameter lies at a bound of its range; it has no standard error."""
