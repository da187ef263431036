"""The VCF/BCF reader: the vectorised decoder against pysam's own decoding, on every kind
of input.

Independent reference: pysam (htslib) record decoding, read in the test itself. Whole
files are read with ``read_genotype_table`` (reference_checks/genotype_table.py, built on
the reader's public ``VcfSource.stream`` and ``VariantBatch.genotypes``).
"""

from __future__ import annotations

import io
import sys
from pathlib import Path

import numpy as np
import pysam
import pytest

from driftband.variants import bgzf
from driftband.variants.source import VcfSource
from vcf_fixtures import header, random_study, rec, write_vcf

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "reference_checks"))
from genotype_table import read_genotype_table

S4 = ["a", "b", "c", "d"]

FIXTURES = {
    "diploid_missing_phased": header(S4)
    + "\n".join(
        [
            rec(1, 10, "A", "G", ["0/1", "1|1", "./.", "0|0"]),
            rec(1, 20, "C", "T", ["0/0", "./1", "1/.", "."]),
            rec(1, 30, "G", "A", ["1/1", "1/1", "1/1", "0/1"], info="AA=G"),
        ]
    )
    + "\n",
    "haploid_and_mixed": header(S4)
    + "\n".join(
        [
            rec(1, 10, "A", "G", ["0", "1", ".", "1"]),
            rec(1, 11, "A", "G", ["0", "1/1", "0/1", "."]),
            rec(1, 12, "A", "G", ["1", "0|1", "1", "./."]),
        ]
    )
    + "\n",
    "polyploid_and_multidigit": header(S4)
    + "\n".join(
        [
            rec(1, 10, "A", "G", ["0/0/1", "1/1/1/1", "0/1", "."]),
            rec(1, 11, "A", "C,G,T,AA,AC,AG,AT,CA,CC,CG,CT", ["10/1", "0/11", "2/3", "./."]),
            rec(1, 12, "A", "G", ["0/1", "0/0", "1/1", "0/1"]),
        ]
    )
    + "\n",
    "format_fields": header(S4)
    + "\n".join(
        [
            rec(1, 10, "A", "G", ["0/1:12:99", "1/1:3:.", "./.:.:.", "0/0:120:7"], fmt="GT:DP:GQ"),
            rec(1, 11, "A", "G", ["0/1:12:99", "./.", "1/1:5", "0/0:0:0"], fmt="GT:DP:GQ"),
            rec(1, 12, "A", "G", ["0/1:40", "./.:.", "1/1:1", "0/0:999999"], fmt="GT:GQ"),
            rec(1, 13, "A", "G", ["0/1", "0/0", "1/1", "0/1"], fmt="GT"),
            rec(
                1, 14, "A", "G", ["0/1:7:3", "0/0:12345678:2", "1/1:8:1", "0/1:9:0"], fmt="GT:DP:GQ"
            ),
            rec(1, 15, "A", "G", ["0:7:3", ".:.:.", "1", "0/1:9:0"], fmt="GT:DP:GQ"),
            rec(1, 17, "A", "G", ["0/1:3:7", "0/0:2:1", "1/1:1:8", "0/1:0:9"], fmt="GT:GQ:DP"),
        ]
    )
    + "\n",
}


def _pysam_table(path, fields=("DP", "GQ")):
    """Allele indices (records, samples, copies) and integer fields, straight from pysam."""
    al, vals = [], {f: [] for f in fields}
    with pysam.VariantFile(str(path)) as vf:
        for r in vf:
            row = [tuple(-1 if a is None else a for a in s["GT"]) for s in r.samples.values()]
            al.append(row)
            for f in fields:
                vals[f].append(
                    [
                        (s[f] if f in r.format and s[f] is not None else -1)
                        for s in r.samples.values()
                    ]
                )
    P = max(2, max(len(g) for row in al for g in row))
    out = np.full((len(al), len(al[0]), P), -2, np.int8)
    for i, row in enumerate(al):
        for j, g in enumerate(row):
            out[i, j, : len(g)] = g
    return out, {f: np.array(v) for f, v in vals.items()}


@pytest.mark.parametrize("name", sorted(FIXTURES))
@pytest.mark.parametrize("kind", ["plain", "bgzf"])
def test_fast_path_matches_pysam(tmp_path, name, kind):
    path = write_vcf(tmp_path / f"{name}.vcf", FIXTURES[name], kind)
    want, want_f = _pysam_table(path)
    got = read_genotype_table(path, fields=("DP", "GQ"))
    P = want.shape[2]
    got_al = got.alleles
    if got_al.shape[2] < P:
        got_al = np.concatenate(
            [got_al, np.full(got_al.shape[:2] + (P - got_al.shape[2],), -2, np.int8)], axis=2
        )
    np.testing.assert_array_equal(got_al, want)
    for f in ("DP", "GQ"):
        np.testing.assert_array_equal(got.fields[f], want_f[f])


