"""Helpers of the VCF and spectra tests: tiny VCFs from inline text, in every file kind."""

from __future__ import annotations

import gzip
import os
import subprocess
from pathlib import Path

import numpy as np
import pysam

FORMAT_LINES = [
    '##FORMAT=<ID=GT,Number=1,Type=String,Description="Genotype">',
    '##FORMAT=<ID=DP,Number=1,Type=Integer,Description="Read depth">',
    '##FORMAT=<ID=GQ,Number=1,Type=Integer,Description="Genotype quality">',
]


def header(samples, contigs=(("1", 100_000),), aa=True, extra=()) -> str:
    lines = ["##fileformat=VCFv4.2"]
    lines += [f"##contig=<ID={c},length={n}>" for c, n in contigs]
    lines += ['##FILTER=<ID=LowQual,Description="Low quality">']
    if aa:
        lines += ['##INFO=<ID=AA,Number=1,Type=String,Description="Ancestral allele">']
    lines += FORMAT_LINES
    lines += list(extra)
    lines += [
        "\t".join(
            ["#CHROM", "POS", "ID", "REF", "ALT", "QUAL", "FILTER", "INFO", "FORMAT", *samples]
        )
    ]
    return "\n".join(lines) + "\n"


def rec(chrom, pos, ref, alt, gts, info="AA=A", filt="PASS", fmt="GT") -> str:
    return "\t".join([str(chrom), str(pos), ".", ref, alt, "50", filt, info, fmt, *gts])


def write_vcf(path: Path, text: str, kind: str = "plain") -> Path:
    """Write VCF text as 'plain', 'bgzf' (+ .tbi), 'csi', 'bgzf_noindex', 'gzip' or 'bcf'
    (+ .csi); returns the path of the file written."""
    path = Path(path)
    plain = path.with_suffix(".vcf") if path.suffix != ".vcf" else path
    plain.write_text(text, encoding="utf-8")
    if kind == "plain":
        return plain
    if kind == "gzip":
        out = plain.with_suffix(".vcf.gz")
        with gzip.open(out, "wb") as fh:
            fh.write(text.encode())
        return out
    out = Path(str(plain) + ".gz")
    if kind in ("bgzf", "csi", "bgzf_noindex"):
        pysam.tabix_compress(str(plain), str(out), force=True)
        if kind == "bgzf":
            pysam.tabix_index(str(out), preset="vcf", force=True)
        elif kind == "csi":
            pysam.tabix_index(str(out), preset="vcf", force=True, csi=True)
        return out
    if kind == "bcf":
        out = Path(str(plain)[:-4] + ".bcf")
        with (
            pysam.VariantFile(str(plain)) as vin,
            pysam.VariantFile(str(out), "wb", header=vin.header) as vout,
        ):
            for r in vin:
                vout.write(r)
        subprocess.run(["bcftools", "index", "-f", str(out)], check=True)
        return out
    raise ValueError(kind)


def write_text(path: Path, text: str) -> Path:
    path = Path(path)
    path.write_text(text, encoding="utf-8")
    return path


def random_study(
    rng: np.random.Generator,
    n_samples: int,
    n_records: int,
    chroms=("1", "2"),
    length=50_000,
    missing=0.0,
    haploid_samples=(),
    aa_swap=0.3,
    mono=0.05,
):
    """A random biallelic study: returns (vcf_text, truth) with truth holding the per
    record position, REF/ALT, AA, and the allele index array (records, samples, 2)."""
    samples = [f"s{i}" for i in range(n_samples)]
    recs, truth = [], []
    per = n_records // len(chroms)
    for c in chroms:
        pos = np.sort(rng.choice(np.arange(1, length), per, replace=False)) + 0
        for p in pos.tolist():
            is_mono = rng.random() < mono
            f = 0.0 if is_mono else rng.uniform(0.02, 0.98)
            al = (rng.random((n_samples, 2)) < f).astype(np.int8)
            al[list(haploid_samples), 1] = -2
            miss = rng.random(n_samples) < missing
            al[miss] = np.where(al[miss] == -2, -2, -1)
            ref = "A"
            alt = "." if is_mono else "G"
            aa = "G" if (not is_mono and rng.random() < aa_swap) else "A"
            gts = []
            for a, b in al.tolist():
                sa = "." if a == -1 else str(a)
                if b == -2:
                    gts.append(sa)
                else:
                    gts.append(f"{sa}/{'.' if b == -1 else b}")
            recs.append(rec(c, p, ref, alt, gts, info=f"AA={aa}"))
            truth.append((c, p, ref, alt, aa, al))
    text = header(samples, [(c, length) for c in chroms]) + "\n".join(recs) + "\n"
    return text, samples, truth


def cleanup(*paths) -> None:
    for p in paths:
        for ext in ("", ".tbi", ".csi"):
            if os.path.exists(str(p) + ext):
                os.unlink(str(p) + ext)
