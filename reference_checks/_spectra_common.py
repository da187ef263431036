"""Shared bits of the spectra reference checks: the Check record, the PASS/FAIL printer and
a writer of small VCFs from allele arrays (no driftband code)."""

from __future__ import annotations

import os
from typing import NamedTuple

import numpy as np


class Check(NamedTuple):
    """One check: name, outcome, what differed (empty when passed), source."""

    name: str
    passed: bool
    detail: str
    source: str


def report(checks: list[Check]) -> int:
    """Print one PASS/FAIL line per check; return 0 when all pass, else 1."""
    for c in checks:
        line = f"{'PASS' if c.passed else 'FAIL'}  {c.name}  [source: {c.source}]"
        if c.detail and not c.passed:
            line += f"  {c.detail}"
        print(line)
    failed = sum(not c.passed for c in checks)
    print(f"{len(checks) - failed} passed, {failed} failed")
    return 0 if failed == 0 else 1


def write_vcf(
    path: str,
    chroms: list[str],
    lengths: dict[str, int],
    records,
    samples,
    ancestral_ref: bool = True,
) -> None:
    """Write a VCF: ``records`` are (chrom, pos 1-based, alleles (samples, 2) int with -1
    missing); REF A, ALT T, INFO/AA = A."""
    with open(path, "w", encoding="ascii") as fh:
        fh.write("##fileformat=VCFv4.2\n")
        for c in chroms:
            fh.write(f"##contig=<ID={c},length={lengths[c]}>\n")
        fh.write('##INFO=<ID=AA,Number=1,Type=String,Description="Ancestral allele">\n')
        fh.write('##FORMAT=<ID=GT,Number=1,Type=String,Description="Genotype">\n')
        fh.write(
            "#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\tFORMAT\t" + "\t".join(samples) + "\n"
        )
        for c, pos, al in records:
            gts = "\t".join(
                f"{'.' if a < 0 else a}/{'.' if b < 0 else b}" for a, b in np.asarray(al).tolist()
            )
            fh.write(
                f"{c}\t{pos}\t.\tA\tT\t50\tPASS\tAA={'A' if ancestral_ref else 'T'}\tGT\t{gts}\n"
            )


def write_text(path: str, text: str) -> str:
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(text)
    return os.fspath(path)