def test_fast_path_used_where_it_should_be(tmp_path):
    path = write_vcf(tmp_path / "p.vcf", FIXTURES["polyploid_and_multidigit"])
    got = read_genotype_table(path)
    # polyploid and two-digit allele indices go to pysam; the plain diploid record does not
    assert got.fast.tolist() == [False, False, True]
    path = write_vcf(tmp_path / "h.vcf", FIXTURES["haploid_and_mixed"])
    assert read_genotype_table(path).fast.all()
    path = write_vcf(tmp_path / "f.vcf", FIXTURES["format_fields"])
    fast = read_genotype_table(path, fields=("DP", "GQ")).fast
    # 999999 and 12345678 are ordinary integers (<= 9 digits): still the fast path
    assert fast.all()


def test_fast_and_pysam_paths_agree_on_random_data(tmp_path):
    rng = np.random.default_rng(7)
    text, _, truth = random_study(rng, 30, 400, missing=0.05, haploid_samples=(3, 4))
    path = write_vcf(tmp_path / "r.vcf", text, "bgzf")
    fast = read_genotype_table(path)
    slow = read_genotype_table(path, fast=False)
    assert fast.fast.all() and not slow.fast.any()
    np.testing.assert_array_equal(fast.alleles, slow.alleles)
    np.testing.assert_array_equal(fast.alleles, np.stack([t[5] for t in truth]))
    want, _ = _pysam_table(path, fields=())
    np.testing.assert_array_equal(fast.alleles, want)


@pytest.mark.parametrize("kind", ["plain", "bgzf", "csi", "bgzf_noindex", "gzip", "bcf"])
def test_every_input_kind_reads_the_same(tmp_path, kind):
    text = FIXTURES["format_fields"]
    ref = read_genotype_table(write_vcf(tmp_path / "ref.vcf", text), fields=("DP", "GQ"))
    path = write_vcf(tmp_path / f"k_{kind}.vcf", text, kind)
    got = read_genotype_table(path, fields=("DP", "GQ"))
    assert got.pos.tolist() == ref.pos.tolist()
    np.testing.assert_array_equal(got.alleles, ref.alleles)
    np.testing.assert_array_equal(got.fields["DP"], ref.fields["DP"])
    with VcfSource(path) as src:
        assert src.indexed == (kind in ("bgzf", "csi", "bcf"))
        assert src.kind == {"plain": "plain", "gzip": "gzip", "bcf": "bcf"}.get(kind, "bgzf")


@pytest.mark.parametrize("compress", [False, True])
def test_stdin(tmp_path, monkeypatch, compress):
    text = FIXTURES["diploid_missing_phased"]
    data = text.encode()
    if compress:
        path = write_vcf(tmp_path / "s.vcf", text, "bgzf")
        data = path.read_bytes()
    fake = io.TextIOWrapper(io.BufferedReader(io.BytesIO(data)))
    monkeypatch.setattr(sys, "stdin", fake)
    got = read_genotype_table("-")
    ref = read_genotype_table(write_vcf(tmp_path / "ref.vcf", text))
    np.testing.assert_array_equal(got.alleles, ref.alleles)


def test_bcf_on_stdin(tmp_path, monkeypatch):
    text = FIXTURES["haploid_and_mixed"]
    path = write_vcf(tmp_path / "b.vcf", text, "bcf")
    fake = io.TextIOWrapper(io.BufferedReader(io.BytesIO(path.read_bytes())))
    monkeypatch.setattr(sys, "stdin", fake)
    got = read_genotype_table("-")
    np.testing.assert_array_equal(got.alleles, read_genotype_table(path).alleles)


def test_crlf_line_endings(tmp_path):
    text = FIXTURES["format_fields"]
    p = tmp_path / "crlf.vcf"
    p.write_bytes(text.replace("\n", "\r\n").encode())
    got = read_genotype_table(p, fields=("DP", "GQ"))
    ref = read_genotype_table(write_vcf(tmp_path / "lf.vcf", text), fields=("DP", "GQ"))
    np.testing.assert_array_equal(got.alleles, ref.alleles)
    np.testing.assert_array_equal(got.fields["GQ"], ref.fields["GQ"])


