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
