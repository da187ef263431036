"""Benchmark: ``driftband spectra`` on a VCF Zarr store against the same data as a VCF.

The synthetic 200-sample x 200,000-SNP and 1,000-sample x 100,000-SNP studies of
``bench_spectra.make_study`` (under ``benchmarks/_data/``, reused when present) are
converted to VCF Zarr by bio2zarr (``vcf2zarr convert``, its default chunks of 1,000
variants x 10,000 samples; reused when present). Then, interleaved, BLAS threads 1:

* ``bcftools view -Ou FILE.vcf.gz > /dev/null``: htslib's decode floor of the VCF (when
  bcftools is on PATH; its column is left out otherwise);
* ``driftband spectra`` on the VCF and on the store, with ``--workers 1`` and ``2``;
* the counting alone (``build_spectra`` in a fresh process, without input checksums) on
  the VCF and the store, one worker.

Printed per file: wall times (best and median of the repeats), their ratio to the
bcftools floor and to the VCF route on one worker, peak resident memory (GNU time), and
genotypes counted per second (samples x records / best wall time). The spectra of the
two routes are checked to be identical apart from their provenance.

Usage::

    python benchmarks/bench_vcz.py                 # both files, 3 repeats
    python benchmarks/bench_vcz.py --only 200 --repeats 5

Target (kept here, see DEVELOPERS.md): the VCF Zarr route at <= 0.2x the bcftools floor
on one worker. Timings mean something only on an otherwise idle machine; the load
average is printed beside them.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from bench_spectra import interleaved, make_study  # noqa: E402

ENV = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
COUNT_ONLY = """
import sys
from driftband.spectra.build import build_spectra
build_spectra(*sys.argv[1:4], workers=1, checksums=False)
"""


def make_store(vcf: Path) -> Path:
    """The VCF converted to VCF Zarr by bio2zarr (reused when present)."""
    store = Path(str(vcf).removesuffix(".vcf.gz") + ".vcz")
    if not (store / ".zattrs").exists() and not (store / "zarr.json").exists():
        shutil.rmtree(store, ignore_errors=True)
        cmd = [sys.executable, "-m", "bio2zarr", "vcf2zarr", "convert", "-Q", "-p", "2"]
        subprocess.run([*cmd, str(vcf), str(store)], check=True)
    return store


def _body(path: Path) -> bytes:
    return path.read_bytes().partition(b',"provenance":')[0]


def bench(paths: dict[str, Path], n_samples: int, n_snps: int, repeats: int) -> None:
    """Print the figures of one study."""
    store = make_store(paths["vcf"])
    out = {k: paths["vcf"].parent / f"bench_vcz.{k}.json" for k in ("vcf", "vcz")}

    def spectra(inp: Path, key: str, workers: int) -> list[str]:
        return [
            sys.executable,
            "-m",
            "driftband",
            "spectra",
            str(inp),
            "--samples",
            str(paths["samples"]),
            "--sites",
            str(paths["sites"]),
            "-o",
            str(out[key]),
            "--force",
            "-q",
            "--workers",
            str(workers),
        ]

    def count(inp: Path) -> list[str]:
        return [
            sys.executable,
            "-c",
            COUNT_ONLY,
            str(inp),
            str(paths["samples"]),
            str(paths["sites"]),
        ]

    runs: dict[str, list[str]] = {}
    if shutil.which("bcftools"):
        runs["bcftools view -Ou (VCF)"] = ["bcftools", "view", "-Ou", str(paths["vcf"])]
    runs |= {
        "spectra VCF, 1 worker": spectra(paths["vcf"], "vcf", 1),
        "spectra VCZ, 1 worker": spectra(store, "vcz", 1),
        "spectra VCF, 2 workers": spectra(paths["vcf"], "vcf", 2),
        "spectra VCZ, 2 workers": spectra(store, "vcz", 2),
        "counting alone VCF, 1 worker": count(paths["vcf"]),
        "counting alone VCZ, 1 worker": count(store),
    }
    times, mem = interleaved(runs, repeats, ENV)
    same = _body(out["vcf"]) == _body(out["vcz"])
    floor = min(times["bcftools view -Ou (VCF)"]) if "bcftools view -Ou (VCF)" in runs else None
    vcf1 = min(times["spectra VCF, 1 worker"])
    size_v = paths["vcf"].stat().st_size / 1e6
    size_z = sum(p.stat().st_size for p in store.rglob("*") if p.is_file()) / 1e6
    print(
        f"\n{n_samples} samples x {n_snps:,} SNPs: VCF {size_v:.0f} MB bgzipped, store "
        f"{size_z:.0f} MB; {repeats} repeats; {_load()}"
    )
    print(f"spectra identical apart from provenance (VCF route vs VCZ route): {same}")
    head = f"{'command':<30} {'best s':>7} {'median s':>9} "
    head += f"{'/bcftools':>9} " if floor else ""
    head += f"{'/VCF 1w':>8} {'peak MB':>8} {'Mgeno/s':>8}"
    print(head)
    for name in runs:
        b, md = min(times[name]), statistics.median(times[name])
        row = f"{name:<30} {b:7.2f} {md:9.2f} "
        row += f"{b / floor:9.2f} " if floor else ""
        row += f"{b / vcf1:8.2f} {mem[name]:8.0f} {n_samples * n_snps / b / 1e6:8.1f}"
        print(row)
    sys.stdout.flush()
    if not same:
        raise SystemExit("the VCF and VCZ routes gave different spectra")


def _load() -> str:
    return "load average {:.1f} {:.1f} {:.1f}".format(*os.getloadavg())


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--only", choices=["200", "1000"], help="one of the two files")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--snps-200", type=int, default=200_000)
    ap.add_argument("--snps-1000", type=int, default=100_000)
    a = ap.parse_args()
    if shutil.which("bcftools"):
        v = subprocess.run(["bcftools", "--version"], capture_output=True, text=True).stdout
        print(v.splitlines()[0])
    else:
        print("bcftools is not on PATH: its column is left out")
    import bio2zarr
    import zarr

    print(f"zarr {zarr.__version__}, bio2zarr {bio2zarr.__version__}")
    if a.only in (None, "200"):
        bench(make_study(200, a.snps_200), 200, a.snps_200, a.repeats)
    if a.only in (None, "1000"):
        bench(make_study(1000, a.snps_1000), 1000, a.snps_1000, a.repeats)


if __name__ == "__main__":
    main()
