"""Bad VCF Zarr input to ``driftband spectra``: one line naming the store and the array or
key at fault, exit code 2, nothing written (no output, no temporary file) and the store
untouched. Stores are converted from a small VCF by bio2zarr and then damaged."""

from __future__ import annotations

import builtins
import json
import os
import shutil
from pathlib import Path

import pytest

from driftband.cli import main
from driftband.variants.vcz import VCZ_VERSIONS
from vcz_helpers import synthetic_vcf, to_vcz


@pytest.fixture(scope="module")
def good(tmp_path_factory):
    d = tmp_path_factory.mktemp("vczbad")
    paths = synthetic_vcf(d, n=60)
    paths["vcz"] = to_vcz(paths["vcf"], d / "good.vcz", chunk=10)
    return paths


@pytest.fixture
def store(good, tmp_path):
    """A fresh copy of the good store, to damage."""
    s = tmp_path / "calls.vcz"
    shutil.copytree(good["vcz"], s)
    return s


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {str(p): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def run_bad(capfd, good, store, *extra, sites=None):
    """Run on ``store``; check the one-line error, exit 2, no output and the store as it
    was; return the message."""
    out = store.parent / "out" / "spectra.json"
    before = _snapshot(store) if store.is_dir() else None
    args = ["spectra", str(store), "--samples", str(good["samples"])]
    args += ["--sites", str(sites or good["sites"]), "-o", str(out), "--workers", "1", *extra]
    rc = main(args)
    err = capfd.readouterr().err.strip()
    assert rc == 2, err
    assert len(err.splitlines()) == 1, err
    assert err.startswith("driftband spectra: error: ")
    assert "Traceback" not in err
    assert not out.exists()
    if out.parent.exists():
        assert os.listdir(out.parent) == []  # no temporary file left behind
    if before is not None:
        assert _snapshot(store) == before
    return err


def test_the_good_store_is_read(good, store, tmp_path):
    # the damaged copies below fail because of the damage alone
    out = tmp_path / "ok.json"
    args = ["spectra", str(store), "--samples", str(good["samples"]), "--sites", str(good["sites"])]
    assert main([*args, "-o", str(out), "--workers", "1", "-q"]) == 0
    assert json.loads(out.read_text())["populations"]


def test_store_without_call_genotype(capfd, good, store):
    shutil.rmtree(store / "call_genotype")
    err = run_bad(capfd, good, store)
    assert str(store) in err and "no call_genotype array" in err


@pytest.mark.parametrize("version", ["0.2", "9.1", None])
def test_store_of_another_format_version(capfd, good, store, version):
    attrs = store / ".zattrs"
    doc = json.loads(attrs.read_text())
    if version is None:
        del doc["vcf_zarr_version"]
    else:
        doc["vcf_zarr_version"] = version
    attrs.write_text(json.dumps(doc))
    err = run_bad(capfd, good, store)
    if version is None:
        assert "no vcf_zarr_version" in err
    else:
        assert f"VCF Zarr version {version} is not read" in err
        assert all(v in err for v in VCZ_VERSIONS)


def test_store_without_contigs(capfd, good, store):
    shutil.rmtree(store / "contig_id")
    assert "no contig_id array" in run_bad(capfd, good, store)


def test_variant_contig_beyond_contig_id(capfd, good, store):
    # a region index that refers to a contig the store does not list
    import zarr

    g = zarr.open_group(str(store), mode="r+")
    ri = g["region_index"][:]
    ri[0, 1] = 7
    g["region_index"][:] = ri
    err = run_bad(capfd, good, store)
    assert "contig #7" in err and "contig_id" in err


def test_variant_aa_absent_when_asked_for(capfd, good, store):
    shutil.rmtree(store / "variant_AA")
    err = run_bad(capfd, good, store, "--ancestral", "aa")
    assert "--ancestral aa" in err and "no variant_AA array" in err


def test_call_dp_absent_with_min_dp(capfd, good, store):
    shutil.rmtree(store / "call_DP")
    err = run_bad(capfd, good, store, "--min-dp", "5")
    assert "--min-dp" in err and "no call_DP array" in err


def test_missing_position_chunk(capfd, good, store):
    (store / "variant_position" / "1").unlink()
    err = run_bad(capfd, good, store)
    assert "array variant_position, variants chunk 1" in err and "missing" in err


@pytest.mark.parametrize("array", ["call_genotype", "variant_allele", "variant_position"])
def test_corrupt_chunk(capfd, good, store, array):
    chunk = sorted(p for p in (store / array).iterdir() if not p.name.startswith("."))[0]
    chunk.write_bytes(b"not a compressed chunk")
    err = run_bad(capfd, good, store)
    assert f"array {array}" in err and "corrupt" in err


def test_store_and_site_classes_on_other_contigs(capfd, good, store, tmp_path):
    sites = tmp_path / "chr.bed"
    sites.write_text("chrX\t0\t1000\t0fold\nchrX\t1000\t2000\t4fold\n")
    err = run_bad(capfd, good, store, sites=sites)
    assert "none of the BED chromosomes" in err and str(sites) in err


def test_folder_that_is_not_a_store(capfd, good, tmp_path):
    empty = tmp_path / "empty.vcz"
    empty.mkdir()
    assert "not a Zarr store" in run_bad(capfd, good, empty)


def test_without_zarr_the_error_says_what_to_install(capfd, good, store, monkeypatch):
    real = builtins.__import__

    def no_zarr(name, *args, **kwargs):
        if name.split(".")[0] in ("zarr", "numcodecs"):
            raise ImportError(name)
        return real(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_zarr)
    err = run_bad(capfd, good, store)
    assert "pip install 'driftband[vcz]'" in err


def test_unreadable_array_metadata(capfd, good, store):
    (store / "call_genotype" / ".zarray").write_text("{not json")
    err = run_bad(capfd, good, store)
    assert "array call_genotype" in err and ".zarray" in err


@pytest.mark.parametrize("inside", [".zattrs", "spectra.json"])
def test_no_output_inside_the_store(capfd, good, store, inside):
    # --force never writes into an input store: neither over its metadata nor beside it
    before = _snapshot(store)
    out = store / inside
    args = ["spectra", str(store), "--samples", str(good["samples"])]
    args += ["--sites", str(good["sites"]), "-o", str(out), "--force", "--workers", "1"]
    assert main(args) == 2
    err = capfd.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "an input folder of this command" in err
    assert _snapshot(store) == before
