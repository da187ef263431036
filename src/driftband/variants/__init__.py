"""Variant calls: population maps and the VCF/BCF reader (htslib through pysam, with a
vectorised genotype decoder)."""

from .popmap import Popmap, SampleAssignment, assign_samples, read_popmap
from .vcf import (
    GenotypeData,
    GenotypeTable,
    VariantBatch,
    VcfHeader,
    VcfSource,
    open_vcf,
    read_genotype_table,
)

__all__ = [
    "GenotypeData",
    "GenotypeTable",
    "Popmap",
    "SampleAssignment",
    "VariantBatch",
    "VcfHeader",
    "VcfSource",
    "assign_samples",
    "open_vcf",
    "read_genotype_table",
    "read_popmap",
]
