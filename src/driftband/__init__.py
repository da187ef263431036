"""driftband: the distribution of fitness effects of new mutations and its effectively
neutral share (|Ne*s| < 1), per population, from variant calls.

The public API mirrors the command line; see the subpackages ``sites``, ``variants``,
``spectra``, ``prf`` and ``fit``.
"""

from ._version import __version__
from .exceptions import (
    ConvergenceWarning,
    DriftbandError,
    DriftbandWarning,
    InputError,
    OptionError,
    OutputExistsError,
    VcfFormatError,
)

__all__ = [
    "ConvergenceWarning",
    "DriftbandError",
    "DriftbandWarning",
    "InputError",
    "OptionError",
    "OutputExistsError",
    "VcfFormatError",
    "__version__",
]
