"""Variant calls: population maps and the VCF/BCF reader (htslib through pysam, BGZF
inflated with libdeflate when the system has it, a vectorised genotype decoder).

Modules: :mod:`.popmap` (sample to population), :mod:`.source` (opening a VCF/BCF, reading
regions or the whole stream), :mod:`.header`, :mod:`.bgzf` (BGZF blocks, libdeflate),
:mod:`.streams` (line blocks of byte streams), :mod:`.textbatch` (VCF text in batches),
:mod:`.decode` (vectorised GT/DP/GQ decoding), :mod:`.batches` (the batch interface, pysam
records).
"""

from .batches import GenotypeData, VariantBatch
from .header import VcfHeader
from .popmap import Popmap, SampleAssignment, assign_samples, read_popmap
from .source import VcfSource, open_vcf

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
