"""Poisson-random-field core: expected spectra and distributions of fitness effects.

No I/O happens in this subpackage. See :mod:`driftband.prf.expected` (expected spectra
under the equilibrium Poisson random field of Sawyer & Hartl 1992, folding,
misorientation, Kimura's fixation ratio) and :mod:`driftband.prf.dfe` (DFE families on
S = 4 Ne s, band shares, DFE-averaged spectra).
"""

from .dfe import (
    DfeExpectation,
    DiscreteDfe,
    GammaDfe,
    LognormalDfe,
    WithBeneficial,
    band_shares,
    deleterious_band_shares,
    mean_fixation_ratio,
    sample_S,
)
from .expected import (
    SfsKernel,
    expected_sfs,
    fixation_ratio,
    fold_sfs,
    kernel,
    log_fixation_ratio,
    misorient,
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
