"""Variant calls: population maps and the VCF/BCF reader (htslib through pysam, BGZF
inflated with libdeflate when the system has it, a vectorised genotype decoder).

Modules: :mod:`.samples` (sample to population), :mod:`.source` (opening a VCF/BCF, reading
regions or the whole stream), :mod:`.header`, :mod:`.bgzf` (BGZF blocks, libdeflate),
:mod:`.streams` (line blocks of byte streams), :mod:`.textbatch` (VCF text in batches),
:mod:`.decode` (vectorised GT/DP/GQ decoding), :mod:`.batches` (the batch interface, pysam
records), :mod:`.vcz` (VCF Zarr stores), :mod:`.vczbatch` (their records in a chunk) and
:mod:`.vczchunks` (their arrays, chunk by chunk).
"""

from .batches import GenotypeData, VariantBatch
from .header import VcfHeader
from .samples import SampleAssignment, SampleTable, assign_samples, read_sample_table
from .source import VcfSource, open_vcf

__all__ = [
    "GenotypeData",
    "SampleTable",
    "SampleAssignment",
    "VariantBatch",
    "VcfHeader",
    "VcfSource",
    "assign_samples",
    "open_vcf",
    "read_sample_table",
]
