"""Variant calls: population maps and the VCF/BCF reader (htslib through pysam, with a
vectorised genotype decoder)."""

from .popmap import Popmap, SampleAssignment, assign_samples, read_popmap
from .vcf import (
    GenotypeData,
    VariantBatch,
    VcfHeader,
    VcfSource,
    open_vcf,
)

__all__ = [
    "GenotypeData",
    "Popmap",
    "SampleAssignment",
    "VariantBatch",
    "VcfHeader",
    "VcfSource",
    "assign_samples",
    "open_vcf",
    "read_popmap",
]
