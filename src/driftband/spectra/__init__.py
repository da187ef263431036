"""Site frequency spectra: data objects, diversity statistics, files."""

from ._types import Block, ClassSpectrum, PopulationSpectra, SpectraSet, spectrum_length
from .io import (
    add_diversity,
    read_spectra,
    read_spectra_json,
    read_spectra_tsv,
    write_spectra_json,
    write_spectra_tsv,
)
from .stats import diversity, tajimas_d, watterson_a

__all__ = [
    "Block",
    "ClassSpectrum",
    "PopulationSpectra",
    "SpectraSet",
    "add_diversity",
    "diversity",
    "read_spectra",
    "read_spectra_json",
    "read_spectra_tsv",
    "spectrum_length",
    "tajimas_d",
    "watterson_a",
    "write_spectra_json",
    "write_spectra_tsv",
]
