"""Genome sites: BED intervals and site classes (0-fold, 4-fold) from FASTA + GFF3."""

from .bed import (
    IntervalSet,
    SiteClasses,
    merge_intervals,
    read_bed,
    read_mask,
    read_site_classes,
    write_bed4,
)

__all__ = [
    "IntervalSet",
    "SiteClasses",
    "merge_intervals",
    "read_bed",
    "read_mask",
    "read_site_classes",
    "write_bed4",
]

# Site classes from a reference FASTA and a GFF3 annotation.
from .classify import ChromClasses, ClassifyResult, classify_sites, coding_sequences
from .codes import GeneticCode, genetic_code
from .gff import Annotation, Transcript, read_gff3

__all__ += [
    "Annotation",
    "ChromClasses",
    "ClassifyResult",
    "GeneticCode",
    "Transcript",
    "classify_sites",
    "coding_sequences",
    "genetic_code",
    "read_gff3",
]
