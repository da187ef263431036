"""Helpers of the VCF Zarr tests: stores converted from VCFs by bio2zarr, a synthetic VCF
with the awkward cases, and running ``driftband spectra`` on either input."""

from __future__ import annotations

import zipfile
from pathlib import Path

import numpy as np
import pytest

from driftband.cli import main
from vcf_fixtures import header, rec, write_vcf

pytest.importorskip("zarr")
b2z = pytest.importorskip("bio2zarr.vcf")


def to_vcz(
    vcf: Path, out: Path, chunk: int = 10_000, samples_chunk: int = 10_000, zarr_format: int = 2
) -> Path:
    """Convert an indexed VCF to a VCF Zarr store with bio2zarr (in this process)."""
    b2z.convert(
        [str(vcf)],
        str(out),
        variants_chunk_size=chunk,
        samples_chunk_size=samples_chunk,
        worker_processes=0,
        show_progress=False,
        zarr_format=zarr_format,
    )
    return out


def head_vcf(vcf: Path, out: Path, n: int) -> Path:
    """The header and first ``n`` records of an indexed VCF, bgzipped and indexed (pysam)."""
    import pysam

    with (
        pysam.VariantFile(str(vcf)) as vin,
        pysam.VariantFile(str(out), "wz", header=vin.header) as vout,
    ):
        for i, r in enumerate(vin):
            if i == n:
                break
            vout.write(r)
    pysam.tabix_index(str(out), preset="vcf", force=True)
    return out


def zip_store(store: Path, out: Path) -> Path:
    """The store as an uncompressed zip file (Zarr's ZipStore layout: paths from the root)."""
    with zipfile.ZipFile(out, "w", zipfile.ZIP_STORED) as z:
        for p in sorted(store.rglob("*")):
            if p.is_file():
                z.write(p, p.relative_to(store).as_posix())
    return out


def spectra_body(path: Path) -> bytes:
    """The spectra JSON up to its provenance (the part that must not depend on the input
    kind, the worker count or the date)."""
    return path.read_bytes().partition(b',"provenance":')[0]


def run_spectra(inp: Path, out: Path, args: list[str]) -> tuple[int, bytes]:
    """``driftband spectra INPUT ARGS -o OUT`` in this process: exit code and JSON body."""
    rc = main(["spectra", str(inp), *args, "-o", str(out), "--force", "-q"])
    return rc, (spectra_body(out) if rc == 0 else b"")


SAMPLES = ["a1", "a2", "a3", "a4", "a5", "b1", "b2", "b3", "b4", "h1", "o1", "o2"]
SAMPLE_TABLE = "".join(
    f"{s}\t{'alder' if s[0] == 'a' else 'birch' if s[0] in 'bh' else 'outer'}\n" for s in SAMPLES
)
CONTIGS = (("c1", 60_000), ("c2", 40_000), ("c3", 5_000))


def synthetic_vcf(folder: Path, n: int = 400, seed: int = 3) -> dict[str, Path]:
    """An invented study (three woodland beetle populations: alder, birch and an outgroup)
    as a bgzipped, indexed VCF with its sample table and site classes.

    The records cover: missing calls, a haploid sample (h1, in birch), multi-allelic
    records, ``<*>`` placeholders, indels, monomorphic records (some fixed for another
    AA), AA in lower case, with a ``|`` suffix, missing or ``N``, FILTER PASS, LowQual
    and ``.``, DP/GQ with missing values, duplicate positions, and a contig without
    records (c3).
    """
    rng = np.random.default_rng(seed)
    lines = []
    for chrom, length in CONTIGS[:2]:
        pos = np.sort(rng.choice(np.arange(1, length), n // 2, replace=False))
        pos[10] = pos[9]  # a duplicate position
        for j, p in enumerate(pos.tolist()):
            ref, alt = "ACGT"[j % 4], "CGTA"[j % 4]
            kind = j % 11
            alts = {5: f"{alt},G" if ref != "G" else f"{alt},T", 6: f"{alt},<*>", 7: "."}.get(
                kind, alt
            )
            if kind == 8:
                ref, alts = ref + "A", alt
            if kind == 9:
                alts = "<*>"
            aa = {0: ref.lower(), 1: f"{alt}|anc", 2: ".", 3: "N", 4: alt}.get(kind, ref)
            if kind == 7 and j % 2:
                aa = alt  # a monomorphic record fixed for the derived allele
            filt = {0: "LowQual", 1: "."}.get(j % 7, "PASS")
            gts = []
            freq = rng.random()
            for s in SAMPLES:
                dp = int(rng.integers(0, 30))
                gq = int(rng.integers(0, 99))
                if rng.random() < 0.08:
                    g = "." if s == "h1" else "./."
                    gts.append(f"{g}:.:.")
                    continue
                k = int(rng.random() < freq) + (0 if s == "h1" else int(rng.random() < freq))
                if kind == 5 and s != "h1" and rng.random() < 0.2:
                    g = "0/2"
                elif kind in (7, 9):
                    g = "0" if s == "h1" else "0/0"
                elif s == "h1":
                    g = str(k)
                else:
                    g = ("0/0", "0/1", "1/1")[k]
                dps = "." if rng.random() < 0.05 else str(dp)
                gts.append(f"{g}:{dps}:{gq}")
            lines.append(rec(chrom, p, ref, alts, gts, info=f"AA={aa}", filt=filt, fmt="GT:DP:GQ"))
    text = header(SAMPLES, contigs=CONTIGS) + "\n".join(lines) + "\n"
    vcf = write_vcf(folder / "beetles.vcf", text, kind="bgzf")
    table = folder / "beetles.samples.tsv"
    table.write_text("sample\tpopulation\n" + SAMPLE_TABLE)
    sites = folder / "beetles.sites.bed"
    rows = []
    for chrom, length in CONTIGS:
        half = length // 2
        rows += [f"{chrom}\t0\t{half}\t0fold", f"{chrom}\t{half}\t{length}\t4fold"]
    sites.write_text("\n".join(rows) + "\n")
    blocks = folder / "beetles.blocks.bed"
    blocks.write_text("c1\t100\t20000\tg1\nc1\t25000\t59000\tg2\nc2\t0\t39000\tg3\n")
    return {"vcf": vcf, "samples": table, "sites": sites, "blocks": blocks}
