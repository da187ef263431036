"""How warnings reach the user: one plain line each, never a source line.

driftband's own warnings (:class:`driftband.exceptions.DriftbandWarning`) read
``warning: MESSAGE``. Numerical warnings of numpy and scipy (overflow, invalid value, ...)
are avoided where the computation knows its limits; any that still arise become one plain
line per message (``warning: numerical: overflow encountered in divide (fit/likelihood.py)``)
instead of Python's two lines with a source line. Used by the command line and by its
worker processes.
"""

from __future__ import annotations

import os
import warnings

from .exceptions import DriftbandWarning

__all__ = ["format_warning", "plain_warnings"]

_format_other_warning = warnings.formatwarning


def format_warning(
    message: Warning | str,
    category: type[Warning],
    filename: str,
    lineno: int,
    line: str | None = None,
) -> str:
    """A warning as one plain line (see the module docstring).

    Examples
    --------
    >>> format_warning("overflow encountered in exp", RuntimeWarning, "/x/fit/mle.py", 3)
    'warning: numerical: overflow encountered in exp (fit/mle.py)'
    """
    if issubclass(category, DriftbandWarning):
        return f"warning: {message}"
    if issubclass(category, RuntimeWarning):
        parts = os.path.normpath(filename).split(os.sep)
        where = "/".join(parts[-2:])
        return f"warning: numerical: {message} ({where})"
    return _format_other_warning(message, category, filename, lineno, line)


def plain_warnings() -> None:
    """Format warnings as :func:`format_warning` does, numerical ones once per message."""
    warnings.formatwarning = format_warning
    warnings.filterwarnings("once", category=RuntimeWarning)
