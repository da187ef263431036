"""Benchmark: ``driftband spectra`` against htslib's decode floor, ``bcftools view -Ou``.

Builds synthetic studies under ``benchmarks/_data/`` (git-ignored; reused when present):
a 200-sample x 200,000-SNP and a 1,000-sample file, bgzipped + tabix-indexed, FORMAT
GT:DP:GQ, about 2 % missing genotypes, INFO/AA, on two chromosomes, with a site-class BED
that covers every record (the worst case: every record is decoded). Then times, in the
same run and interleaved, ``bcftools view -Ou FILE > /dev/null`` and ``driftband spectra``
(one worker process, BLAS threads 1) with and without the genotype filters, and prints the wall
times (best and median of the repeats), their ratio and driftband's peak memory.

Usage::

    python benchmarks/bench_spectra.py                 # both files, 3 repeats
    python benchmarks/bench_spectra.py --only 200 --repeats 5
    python benchmarks/bench_spectra.py --snps-1000 200000

Target (driftband's speed targets live in these scripts, see DEVELOPERS.md): a ratio
<= 1.0 on one worker.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
DATA = HERE / "_data"
CHROM_LEN = 20_000_000


def make_study(n_samples: int, n_snps: int, seed: int = 1) -> dict[str, Path]:
    """Write the synthetic VCF (+ .tbi), sample table and site BED; return their paths."""
    DATA.mkdir(parents=True, exist_ok=True)
    stem = DATA / f"bench_{n_samples}x{n_snps}"
    paths = {
        "vcf": Path(f"{stem}.vcf.gz"),
        "samples": Path(f"{stem}.samples.tsv"),
        "sites": Path(f"{stem}.sites.bed"),
    }
    if all(p.exists() for p in paths.values()) and Path(f"{stem}.vcf.gz.tbi").exists():
        return paths
    t0 = time.time()
    rng = np.random.default_rng(seed)
    chroms = ("chr1", "chr2")
    samples = [f"ind{i:04d}" for i in range(n_samples)]
    # derived allele frequencies ~ log-uniform (roughly the neutral 1/x spectrum)
    u = rng.random(n_snps)
    freq = np.minimum(np.exp(np.log(1 / (2 * n_samples)) * (1 - u)), 0.999)
    # sample fields: "A/B:DP:GQ" with variable-width DP and GQ, or "./.:.:." when missing
    gts = ("0/0", "0/1", "1/1")
    table = np.array(
        [f"{g}:{dp}:{gq}" for g in gts for dp in range(100) for gq in range(100)] + ["./.:.:."],
        dtype=object,
    )
    plain = Path(f"{stem}.vcf")
    with open(plain, "w", encoding="ascii") as out:
        out.write("##fileformat=VCFv4.2\n")
        for c in chroms:
            out.write(f"##contig=<ID={c},length={CHROM_LEN}>\n")
        out.write(
            '##INFO=<ID=AA,Number=1,Type=String,Description="Ancestral allele">\n'
            '##FORMAT=<ID=GT,Number=1,Type=String,Description="Genotype">\n'
            '##FORMAT=<ID=DP,Number=1,Type=Integer,Description="Read depth">\n'
            '##FORMAT=<ID=GQ,Number=1,Type=Integer,Description="Genotype quality">\n'
        )
        out.write(
            "#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\tFORMAT\t" + "\t".join(samples) + "\n"
        )
        bases = "ACGT"
        k = 0
        per = n_snps // len(chroms)
        for c in chroms:
            pos = np.sort(rng.choice(np.arange(1, CHROM_LEN), per, replace=False))
            for j in range(per):
                a = (rng.random((n_samples, 2)) < freq[k]).sum(1)
                dp = rng.poisson(20, n_samples).clip(0, 99)
                gq = rng.integers(0, 100, n_samples)
                idx = a * 10000 + dp * 100 + gq
                idx[rng.random(n_samples) < 0.02] = 30000
                r = int(rng.integers(4))
                ref, alt = bases[r], bases[(r + 1 + int(rng.integers(3))) % 4]
                aa = ref if rng.random() < 0.85 else alt
                out.write(
                    f"{c}\t{pos[j]}\t.\t{ref}\t{alt}\t50\tPASS\tAA={aa}\tGT:DP:GQ\t"
                    + "\t".join(table[idx])
                    + "\n"
                )
                k += 1
    if shutil.which("bgzip"):
        subprocess.run(["bgzip", "-f", str(plain)], check=True)
    else:
        import pysam

        pysam.tabix_compress(str(plain), str(paths["vcf"]), force=True)
        plain.unlink()
    import pysam

    pysam.tabix_index(str(paths["vcf"]), preset="vcf", force=True)
    with open(paths["samples"], "w") as fh:
        for i, s in enumerate(samples):
            fh.write(f"{s}\t{'north' if i < n_samples // 2 else 'south'}\n")
    with open(paths["sites"], "w") as fh:  # alternating 1 kb of 0-fold and 4-fold sites
        for c in chroms:
            for s in range(0, CHROM_LEN, 2000):
                fh.write(f"{c}\t{s}\t{s + 1000}\t0fold\n{c}\t{s + 1000}\t{s + 2000}\t4fold\n")
    print(
        f"built {paths['vcf'].name} ({paths['vcf'].stat().st_size / 1e6:.0f} MB) "
        f"in {time.time() - t0:.0f} s",
        flush=True,
    )
    return paths


def timed(cmd: list[str], stdout=subprocess.DEVNULL, env=None) -> tuple[float, float]:
    """Wall time (s) and peak resident memory (MB) of one command.

    Memory comes from GNU time (``/usr/bin/time -f %M``) when installed: the rusage of a
    child forked straight from this (large) Python process would count its pages too.
    """
    gnu_time = shutil.which("time") or (
        "/usr/bin/time" if os.path.exists("/usr/bin/time") else None
    )
    full = [gnu_time, "-f", "@@%M", *cmd] if gnu_time else cmd
    t0 = time.perf_counter()
    p = subprocess.run(full, stdout=stdout, stderr=subprocess.PIPE, env=env)
    wall = time.perf_counter() - t0
    err = p.stderr.decode(errors="replace")
    if p.returncode != 0:
        raise SystemExit(f"command failed ({p.returncode}): {' '.join(cmd)}\n{err}")
    mem = float("nan")
    for line in err.splitlines():
        if line.startswith("@@"):
            mem = int(line[2:]) / 1024.0
    return wall, mem


def interleaved(
    runs: dict[str, list[str]], repeats: int, env=None
) -> tuple[dict[str, list[float]], dict[str, float]]:
    """Wall times of every command, ``repeats`` rounds interleaved (so that a change of
    the machine's load hits all commands alike), and each command's peak memory (MB)."""
    times: dict[str, list[float]] = {k: [] for k in runs}
    mem: dict[str, float] = {}
    for _ in range(repeats):
        for name, cmd in runs.items():
            w, m = timed(cmd, env=env)
            times[name].append(w)
            mem[name] = max(mem.get(name, 0.0), m)
    return times, mem


def bench(paths: dict[str, Path], repeats: int) -> None:
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    out = DATA / "bench.spectra.json"
    base = [
        sys.executable,
        "-m",
        "driftband",
        "spectra",
        str(paths["vcf"]),
        "--samples",
        str(paths["samples"]),
        "--sites",
        str(paths["sites"]),
        "-o",
        str(out),
        "--force",
        "-q",
    ]
    helptext = subprocess.run(base[:4] + ["--help"], capture_output=True, text=True).stdout
    if "--workers" in helptext:  # one worker: the comparison is with one bcftools thread
        base += ["--workers", "1"]
    runs = {
        "bcftools view -Ou": ["bcftools", "view", "-Ou", str(paths["vcf"])],
        "driftband spectra": base,
        "driftband spectra --min-dp 10 --min-gq 20": base + ["--min-dp", "10", "--min-gq", "20"],
    }
    times, mem = interleaved(runs, repeats, env)
    floor_best = min(times["bcftools view -Ou"])
    floor_med = statistics.median(times["bcftools view -Ou"])
    size = paths["vcf"].stat().st_size / 1e6
    print(f"\n{paths['vcf'].name}: {size:.0f} MB bgzipped, {repeats} repeats")
    print(
        f"{'command':<44} {'best s':>7} {'median s':>9} {'ratio best':>10} "
        f"{'ratio med':>9} {'peak MB':>8}"
    )
    for name in runs:
        b, md = min(times[name]), statistics.median(times[name])
        print(
            f"{name:<44} {b:7.2f} {md:9.2f} {b / floor_best:10.2f} {md / floor_med:9.2f} "
            f"{mem[name]:8.0f}"
        )
    sys.stdout.flush()


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--only", choices=["200", "1000"], help="one of the two files")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--snps-200", type=int, default=200_000)
    ap.add_argument("--snps-1000", type=int, default=100_000)
    a = ap.parse_args()
    if not shutil.which("bcftools"):
        raise SystemExit("bcftools is needed (apt-get install bcftools)")
    print(
        subprocess.run(
            ["bcftools", "--version"], capture_output=True, text=True
        ).stdout.splitlines()[0]
    )
    if a.only in (None, "200"):
        bench(make_study(200, a.snps_200), a.repeats)
    if a.only in (None, "1000"):
        bench(make_study(1000, a.snps_1000), a.repeats)


if __name__ == "__main__":
    main()
