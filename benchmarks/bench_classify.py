"""Benchmark of ``driftband classify`` on a synthetic genome.

Builds a random 50 Mb genome (5 chromosomes of 10 Mb) with 10,000 multi-exon protein-coding
genes on both strands (2-10 exons, about one gene in ten with a second isoform that skips
an exon), writes it as FASTA + GFF3, then runs ``driftband classify`` with a summary in a
fresh child process pinned to one core, and prints its wall time and peak resident memory
(``resource.getrusage(RUSAGE_CHILDREN).ru_maxrss``) against the targets: under 60 s on one
core and under 2 GB.

    python benchmarks/bench_classify.py [--mb 50] [--genes 10000] [--seed 1] [--keep DIR]
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np

TARGET_SECONDS = 60.0
TARGET_BYTES = 2 * 1024**3
STOPS = ("TAA", "TAG", "TGA")
BASES = np.frombuffer(b"ACGT", dtype=np.uint8)
COMPLEMENT = np.zeros(256, dtype=np.uint8)
COMPLEMENT[list(b"ACGT")] = list(b"TGCA")


def _sense_codons() -> np.ndarray:
    """The 61 sense codons of the standard code as a (61, 3) uint8 array."""
    out = []
    for a in "ACGT":
        for b in "ACGT":
            for c in "ACGT":
                if a + b + c not in STOPS:
                    out.append(list((a + b + c).encode()))
    return np.array(out, dtype=np.uint8)


def make_study(folder: str, mb: int, n_genes: int, seed: int) -> tuple[str, str, int]:
    """Write ``ref.fa`` and ``genes.gff3`` into ``folder``; returns paths and CDS bases."""
    rng = np.random.default_rng(seed)
    sense = _sense_codons()
    n_chrom = 5
    chrom_len = mb * 1_000_000 // n_chrom
    per_chrom = n_genes // n_chrom
    slot = chrom_len // per_chrom
    fa_path = os.path.join(folder, "ref.fa")
    gff_path = os.path.join(folder, "genes.gff3")
    coding = 0
    with open(fa_path, "w") as fa, open(gff_path, "w") as gff:
        gff.write("##gff-version 3\n")
        for ci in range(n_chrom):
            name = f"chr{ci + 1}"
            seq = BASES[rng.integers(0, 4, chrom_len)]
            gff.write(f"##sequence-region {name} 1 {chrom_len}\n")
            for gi in range(per_chrom):
                gid = f"{name}.g{gi + 1}"
                n_ex = int(rng.integers(2, 11))
                ex_len = rng.integers(50, 251, n_ex)
                introns = rng.integers(60, 201, n_ex - 1)
                total = int(ex_len.sum())
                ex_len[-1] += (-total) % 3  # whole codons
                total = int(ex_len.sum())
                n_codons = total // 3
                codons = sense[rng.integers(0, 61, n_codons)]
                codons[0] = list(b"ATG")
                codons[-1] = list(STOPS[int(rng.integers(0, 3))].encode())
                cds = codons.ravel()
                strand = "+" if rng.random() < 0.5 else "-"
                gstart = gi * slot + int(rng.integers(0, 200))  # 0-based
                starts = gstart + np.concatenate([[0], np.cumsum(ex_len[:-1] + introns)])
                ends = starts + ex_len
                # place the CDS: exon k of the transcript is genome exon k on '+', and
                # exon n-1-k on '-' (reverse-complemented)
                if strand == "+":
                    g_starts, g_ends, g_bases = starts, ends, cds
                    pos = np.concatenate([np.arange(s, e) for s, e in zip(starts, ends)])
                    seq[pos] = g_bases
                else:
                    lens_rev = ex_len[::-1]
                    g_starts = gstart + np.concatenate(
                        [[0], np.cumsum(lens_rev[:-1] + introns[::-1])]
                    )
                    g_ends = g_starts + lens_rev
                    pos = np.concatenate([np.arange(s, e) for s, e in zip(g_starts, g_ends)])
                    seq[pos] = COMPLEMENT[cds[::-1]]
                coding += total
                lo, hi = int(g_starts[0]) + 1, int(g_ends[-1])
                gff.write(f"{name}\tbench\tgene\t{lo}\t{hi}\t.\t{strand}\t.\tID={gid}\n")
                isoforms = [list(range(n_ex))]
                if n_ex > 2 and rng.random() < 0.1:
                    skip = int(rng.integers(1, n_ex - 1))
                    isoforms.append([k for k in range(n_ex) if k != skip])
                for ti, keep in enumerate(isoforms):
                    tid = f"{gid}.t{ti + 1}"
                    gff.write(
                        f"{name}\tbench\tmRNA\t{lo}\t{hi}\t.\t{strand}\t.\tID={tid};Parent={gid}\n"
                    )
                    # transcript order (k); phase from the cumulative length before it
                    done = 0
                    lines = []
                    for k in keep:
                        gk = k if strand == "+" else n_ex - 1 - k
                        s, e = int(g_starts[gk]), int(g_ends[gk])
                        lines.append(
                            f"{name}\tbench\tCDS\t{s + 1}\t{e}\t.\t{strand}\t"
                            f"{(3 - done % 3) % 3}\tID=cds-{tid};Parent={tid}\n"
                        )
                        done += e - s
                    gff.writelines(lines)
            fa.write(f">{name} synthetic benchmark chromosome\n")
            text = seq.tobytes()
            fa.write("\n".join(text[i : i + 60].decode() for i in range(0, len(text), 60)))
            fa.write("\n")
    return fa_path, gff_path, coding


def _one_core() -> None:  # pragma: no cover - runs in the child
    if hasattr(os, "sched_setaffinity"):
        os.sched_setaffinity(0, {sorted(os.sched_getaffinity(0))[0]})


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--mb", type=int, default=50, help="genome size in Mb (default 50)")
    ap.add_argument("--genes", type=int, default=10_000, help="genes (default 10000)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--keep", metavar="DIR", help="write the study here and keep it")
    args = ap.parse_args(argv)
    folder = args.keep or tempfile.mkdtemp(prefix="driftband-bench-classify-")
    os.makedirs(folder, exist_ok=True)
    t0 = time.perf_counter()
    fa, gff, coding = make_study(folder, args.mb, args.genes, args.seed)
    print(
        f"synthetic study: {args.mb} Mb, {args.genes} genes, {coding:,} CDS bases "
        f"(made in {time.perf_counter() - t0:.1f} s) in {folder}"
    )
    out = os.path.join(folder, "sites.bed")
    summary = os.path.join(folder, "summary.tsv")
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    cmd = [
        sys.executable,
        "-m",
        "driftband",
        "classify",
        "--fasta",
        fa,
        "--gff",
        gff,
        "-o",
        out,
        "--summary",
        summary,
        "--force",
    ]
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, env=env, preexec_fn=_one_core, capture_output=True, text=True)
    seconds = time.perf_counter() - t0
    if proc.returncode != 0:
        print(proc.stderr, file=sys.stderr)
        return 1
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024  # KiB on Linux
    with open(out) as fh:
        rows = sum(1 for _ in fh)
    totals = {}
    with open(summary) as fh:
        for line in fh:
            f = line.rstrip("\n").split("\t")
            if f[0] == "all":
                totals[f[2]] = int(f[3])
    print(
        f"classify: {rows:,} BED intervals; 0fold {totals['0fold']:,} sites, "
        f"4fold {totals['4fold']:,} sites; internal_stop {totals['internal_stop']} "
        f"transcripts; class_conflict {totals['class_conflict']:,} sites"
    )
    ok_t = "OK" if seconds < TARGET_SECONDS else "MISSED"
    ok_m = "OK" if peak < TARGET_BYTES else "MISSED"
    print(
        f"time        {seconds:8.1f} s    target < {TARGET_SECONDS:.0f} s on one core  "
        f"(ratio {seconds / TARGET_SECONDS:.2f})  {ok_t}"
    )
    print(
        f"peak memory {peak / 1024**2:8.0f} MiB  target < 2 GiB  "
        f"(ratio {peak / TARGET_BYTES:.2f})  {ok_m}"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
