"""Site frequency spectra: data objects, diversity statistics, files."""

from ._types import Block, ClassSpectrum, PopulationSpectra, SpectraSet, spectrum_length
from .build import build_spectra
from .counting import CountDesign, RegionCounts, count_region, count_stream, make_design
from .io import (
    add_diversity,
    read_spectra,
    read_spectra_json,
    read_spectra_tsv,
    write_spectra_json,
    write_spectra_tsv,
)
from .plan import RegionSites, SitePlan, make_plan
from .projection import choose_sample_size, projection_matrix, spectra_from_counts
from .stats import diversity, tajimas_d, watterson_a
from .summary import summary_lines

__all__ = [
    "Block",
    "ClassSpectrum",
    "CountDesign",
    "PopulationSpectra",
    "RegionCounts",
    "RegionSites",
    "SitePlan",
    "SpectraSet",
    "add_diversity",
    "build_spectra",
    "choose_sample_size",
    "count_region",
    "count_stream",
    "diversity",
    "make_design",
    "make_plan",
    "projection_matrix",
    "read_spectra",
    "read_spectra_json",
    "read_spectra_tsv",
    "spectra_from_counts",
    "spectrum_length",
    "summary_lines",
    "tajimas_d",
    "watterson_a",
    "write_spectra_json",
    "write_spectra_tsv",
]
