"""``driftband spectra``: VCF + sample table + site classes -> spectra file (JSON) and TSV."""

from __future__ import annotations

import argparse
import sys

from .._io import after_commit, check_outputs
from ..exceptions import OptionError
from ._common import CommaList, Subparsers, add_common_arguments, add_subcommand

__all__ = ["add_parser", "parse_project", "run"]

DESCRIPTION = """\
Count per-population, per-class site frequency spectra from a multi-sample VCF/BCF or
VCF Zarr store, kept per genomic block for the block bootstrap.

Keeps biallelic SNPs at the sites of the class BED (intersected with --callable);
callable sites absent from the VCF count as monomorphic ancestral (entry 0). A VCF with
no monomorphic record (variants-only) without --callable is warned about: give a
callable-sites BED or an all-sites VCF, or state --all-sites-callable. Missing
genotypes are handled by hypergeometric projection to n gene copies per population
(default n: the largest n called at >= 90% of the usable records; without missing data,
all gene copies). Skipped records are counted by reason. A summary (skip counts, n,
sites, segregating sites, pi, Watterson's theta, Tajima's D, piN/piS) goes to stderr."""

EXAMPLES = """\
driftband spectra calls.vcf.gz --samples pops.tsv --sites classes.bed -o spectra.json
driftband spectra calls.bcf --samples pops.tsv --sites classes.bed --callable mask.bed \\
    --ancestral outgroup:snail_out --project 20 --tsv spectra.tsv -o spectra.json
driftband spectra calls.vcf.gz --samples pops.tsv --sites classes.bed --ancestral fold \\
    --blocks genes.bed --min-dp 8 --min-gq 20 --pass-only --regions chr1,chr2:1-5000000 \\
    -o spectra.json
driftband spectra calls.vcf.gz --samples pops.tsv --sites classes.bed \\
    --ancestral fasta:ancestor.fa.gz --exclude-lowercase-ancestral -o spectra.json
bcftools view -s A1,A2,B1,B2 calls.vcf.gz | driftband spectra - --samples pops.tsv \\
    --sites classes.bed -o spectra.json
driftband spectra calls.vcz --samples pops.tsv --sites classes.bed -o spectra.json
driftband spectra calls.vcf.gz --samples pops.tsv --sites classes.bed --workers 8 \\
    --region-size 2000000 -o spectra.json
driftband spectra calls.vcf.gz --samples pops.tsv --sites classes.bed \\
    --scheduler tcp://node01:8786 -o spectra.json
"""


