"""``driftband check``: will ``driftband run`` succeed on these inputs, and what will it do?"""

from __future__ import annotations

import argparse
import math
import sys
from typing import TYPE_CHECKING

from ._common import Subparsers, add_common_arguments, add_subcommand
from .run import add_study_arguments, study_from_args

if TYPE_CHECKING:
    from ..run.preflight import DatasetCheck

__all__ = ["add_parser", "format_check", "run"]

DESCRIPTION = """\
A preflight of 'driftband run' on the same study file or flags: reads the VCF header, the
sample table and the site classes, makes one pass over the VCF records at the class
sites, and prints per dataset and population: samples found and missing, chromosomes
matched (with a hint when only a 'chr' prefix differs), the polarisation source and its
coverage, callable sites per class, whether the VCF looks variants-only (and so where the
callable sites come from), missing data, segregating sites and blocks for candidate
sample sizes n (* marks the n the run would take), and what the run would do.

Writes nothing. Exit code 0 when the run would succeed, 2 with the reasons when not."""

EXAMPLES = r"""
driftband check study.toml
driftband check --vcf calls.vcf.gz --samples pops.tsv --sites classes.bed --callable mask.bed
driftband check --vcf calls.vcf.gz --samples pops.tsv --sites classes.bed \
    --ancestral fasta:ancestor.fa.gz --exclude-lowercase-ancestral
"""


def add_parser(subparsers: Subparsers) -> argparse.ArgumentParser:
    """Register the ``check`` subcommand."""
    p = add_subcommand(
        subparsers,
        "check",
        help="preflight of 'run': samples, contigs, polarisation, callable sites, n",
        description=DESCRIPTION,
        examples=EXAMPLES,
    )
    add_study_arguments(p)
    p.add_argument(
        "--workers", type=int, metavar="N", help="worker processes (default: the cores available)"
    )
    add_common_arguments(p, output=False)
    p.set_defaults(runner=run)
    return p


def _num(x: float) -> str:
    return "NA" if not math.isfinite(x) else f"{x:,.0f}" if x >= 10 else f"{x:.1f}"


def format_check(c: DatasetCheck) -> list[str]:
    """The preflight of one dataset as lines of text."""
    out = [f"dataset {c.name}"]
    w = max([len(k) for k, _ in c.facts] + [12])
    out += [f"  {k:<{w}}  {v}" for k, v in c.facts]
    if c.populations:
        out.append("  samples")
        for p in c.populations:
            miss = f", missing {len(p.missing)}: {', '.join(p.missing[:5])}" if p.missing else ""
            md = "" if p.missing_data is None else f"; {p.missing_data:.1%} of gene copies missing"
            role = " (outgroup)" if p.role == "outgroup" else ""
            out.append(f"    {p.name}{role}: {p.found} found{miss}{md}")
    for p in c.populations:
        if not p.candidates:
            continue
        classes = list(p.candidates[0].segregating)
        out.append(f"  sample sizes of {p.name} (* the run's n)")
        out.append(
            "    "
            + f"{'n':>6} {'records kept':>12} "
            + " ".join(f"{'seg. ' + c:>12}" for c in classes)
            + f" {'blocks':>7}"
        )
        for k in p.candidates:
            mark = "*" if k.n == p.n else " "
            out.append(
                f"    {mark}{k.n:>5} {k.kept:>12.1%} "
                + " ".join(f"{_num(k.segregating[c]):>12}" for c in classes)
                + f" {k.blocks:>7}"
            )
    if c.plan:
        out.append("  run would")
        out += [f"    - {x}" for x in c.plan]
    out += [f"  warning: {x}" for x in c.warnings]
    out += [f"  problem: {x}" for x in c.problems]
    return out


def run(args: argparse.Namespace) -> int:
    """Run ``driftband check``."""
    from ..run.preflight import check_study

    study = study_from_args(args)
    checks = check_study(study, count=True, workers=args.workers)
    for c in checks:
        for line in format_check(c):
            print(line, file=sys.stdout)
    bad = [p for c in checks for p in c.problems]
    if bad:
        print(
            f"driftband check: {len(bad)} problem(s): 'driftband run' would stop; fix them "
            "and check again",
            file=sys.stderr,
        )
        return 2
    if not args.quiet:
        print("driftband check: 'driftband run' would succeed", file=sys.stderr)
    return 0
