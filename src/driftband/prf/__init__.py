"""Poisson-random-field core: expected spectra and distributions of fitness effects.

No I/O happens in this subpackage. See :mod:`driftband.prf.expected` (expected spectra
under the equilibrium Poisson random field of Sawyer & Hartl 1992, folding,
misorientation, Kimura's fixation ratio), :mod:`driftband.prf.families` (DFE families on
S = 4 Ne s, band shares) and :mod:`driftband.prf.dfe` (DFE-averaged spectra, the mean
fixation ratio).
"""

from .dfe import DfeExpectation, mean_fixation_ratio
from .expected import (
    SfsKernel,
    expected_sfs,
    fixation_ratio,
    fold_sfs,
    kernel,
    log_fixation_ratio,
    misorient,
)
from .families import (
    DiscreteDfe,
    GammaDfe,
    LognormalDfe,
    WithBeneficial,
    band_shares,
    deleterious_band_shares,
    sample_S,
)

__all__ = [
    "DfeExpectation",
    "DiscreteDfe",
    "GammaDfe",
    "LognormalDfe",
    "SfsKernel",
    "WithBeneficial",
    "band_shares",
    "deleterious_band_shares",
    "expected_sfs",
    "fixation_ratio",
    "fold_sfs",
    "kernel",
    "log_fixation_ratio",
    "mean_fixation_ratio",
    "misorient",
    "sample_S",
]
