"""``driftband classify``: 0-fold and 4-fold degenerate sites from a FASTA and a GFF3."""

from __future__ import annotations

import argparse
import logging
import os
import sys

from .._io import after_commit, check_outputs
from ..exceptions import OptionError
from ..sites.bed import write_bed4
from ..sites.classify import classify_sites, write_summary
from ..sites.codes import NCBI_TABLES
from ._common import Subparsers, add_common_arguments, add_subcommand

log = logging.getLogger("driftband")

_EXAMPLES = """
driftband classify --fasta ref.fa.gz --gff genes.gff3.gz -o sites.bed
driftband classify --fasta ref.fa --gff genes.gff3 --transcripts longest \\
    --summary sites.summary.tsv -o sites.bed
driftband classify --fasta mito.fa --gff mito.gff3 --code 2 -o mito.sites.bed
"""


def add_parser(subparsers: Subparsers) -> argparse.ArgumentParser:
    """Register ``classify``."""
    p = add_subcommand(
        subparsers,
        "classify",
        help="FASTA + GFF3 -> BED4 of 0-fold and 4-fold degenerate sites",
        description=(
            "Build each transcript's coding sequence from its GFF3 CDS parts (honouring "
            "strand and phase), classify every codon position by the genetic code, and "
            "write a sorted, merged BED4 with the class (0fold or 4fold) in column 4. "
            "Codons with non-ACGT bases, incomplete codons, stop codons and transcripts "
            "with internal stops are excluded and counted (see --summary)."
        ),
        examples=_EXAMPLES,
    )
    p.add_argument(
        "--fasta",
        required=True,
        metavar="REF.fa[.gz]",
        help="reference FASTA, plain or bgzipped (.fai/.gzi made when absent)",
    )
    p.add_argument(
        "--gff",
        required=True,
        metavar="ANNOT.gff3[.gz]",
        help="GFF3 gene annotation (gene -> mRNA/transcript -> CDS)",
    )
    p.add_argument(
        "--code",
        type=int,
        default=1,
        metavar="N",
        help="NCBI translation table number (default 1, standard; available: "
        + ", ".join(str(k) for k in NCBI_TABLES)
        + ")",
    )
    p.add_argument(
        "--transcripts",
        choices=("agree", "longest"),
        default="agree",
        help="sites in several transcripts: keep only where all agree (default),"
        " or use only the longest CDS of each gene",
    )
    p.add_argument(
        "--exclude-softmasked",
        action="store_true",
        help="drop sites whose reference base is lowercase (soft-masked)",
    )
    p.add_argument(
        "-o", "--output", required=True, metavar="SITES.bed", help="output BED4 of site classes"
    )
    p.add_argument(
        "--summary",
        metavar="SUMMARY.tsv",
        help="also write counts per chromosome and class, and exclusions by reason",
    )
    add_common_arguments(p)
    p.set_defaults(runner=run)
    return p


def run(args: argparse.Namespace) -> int:
    """Run ``driftband classify`` from parsed arguments; returns the exit code."""
    if args.summary is not None and os.path.abspath(args.summary) == os.path.abspath(args.output):
        raise OptionError("--summary and -o/--output must be different files")
    check_outputs([args.output, args.summary], args.force)
    result = classify_sites(
        args.fasta,
        args.gff,
        code=args.code,
        transcripts=args.transcripts,
        exclude_softmasked=args.exclude_softmasked,
    )
    n = write_bed4(args.output, result.rows(), force=args.force)
    if args.summary is not None:
        write_summary(result, args.summary, force=args.force)
    if not args.quiet:
        for line in result.summary_lines():
            print(line, file=sys.stderr)
        what = f"wrote {args.output} ({n:,} intervals)" + (
            f" and {args.summary}" if args.summary else ""
        )
        after_commit(lambda: print(what, file=sys.stderr))
    return 0
