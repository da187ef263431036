"""driftband: the distribution of fitness effects of new mutations and its effectively
neutral share (|Ne*s| < 1), per population, from variant calls.

The public API mirrors the command line, stage by stage:

- sites: :func:`classify_sites` (FASTA + GFF3 → 0-fold/4-fold), :func:`read_site_classes`
- spectra: :func:`build_spectra` (VCF → :class:`SpectraSet`), :func:`read_spectra`,
  :func:`write_spectra_json`
- model: :class:`GammaDfe`, :class:`LognormalDfe`, :class:`DiscreteDfe`,
  :class:`WithBeneficial`, :func:`expected_sfs`, :class:`DfeExpectation`,
  :func:`band_shares`
- fit: :class:`SpectrumPair`, :class:`DfeModel`, :func:`fit_model`,
  :class:`FitOptions`, :func:`fit_population`, :func:`fit_spectra` (every population of
  :class:`LabelledSpectra` sets), :func:`bootstrap_fits`, :func:`read_fits`
- compare: :func:`compare_fits` (every pair), :func:`compare_pair`
- run: :func:`run_study` (the whole job of a study)
- simulate: :func:`simulate_study`
"""

import typing as _typing

from ._version import __version__
from .exceptions import (
    BoundWarning,
    ConvergenceWarning,
    DriftbandError,
    DriftbandWarning,
    InputError,
    OptionError,
    OutputExistsError,
    VcfFormatError,
)

# The stages are imported on first use (PEP 562), so that the command line and
# ``import driftband`` stay fast; ``from driftband import *`` still gives all names.
_LAZY = {
    "compare_fits": "compare",
    "compare_pair": "compare",
    "FitOptions": "fit.options",
    "LabelledSpectra": "fit.api",
    "PopulationFit": "fit.results",
    "fit_population": "fit.api",
    "fit_spectra": "fit.api",
    "read_fits": "fit.io",
    "run_study": "run",
    "bootstrap_fits": "fit.bootstrap",
    "SpectrumPair": "fit.likelihood",
    "FitResult": "fit.mle",
    "fit_model": "fit.mle",
    "DfeModel": "fit.models",
    "DfeExpectation": "prf",
    "DiscreteDfe": "prf",
    "GammaDfe": "prf",
    "LognormalDfe": "prf",
    "WithBeneficial": "prf",
    "band_shares": "prf",
    "expected_sfs": "prf",
    "simulate_study": "simulate",
    "classify_sites": "sites",
    "read_site_classes": "sites",
    "SpectraSet": "spectra",
    "read_spectra": "spectra",
    "write_spectra_json": "spectra",
    "build_spectra": "spectra.build",
}


def __getattr__(name: str) -> _typing.Any:
    mod = _LAZY.get(name)
    if mod is None:
        raise AttributeError(f"module 'driftband' has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(f".{mod}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))


__all__ = [
    "BoundWarning",
    "ConvergenceWarning",
    "DfeExpectation",
    "DfeModel",
    "DiscreteDfe",
    "DriftbandError",
    "DriftbandWarning",
    "FitOptions",
    "FitResult",
    "GammaDfe",
    "InputError",
    "LabelledSpectra",
    "LognormalDfe",
    "OptionError",
    "OutputExistsError",
    "PopulationFit",
    "SpectraSet",
    "SpectrumPair",
    "VcfFormatError",
    "WithBeneficial",
    "__version__",
    "band_shares",
    "bootstrap_fits",
    "build_spectra",
    "classify_sites",
    "compare_fits",
    "compare_pair",
    "expected_sfs",
    "fit_model",
    "fit_population",
    "fit_spectra",
    "read_fits",
    "read_site_classes",
    "read_spectra",
    "run_study",
    "simulate_study",
    "write_spectra_json",
]