def test_fetch_assigns_records_by_pos_and_small_batches_agree(tmp_path):
    rng = np.random.default_rng(3)
    text, samples, truth = random_study(rng, 12, 600, chroms=("1", "2", "3"))
    path = write_vcf(tmp_path / "f.vcf", text, "bgzf")
    cols = np.arange(len(samples))
    with VcfSource(path) as src:
        for chrom, a, z in [("2", 1000, 20_000), ("1", 0, 7), ("3", 40_000, 10**9)]:
            for bb in (1 << 20, 300):  # batches of about one line too
                got = []
                for b in src.fetch(chrom, a, z, batch_bytes=bb):
                    g = b.genotypes(np.arange(len(b)), cols)
                    got += list(zip(b.pos.tolist(), g.alleles))
                want = [(t[1], t[5]) for t in truth if t[0] == chrom and a <= t[1] - 1 < z]
                assert [p for p, _ in got] == [p for p, _ in want]
                for (_, x), (_, y) in zip(got, want):
                    np.testing.assert_array_equal(x, y)


def test_long_header_and_tiny_batches(tmp_path):
    extra = [f"##contig=<ID=u{i},length=1000>" for i in range(3000)]
    text = header(S4, extra=extra) + rec(1, 5, "A", "G", ["0/1"] * 4) + "\n"
    path = write_vcf(tmp_path / "h.vcf", text, "bgzf_noindex")
    got = read_genotype_table(path, batch_bytes=64)
    assert got.pos.tolist() == [5]
    assert (got.alleles[0, :, :2] == [0, 1]).all()


def test_libdeflate_and_htslib_inflate_agree(tmp_path, monkeypatch):
    # BGZF inflated by the system's libdeflate (when installed) or by htslib (pysam) must
    # give the same records, also after index seeks into the middle of the file.
    rng = np.random.default_rng(12)
    text, samples, _ = random_study(rng, 40, 3000, chroms=("1", "2"), length=200_000)
    path = write_vcf(tmp_path / "many_blocks.vcf", text, "bgzf")
    assert path.stat().st_size > 3 * 65536 // 8
    cols = np.arange(len(samples))
    out = {}
    for mode in ("htslib", "auto"):
        monkeypatch.setenv("DRIFTBAND_INFLATE", mode)
        reader = bgzf.open_bgzf(str(path))
        if mode == "auto" and bgzf.Libdeflate.get() is not None:
            assert isinstance(reader, bgzf.DeflateBGZF)
        reader.close()
        got = []
        with VcfSource(path) as src:
            for chrom, a, z in [("1", 0, 10**9), ("2", 70_000, 150_000), ("1", 123_456, 10**9)]:
                for b in src.fetch(chrom, a, z, batch_bytes=5000):
                    got.append((b.pos.copy(), b.genotypes(np.arange(len(b)), cols).alleles))
        out[mode] = got
        whole = read_genotype_table(path)
        out[mode + "_stream"] = whole.alleles
    for k in (0, 1):  # batches may be cut differently; their records must agree
        np.testing.assert_array_equal(
            np.concatenate([x[k] for x in out["htslib"]]),
            np.concatenate([x[k] for x in out["auto"]]),
        )
    np.testing.assert_array_equal(out["htslib_stream"], out["auto_stream"])


@pytest.mark.parametrize("name", sorted(FIXTURES))
def test_allele_counts_fast_path_matches_pysam(tmp_path, name):
    # ALT copies (allele 1) and called copies (alleles 0 or 1) straight from the text,
    # against pysam's decoding; records it cannot take are flagged, never miscounted.
    path = write_vcf(tmp_path / f"{name}.vcf", FIXTURES[name], "bgzf")
    want, _ = _pysam_table(path, fields=())
    with VcfSource(path) as src:
        got = []
        for b in src.stream():
            r = b.allele_counts(np.arange(len(b)), np.arange(4))
            if r is None:  # mixed FORMATs: the generic decoder is used instead
                continue
            got.append(r)
    if not got:
        return
    alt = np.concatenate([g[0] for g in got])
    called = np.concatenate([g[1] for g in got])
    ok = np.concatenate([g[2] for g in got])
    assert ok.any()
    np.testing.assert_array_equal(alt[ok], (want[ok] == 1).sum(axis=2))
    np.testing.assert_array_equal(called[ok], ((want[ok] == 0) | (want[ok] == 1)).sum(axis=2))
    assert not ok[
        np.any(want > 1, axis=(1, 2))
        | (want.shape[2] > 2 and np.any(want[:, :, 2:] != -2, axis=(1, 2)))
    ].any()
