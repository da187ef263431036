"""VCF Zarr input: ``driftband spectra STORE.vcz`` gives the spectra of the VCF route.

The reference of every check is outside the new reader: the same data as a bgzipped,
indexed VCF read by the VCF route (htslib through pysam), converted to VCF Zarr by
bio2zarr; and scikit-allel's VCF reader for the genotypes themselves.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest

from vcz_helpers import head_vcf, run_spectra, synthetic_vcf, to_vcz, zip_store

ROOT = Path(__file__).resolve().parents[1]
TINY = ROOT / "example_vcfs"
DEMO = ROOT / "src" / "driftband" / "data" / "demo"


@pytest.fixture(scope="module")
def beetles(tmp_path_factory):
    """The synthetic study, and its store in chunks of 7 variants (so that regions and
    contigs cross chunk boundaries)."""
    d = tmp_path_factory.mktemp("beetles")
    paths = synthetic_vcf(d)
    paths["vcz"] = to_vcz(paths["vcf"], d / "beetles.vcz", chunk=7, samples_chunk=5)
    return paths


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    d = tmp_path_factory.mktemp("tiny")
    store = to_vcz(TINY / "tiny.vcf.gz", d / "tiny.vcz", chunk=50)
    return {"vcf": TINY / "tiny.vcf.gz", "vcz": store, "dir": d}


BEETLE_OPTIONS = {
    "aa": [],
    "fold": ["--ancestral", "fold"],
    "outgroup": ["--ancestral", "outgroup:outer"],
    "filters": ["--pass-only", "--min-dp", "4", "--min-gq", "8", "--project", "outer=2"],
    "project": ["--project", "4,birch=5"],
    "blocks": ["--blocks", "BLOCKS", "--ancestral", "fold", "--min-dp", "3"],
    "regions": ["--regions", "c1:2000-31000,c2", "--region-size", "3000"],
}


@pytest.mark.parametrize("name", sorted(BEETLE_OPTIONS))
def test_synthetic_store_gives_the_vcf_spectra(beetles, tmp_path, name):
    args = ["--samples", str(beetles["samples"]), "--sites", str(beetles["sites"])]
    args += [str(beetles["blocks"]) if a == "BLOCKS" else a for a in BEETLE_OPTIONS[name]]
    args += ["--workers", "1", "--region-size", "4000"] if name != "regions" else []
    rc_v, from_vcf = run_spectra(beetles["vcf"], tmp_path / "vcf.json", args)
    rc_z, from_vcz = run_spectra(beetles["vcz"], tmp_path / "vcz.json", args)
    # source: the VCF route (htslib) on the VCF that bio2zarr converted
    assert rc_v == rc_z == 0
    assert from_vcz == from_vcf
    doc = json.loads((tmp_path / "vcz.json").read_text())
    if name == "aa":  # the awkward records were there and skipped as in the VCF
        sk = doc["skipped"]
        assert sk["multiallelic"] > 0 and sk["indel_or_symbolic"] > 0
        assert sk["unpolarisable"] > 0 and sk["duplicate_position"] > 0
        assert doc["provenance"]["counts"]["monomorphic_records"] > 0
    if name == "filters":
        assert doc["skipped"]["filter"] > 0


def test_two_workers_and_a_zip_store_give_the_same_bytes(beetles, tmp_path):
    args = ["--samples", str(beetles["samples"]), "--sites", str(beetles["sites"])]
    args += ["--region-size", "5000"]
    _, one = run_spectra(beetles["vcf"], tmp_path / "one.json", [*args, "--workers", "1"])
    _, two = run_spectra(beetles["vcz"], tmp_path / "two.json", [*args, "--workers", "2"])
    z = zip_store(beetles["vcz"], tmp_path / "beetles.vcz.zip")
    _, zipped = run_spectra(z, tmp_path / "zip.json", [*args, "--workers", "1"])
    # source: the VCF route on one worker
    assert two == one and zipped == one
    prov = json.loads((tmp_path / "two.json").read_text())["provenance"]
    assert prov["execution"]["workers"] == 2
    assert prov["inputs"]["vcf"]["path"] == str(beetles["vcz"])
    assert len(prov["inputs"]["vcf"]["sha256"]) == 64


def test_dask_cluster_counts_a_store(beetles, tmp_path):
    # region tasks on a local dask cluster open the store themselves (source: the VCF
    # route on one worker)
    distributed = pytest.importorskip("distributed")
    args = ["--samples", str(beetles["samples"]), "--sites", str(beetles["sites"])]
    args += ["--region-size", "6000"]
    _, local = run_spectra(beetles["vcf"], tmp_path / "v.json", [*args, "--workers", "1"])
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0"
    ) as cl:
        _, dask = run_spectra(
            beetles["vcz"], tmp_path / "d.json", [*args, "--scheduler", cl.scheduler_address]
        )
    assert dask == local
    prov = json.loads((tmp_path / "d.json").read_text())["provenance"]
    assert prov["execution"]["scheduler"] == cl.scheduler_address


@pytest.mark.parametrize("extra", [[], ["--pass-only", "--min-gq", "30"], ["--ancestral", "fold"]])
def test_tiny_example_store(tiny, tmp_path, extra):
    args = ["--samples", str(TINY / "tiny.samples.tsv"), "--sites", str(TINY / "tiny.sites.bed")]
    args += [*extra, "--workers", "1"]
    _, from_vcf = run_spectra(tiny["vcf"], tmp_path / "vcf.json", args)
    _, from_vcz = run_spectra(tiny["vcz"], tmp_path / "vcz.json", args)
    assert from_vcz == from_vcf  # source: the VCF route on tiny.vcf.gz


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from driftband.cli import main

    d = tmp_path_factory.mktemp("demo")
    sites = d / "snail.sites.bed"
    fasta, gff = DEMO / "snail.fa.gz", DEMO / "snail.gff3"
    assert main(["classify", "--fasta", str(fasta), "--gff", str(gff), "-o", str(sites), "-q"]) == 0
    # the first 3,000 records (bio2zarr's conversion of all 26,000 takes ~15 s)
    vcf = head_vcf(DEMO / "snail.vcf.gz", d / "snail.head.vcf.gz", 3000)
    store = to_vcz(vcf, d / "snail.vcz", chunk=1000)
    return {"vcf": vcf, "vcz": store, "sites": sites, "fasta": fasta}


@pytest.mark.parametrize("anc", ["outgroup:sister", "fasta"])
def test_demo_store(demo, tmp_path, anc):
    anc = f"fasta:{demo['fasta']}" if anc == "fasta" else anc
    args = ["--samples", str(DEMO / "snail.samples.tsv"), "--sites", str(demo["sites"])]
    args += ["--ancestral", anc, "--block-size", "50000", "--all-sites-callable"]
    _, from_vcf = run_spectra(demo["vcf"], tmp_path / "vcf.json", [*args, "--workers", "1"])
    _, from_vcz = run_spectra(demo["vcz"], tmp_path / "vcz.json", [*args, "--workers", "2"])
    assert from_vcz == from_vcf  # source: the VCF route on the shipped demo VCF (its head)


def test_run_spectra_stage_reads_a_store(tiny, tmp_path):
    # driftband run's spectra stage on a dataset whose vcf is a store: the spectra of the
    # same stage on the VCF (source: the VCF route).
    from driftband.run.stages import stage_spectra
    from driftband.run.study import study_from_dict
    from vcz_helpers import spectra_body

    def stage(vcf: Path, out: Path) -> bytes:
        doc = {
            "dataset": [
                {
                    "vcf": str(vcf),
                    "samples": str(TINY / "tiny.samples.tsv"),
                    "sites": str(TINY / "tiny.sites.bed"),
                }
            ]
        }
        study = study_from_dict(doc, base=tmp_path)
        stage_spectra(study.datasets[0], TINY / "tiny.sites.bed", out)
        return spectra_body(out)

    assert stage(tiny["vcz"], tmp_path / "z.json") == stage(tiny["vcf"], tmp_path / "v.json")


def test_store_genotypes_match_scikit_allel(beetles):
    # The genotypes a batch hands to counting, against scikit-allel's own VCF reader.
    allel = pytest.importorskip("allel")
    from driftband.variants.vcz import VczSource

    ref = allel.read_vcf(str(beetles["vcf"]), fields=["variants/POS", "calldata/GT"])
    gt = ref["calldata/GT"]  # (variants, samples, 2), -1 missing (also a haploid's 2nd copy)
    with VczSource(beetles["vcz"]) as src:
        got, pos = [], []
        for chrom in ("c1", "c2"):
            for b in src.fetch(chrom, 0, 10**9):
                cols = np.arange(len(src.header.samples))
                g = b.genotypes(np.arange(len(b)), cols)
                got.append(g.alleles)
                pos.append(b.pos)
    got_a = np.concatenate(got)
    assert np.array_equal(np.concatenate(pos), ref["variants/POS"])
    h1 = list(src.header.samples).index("h1")
    called = got_a[:, h1, 0] >= 0
    assert np.all(got_a[called, h1, 1] == -2)  # the haploid sample: padding, not missing
    assert np.array_equal(np.where(got_a < 0, -1, got_a), gt)


def test_zarr_format_3_store(beetles, tmp_path):
    # a store of Zarr format 3 is read through zarr itself (format 2 chunks are decoded
    # straight from their bytes): the same spectra (source: the VCF route)
    store = to_vcz(beetles["vcf"], tmp_path / "v3.vcz", chunk=40, samples_chunk=5, zarr_format=3)
    assert (store / "zarr.json").exists()
    args = ["--samples", str(beetles["samples"]), "--sites", str(beetles["sites"])]
    args += ["--workers", "1", "--region-size", "4000", "--min-gq", "5", "--project", "outer=2"]
    _, from_vcf = run_spectra(beetles["vcf"], tmp_path / "v.json", args)
    _, from_vcz = run_spectra(store, tmp_path / "z.json", args)
    assert from_vcz == from_vcf


def test_store_without_region_index_reads_positions(beetles, tmp_path):
    # the chunks a region needs come from variant_position when there is no region_index
    store = tmp_path / "noindex.vcz"
    shutil.copytree(beetles["vcz"], store)
    shutil.rmtree(store / "region_index")
    args = ["--samples", str(beetles["samples"]), "--sites", str(beetles["sites"])]
    args += ["--workers", "1", "--region-size", "4000"]
    _, from_vcf = run_spectra(beetles["vcf"], tmp_path / "v.json", args)
    _, from_vcz = run_spectra(store, tmp_path / "z.json", args)
    assert from_vcz == from_vcf  # source: the VCF route


def test_readme_vcz_example_runs(tmp_path):
    # The README's "VCF Zarr input" commands run as written (the install line left out, its
    # /tmp paths moved to a temporary folder) and give the VCF route's spectra (source).
    import subprocess
    import sys

    from vcz_helpers import spectra_body

    text = (ROOT / "README.md").read_text(encoding="utf-8")
    block = text.split("### VCF Zarr input", 1)[1].split("```bash", 1)[1].split("```")[0]
    lines = block.strip().splitlines()
    assert lines[0].startswith("pip install '.[vcz]'")
    script = "\n".join(lines[1:]).replace("/tmp/", f"{tmp_path}/")
    shim = (
        f'driftband() {{ "{sys.executable}" -m driftband "$@"; }}\n'
        f'vcf2zarr() {{ "{sys.executable}" -m bio2zarr vcf2zarr "$@"; }}\nset -euo pipefail\n'
    )
    r = subprocess.run(
        ["bash", "-c", shim + script], cwd=ROOT, capture_output=True, text=True, timeout=300
    )
    assert r.returncode == 0, r.stderr
    args = ["--samples", str(TINY / "tiny.samples.tsv"), "--sites", str(TINY / "tiny.sites.bed")]
    _, from_vcf = run_spectra(TINY / "tiny.vcf.gz", tmp_path / "vcf.json", args)
    assert spectra_body(tmp_path / "tiny.vcz.spectra.json") == from_vcf


@pytest.mark.slow
def test_driftband_run_on_a_store(tiny, tmp_path):
    # The whole job (spectra, fits, comparisons, report) with the store as the dataset's
    # vcf: its spectra.json equals that of the same run on the VCF (source: the VCF route).
    from driftband.cli import main
    from vcz_helpers import spectra_body

    def run(vcf: Path, out: Path) -> bytes:
        args = ["run", "--vcf", str(vcf), "--samples", str(TINY / "tiny.samples.tsv")]
        args += ["--sites", str(TINY / "tiny.sites.bed"), "--bootstrap", "0", "--dfe", "gamma"]
        assert main([*args, "--out-dir", str(out), "--workers", "1", "-q"]) == 0
        assert (out / "report.html").is_file()
        return spectra_body(out / "spectra.json")

    assert run(tiny["vcz"], tmp_path / "z") == run(tiny["vcf"], tmp_path / "v")