def add_parser(subparsers: Subparsers) -> argparse.ArgumentParser:
    """Register the ``spectra`` subcommand."""
    p = add_subcommand(
        subparsers,
        "spectra",
        help="VCF -> per-population site frequency spectra (JSON + TSV)",
        description=DESCRIPTION,
        examples=EXAMPLES,
    )
    p.add_argument(
        "vcf",
        metavar="VCF",
        help="VCF (bgzipped + indexed, bgzipped, gzipped or plain), BCF, - for standard "
        "input, or a VCF Zarr store (.vcz folder or zip; needs driftband[vcz])",
    )
    p.add_argument(
        "--samples",
        required=True,
        metavar="TABLE.tsv",
        help="sample table: TSV of sample and population columns (a header naming them optional)",
    )
    p.add_argument(
        "--sites",
        required=True,
        metavar="BED",
        help="BED4 of site classes (class in column 4, e.g. 0fold, 4fold)",
    )
    p.add_argument(
        "--callable",
        dest="callable_mask",
        metavar="BED",
        help="BED of callable sites; classes are intersected with it",
    )
    p.add_argument(
        "--all-sites-callable",
        action="store_true",
        help="state that every class site (after --callable and --regions) was callable, "
        "so that sites absent from a variants-only VCF are monomorphic (no warning)",
    )
    p.add_argument(
        "--ancestral",
        default="aa",
        metavar="aa|fold|outgroup:POP|fasta:FILE",
        help="polarisation: INFO/AA (default), fold (minor-allele spectra), "
        "the alleles of outgroup population POP of the sample table, or the bases of an "
        "ancestral sequence FILE (FASTA aligned to the reference)",
    )
    p.add_argument(
        "--exclude-lowercase-ancestral",
        action="store_true",
        help="with fasta:FILE, drop sites whose ancestral base is lower case (low confidence)",
    )
    p.add_argument(
        "--project",
        action=CommaList,
        metavar="N|POP=N,...",
        help="project every population (N) and/or single ones (POP=N) to N gene "
        "copies, e.g. 20,spring=16 (default: the largest N called at >= 90%% of usable "
        "records)",
    )
    g = p.add_mutually_exclusive_group()
    g.add_argument(
        "--block-size",
        type=int,
        default=100_000,
        metavar="BP",
        help="length of the bootstrap blocks (default 100000)",
    )
    g.add_argument("--blocks", metavar="BED", help="BED of blocks (e.g. genes) instead")
    p.add_argument(
        "--regions",
        action=CommaList,
        metavar="REGION,...",
        help="only these regions, comma-separated: CHROM, CHROM:START-END (1-based, "
        "inclusive) or BED files",
    )
    p.add_argument(
        "--min-gq", type=int, metavar="Q", help="set genotypes with GQ < Q (or no GQ) to missing"
    )
    p.add_argument(
        "--min-dp", type=int, metavar="D", help="set genotypes with DP < D (or no DP) to missing"
    )
    p.add_argument(
        "--pass-only", action="store_true", help="keep only records whose FILTER is PASS or ."
    )
    p.add_argument(
        "-o", "--output", required=True, metavar="JSON", help="spectra file (JSON) to write"
    )
    p.add_argument(
        "--tsv",
        metavar="TSV",
        help="also write the long table population, class, n, folded, derived_copies, site_count",
    )
    x = p.add_argument_group(
        "parallel counting (indexed VCF/BCF or VCF Zarr; results do not depend on these)"
    )
    x.add_argument(
        "--workers",
        type=int,
        default=None,
        metavar="N",
        help="local worker processes (default: the cores available)",
    )
    x.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="count on the dask.distributed scheduler at ADDRESS, e.g. "
        "tcp://HOST:8786 (needs driftband[cluster]; every worker must see the "
        "VCF at the same path; see the README, 'Running on a cluster')",
    )
    x.add_argument(
        "--region-size",
        type=int,
        metavar="BP",
        help="bases per counting task; a worker holds one task's records at a "
        "time (default 5000000)",
    )
    add_common_arguments(p)
    p.set_defaults(runner=run)
    return p


def parse_project(items: list[str] | None) -> int | dict[str, int] | None:
    """``--project`` values: ``N`` for all populations and/or ``POP=N`` for one."""
    if not items:
        return None
    out: dict[str, int] = {}
    for it in items:
        key, _, val = it.rpartition("=")
        key = key or "*"
        try:
            n = int(val)
        except ValueError:
            raise OptionError(f"--project {it!r}: expected N or POP=N with an integer N") from None
        if key in out:
            what = "all populations" if key == "*" else key
            raise OptionError(f"--project given twice for {what}")
        out[key] = n
    if list(out) == ["*"]:
        return out["*"]
    return out


def run(args: argparse.Namespace) -> int:
    """Run ``driftband spectra``."""
    from ..spectra.build import build_spectra
    from ..spectra.io import write_spectra_json, write_spectra_tsv
    from ..spectra.plan import DEFAULT_REGION_SIZE
    from ..spectra.summary import summary_lines

    outs = [args.output, args.tsv]
    if args.tsv is not None and args.tsv == args.output:
        raise OptionError("-o and --tsv must be different files")
    check_outputs(outs, args.force)
    project = parse_project(args.project)
    ss = build_spectra(
        args.vcf,
        args.samples,
        args.sites,
        callable_mask=args.callable_mask,
        ancestral=args.ancestral,
        project=project,
        block_size=args.block_size,
        blocks=args.blocks,
        regions=args.regions,
        min_gq=args.min_gq,
        min_dp=args.min_dp,
        pass_only=args.pass_only,
        region_size=(DEFAULT_REGION_SIZE if args.region_size is None else args.region_size),
        workers=args.workers,
        scheduler=args.scheduler,
        exclude_lowercase_ancestral=args.exclude_lowercase_ancestral,
        all_sites_callable=args.all_sites_callable,
    )
    write_spectra_json(ss, args.output, force=args.force)
    if args.tsv:
        write_spectra_tsv(ss, args.tsv, force=args.force)
    if not args.quiet:
        for line in summary_lines(ss):
            print(line, file=sys.stderr)
        what = f"wrote {args.output}" + (f" and {args.tsv}" if args.tsv else "")
        after_commit(lambda: print(what, file=sys.stderr))
    return 0
