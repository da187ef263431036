"""Fuzzing ``driftband spectra`` with generated VCFs: bad ones are refused with one line
naming the file and the record (line), odd-but-valid ones give the canonical spectra.

The rules checked are those of the VCF 4.x specification (samtools/hts-specs VCFv4.3:
GT allele indices 0..number of ALT alleles, ``/`` or ``|`` separators, ``.`` missing, a
tab-separated fixed column layout, ``##fileformat`` first) and common practice for
command-line tools (one line, exit code 2, nothing written).
"""

from __future__ import annotations

import gzip
import random
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from fuzz_helpers import expect_refusal, expect_success, spectra_content
from vcf_fixtures import header, rec, write_vcf

SAMPLES = ["a1", "a2", "b1", "b2"]
SAMPLE_TABLE = "a1\tA\na2\tA\nb1\tB\nb2\tB\n"
SITES = "1\t0\t500\t4fold\n1\t500\t1000\t0fold\n2\t0\t1000\t4fold\n"
CONTIGS = [("1", 1000), ("2", 1000)]
GTS = [
    ["0/1", "0/0", "1/1", "0/1"],
    ["0/0", "0/1", "0/0", "0/0"],
    ["0/1", "1/1", "0/0", "0/1"],
    ["1/1", "0/1", "0/1", "0/0"],
    ["0/0", "0/0", "0/1", "1/1"],
    ["0/1", "0/0", "0/0", "0/0"],
]
POSITIONS = [(1, 5), (1, 90), (1, 600), (1, 700), (2, 3), (2, 400)]
HEAD = header(SAMPLES, CONTIGS)
HEADER_LINES = len(HEAD.splitlines())


def records(gts=GTS, fmt="GT", spell=lambda g: g) -> list[str]:
    return [
        rec(c, p, "A", "G", [spell(x) for x in g], fmt=fmt) for (c, p), g in zip(POSITIONS, gts)
    ]


def vcf_text(recs=None, head=HEAD, nl="\n") -> str:
    text = head + "\n".join(records() if recs is None else recs) + "\n"
    return text.replace("\n", nl)


def line_of(k: int) -> str:
    """':N', the line of record k (1-based) in a VCF made by vcf_text."""
    return f":{HEADER_LINES + k}"


def with_record(k: int, new: str) -> str:
    recs = records()
    recs[k - 1] = new
    return vcf_text(recs)


def gt_record(k: int, first_gt: str) -> str:
    (c, p), g = POSITIONS[k - 1], list(GTS[k - 1])
    g[0] = first_gt
    return with_record(k, rec(c, p, "A", "G", g))


@pytest.fixture(scope="module")
def base(tmp_path_factory):
    d = tmp_path_factory.mktemp("vcfbase")
    (d / "pm.tsv").write_text(SAMPLE_TABLE)
    (d / "s.bed").write_text(SITES)
    return d


def spectra_args(base: Path, vcf, out: Path, *extra) -> list:
    return [
        "spectra",
        vcf,
        "--samples",
        base / "pm.tsv",
        "--sites",
        base / "s.bed",
        "--all-sites-callable",
        "-o",
        out,
        "-q",
        *extra,
    ]


# ----------------------------------------------------------------- bad text VCFs
# (id, VCF text or bytes, expected substrings after the file name)
BAD_TEXT: list[tuple[str, str | bytes, list[str]]] = [
    ("empty", b"", ["empty"]),
    ("only-newline", b"\n", []),
    ("no-fileformat", vcf_text(head=HEAD.split("\n", 1)[1]), ["##fileformat"]),
    ("bom", b"\xef\xbb\xbf" + vcf_text().encode(), [":1", "byte-order mark"]),
    ("utf16", vcf_text().encode("utf-16"), []),
    ("no-chrom-line", "\n".join(HEAD.splitlines()[:-1]) + "\n", ["#CHROM"]),
    (
        "no-samples",
        "\n".join(HEAD.splitlines()[:-1])
        + "\n#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\n1\t5\t.\tA\tG\t50\tPASS\t.\n",
        ["sample"],
    ),
    ("header-junk-line", HEAD.replace("##FILTER", "FILTER", 1) + "\n".join(records()), ["##"]),
    ("latin1-header", HEAD.replace("Low quality", "Low qualit\xe9").encode("latin-1"), []),
    ("nul-bytes", b"\x00" * 64, []),
]
# record-level problems: (id, text, record number, substrings)
BAD_RECORDS: list[tuple[str, str, int, list[str]]] = [
    ("too-few-columns", with_record(2, "1\t90\t.\tA\tG\t50\tPASS\tAA=A\tGT\t0/1\t0/0"), 2, []),
    ("too-many-columns", with_record(3, records()[2] + "\t0/1"), 3, []),
    ("pos-text", with_record(1, records()[0].replace("\t5\t", "\tfive\t", 1)), 1, ["POS"]),
    ("pos-zero", with_record(1, records()[0].replace("\t5\t", "\t0\t", 1)), 1, ["POS"]),
    ("pos-negative", with_record(1, records()[0].replace("\t5\t", "\t-5\t", 1)), 1, ["POS"]),
    ("pos-float", with_record(1, records()[0].replace("\t5\t", "\t5.5\t", 1)), 1, ["POS"]),
    ("unsorted-pos", with_record(2, records()[1].replace("\t90\t", "\t2\t", 1)), 2, ["sort"]),
    ("gt-not-first", with_record(1, rec(1, 5, "A", "G", ["5:0/1"] * 4, fmt="DP:GT")), 1, ["GT"]),
    ("gt-missing", with_record(1, rec(1, 5, "A", "G", ["5"] * 4, fmt="DP")), 1, ["GT"]),
]
for i, gt in enumerate(
    [
        "0/2",
        "2/0",
        "0|2",
        "0/12",
        "12/0",
        "1/10",
        "0/99",
        "3",
        "0/1/2",
        "10|1",
    ]
):
    BAD_RECORDS.append((f"allele-index-{i}-{gt}", gt_record(1, gt), 1, ["record 1:5", "ALT"]))
for i, gt in enumerate(["0/a", "x", "0//1", "-1/0", "0/1/", "/1", "0\\1", "0 /1", "+1/0"]):
    BAD_RECORDS.append((f"gt-garbage-{i}", gt_record(1, gt), 1, ["record 1:5"]))
# a chromosome that reappears after another one
_chrom_again = records()
_chrom_again.append(rec(1, 900, "A", "G", GTS[0]))
BAD_RECORDS.append(("chrom-again", vcf_text(_chrom_again), 7, ["sort"]))


@pytest.mark.parametrize("case", BAD_TEXT, ids=[c[0] for c in BAD_TEXT])
def test_bad_vcf_text(capfd, base, tmp_path, case):
    name, content, names = case
    p = tmp_path / "bad.vcf"
    p.write_bytes(content if isinstance(content, bytes) else content.encode())
    out = tmp_path / "o.json"
    expect_refusal(capfd, tmp_path, spectra_args(base, p, out), ["bad.vcf", *names], [out])


@pytest.mark.parametrize("kind", ["plain", "bgzf_noindex", "gzip"])
@pytest.mark.parametrize("case", BAD_RECORDS, ids=[c[0] for c in BAD_RECORDS])
def test_bad_vcf_record(capfd, base, tmp_path, case, kind):
    name, text, k, names = case
    p = write_vcf(tmp_path / "bad.vcf", text, kind)
    if kind != "plain":
        (tmp_path / "bad.vcf").unlink()
    out = tmp_path / "o.json"
    names = [p.name + line_of(k), *names]
    expect_refusal(capfd, tmp_path, spectra_args(base, p, out), names, [out])


_rng = random.Random(12)
TRUNCATIONS = sorted(_rng.sample(range(30, 600), 12))


@pytest.mark.parametrize("cut", TRUNCATIONS)
@pytest.mark.parametrize("kind", ["bgzf_noindex", "gzip"])
def test_truncated_compressed_vcf(capfd, base, tmp_path, cut, kind):
    p = write_vcf(tmp_path / "t.vcf", vcf_text(), kind)
    (tmp_path / "t.vcf").unlink()
    data = p.read_bytes()
    p.write_bytes(data[: min(cut, len(data) - 1)])
    out = tmp_path / "o.json"
    expect_refusal(capfd, tmp_path, spectra_args(base, p, out), [p.name], [out])


@pytest.mark.parametrize("seed", range(12))
def test_random_garbage(capfd, base, tmp_path, seed):
    rng = random.Random(seed)
    data = bytes(rng.randrange(256) for _ in range(rng.randrange(1, 3000)))
    if seed % 3 == 0:  # garbage after a real header
        data = HEAD.encode() + data
    p = tmp_path / "g.vcf"
    p.write_bytes(data)
    out = tmp_path / "o.json"
    expect_refusal(capfd, tmp_path, spectra_args(base, p, out), ["g.vcf"], [out])


# ----------------------------------------------------------------- indexes
def test_index_of_another_file(capfd, base, tmp_path):
    p = write_vcf(tmp_path / "v.vcf", vcf_text(), "bgzf")
    other = [rec(2, k, "A", "G", GTS[0]) for k in range(1, 900, 3)]
    q = write_vcf(tmp_path / "w.vcf", vcf_text(other), "bgzf")
    shutil.copy(str(q) + ".tbi", str(p) + ".tbi")  # newer than v.vcf.gz, but of w.vcf.gz
    out = tmp_path / "o.json"
    expect_refusal(capfd, tmp_path, spectra_args(base, p, out), ["v.vcf.gz", "index"], [out])


@pytest.mark.parametrize("junk", [b"", b"TBI\x01garbage", b"\x1f\x8b\x08\x04" + b"\x00" * 40])
def test_corrupt_index(capfd, base, tmp_path, junk):
    p = write_vcf(tmp_path / "v.vcf", vcf_text(), "bgzf")
    Path(str(p) + ".tbi").write_bytes(junk)
    out = tmp_path / "o.json"
    expect_refusal(capfd, tmp_path, spectra_args(base, p, out), ["v.vcf.gz"], [out])


# ----------------------------------------------------------------- odd but valid
def _spectra(capfd, base, tmp_path, vcf, *extra, sample_table=None) -> dict:
    out = tmp_path / f"o{len(list(tmp_path.glob('o*.json')))}.json"
    args = spectra_args(base, vcf, out, *extra)
    if sample_table is not None:
        args[args.index("--samples") + 1] = sample_table
    expect_success(capfd, args)
    return spectra_content(out)


@pytest.fixture(scope="module")
def canonical(base, tmp_path_factory):
    from driftband.cli import main

    d = tmp_path_factory.mktemp("canon")
    p = write_vcf(d / "c.vcf", vcf_text(), "plain")
    out = d / "c.json"
    assert main([str(a) for a in spectra_args(base, p, out)]) == 0
    return spectra_content(out)


SPELLINGS = {
    "phased": dict(spell=lambda g: g.replace("/", "|")),
    "swapped": dict(spell=lambda g: g[::-1]),
    "with-dp": dict(fmt="GT:DP", spell=lambda g: g + ":30"),
    "with-dp-gq": dict(fmt="GT:GQ:DP", spell=lambda g: g + ":40:12"),
    "dropped-trailing": dict(fmt="GT:DP", spell=lambda g: g),
    "missing-dp": dict(fmt="GT:DP", spell=lambda g: g + ":."),
    "mixed-phase": dict(spell=lambda g: g.replace("/", "|") if g == "0/1" else g),
}


@pytest.mark.parametrize("kind", ["plain", "bgzf", "gzip", "csi", "bcf"])
@pytest.mark.parametrize("spelling", sorted(SPELLINGS))
def test_gt_spellings_give_the_canonical_spectra(capfd, base, tmp_path, canonical, spelling, kind):
    if kind == "bcf" and not shutil.which("bcftools"):
        pytest.skip("bcftools not installed")
    text = vcf_text(records(**SPELLINGS[spelling]))
    p = write_vcf(tmp_path / "v.vcf", text, kind)
    assert _spectra(capfd, base, tmp_path, p) == canonical


@pytest.mark.parametrize("nl", ["\r\n", "\n"])
def test_line_endings(capfd, base, tmp_path, canonical, nl):
    p = tmp_path / "v.vcf"
    p.write_bytes(vcf_text(nl=nl).encode())
    assert _spectra(capfd, base, tmp_path, p) == canonical


def test_haploid_calls_equal_the_same_copies_as_diploid(capfd, base, tmp_path, canonical):
    # each diploid sample a1 = (x/y) written as two haploid samples a1_1 = x, a1_2 = y
    hap = [f"{s}_{k}" for s in SAMPLES for k in (1, 2)]
    recs = [
        rec(c, p, "A", "G", [a for x in g for a in x.split("/")])
        for (c, p), g in zip(POSITIONS, GTS)
    ]
    p = tmp_path / "h.vcf"
    p.write_text(header(hap, CONTIGS) + "\n".join(recs) + "\n")
    pm = tmp_path / "hpm.tsv"
    pm.write_text("".join(f"{s}\t{s[0].upper()}\n" for s in hap))
    assert _spectra(capfd, base, tmp_path, p, sample_table=pm) == canonical


def test_stdin_equals_file(base, tmp_path, canonical):
    out = tmp_path / "o.json"
    args = [str(a) for a in spectra_args(base, "-", out)]
    r = subprocess.run(
        [sys.executable, "-m", "driftband", *args],
        input=vcf_text().encode(),
        capture_output=True,
    )
    if r.returncode != 0 and b"No module named driftband.__main__" in r.stderr:
        pytest.skip("no python -m driftband")
    assert r.returncode == 0, r.stderr
    assert spectra_content(out) == canonical


def test_stdin_gzip_equals_file(base, tmp_path, canonical):
    out = tmp_path / "o.json"
    args = [str(a) for a in spectra_args(base, "-", out)]
    r = subprocess.run(
        [sys.executable, "-m", "driftband", *args],
        input=gzip.compress(vcf_text().encode()),
        capture_output=True,
    )
    assert r.returncode == 0, r.stderr
    assert spectra_content(out) == canonical


@pytest.mark.parametrize(
    "alt,gt",
    [("G,T", "0/2"), ("<DEL>", "0/1"), ("*", "0/1"), ("G,<*>", "0/1"), ("AG", "0/1")],
    ids=["multiallelic", "symbolic", "star", "gvcf-placeholder", "indel"],
)
def test_other_alleles_are_skipped_and_counted(capfd, base, tmp_path, alt, gt):
    extra = rec(1, 50, "A", alt, [gt, "0/0", "0/0", "0/0"])
    recs = records()
    recs.insert(1, extra)
    p = tmp_path / "v.vcf"
    p.write_text(vcf_text(recs))
    res = _spectra(capfd, base, tmp_path, p)
    assert sum(res["skipped"].values()) >= 1 or alt == "G,<*>"


# ----------------------------------------------------------------- random GT texts
_gt_rng = random.Random(2026)
RANDOM_GTS = sorted(
    {
        "".join(_gt_rng.choice("0123./|:a") for _ in range(_gt_rng.randrange(1, 6)))
        for _ in range(80)
    }
)[:48]


@pytest.mark.parametrize("gt", RANDOM_GTS)
def test_random_gt_text_is_read_or_refused_cleanly(capfd, base, tmp_path, gt):
    """Any GT text: either a spectrum (a valid call) or the one-line refusal naming the
    record; never an internal error. Only a valid call is read (VCF specification:
    indices 0..number of ALT alleles, here 1; '.' missing)."""
    from fuzz_helpers import run

    p = tmp_path / "r.vcf"
    p.write_text(gt_record(1, gt))
    out = tmp_path / "o.json"
    rc, err = run(capfd, spectra_args(base, p, out))
    assert "Traceback" not in err and "internal error" not in err, err
    tokens = gt.split(":", 1)[0].replace("|", "/").split("/")
    # any ploidy is valid; an index is an integer (htslib reads '01' as 1)
    valid = all(t == "." or (t.isdigit() and int(t) <= 1) for t in tokens)
    if rc == 0:
        assert valid, (gt, err)
    else:
        lines = err.splitlines()
        assert rc == 2 and len(lines) == 1 and f"r.vcf{line_of(1)}" in lines[0], err
        assert not out.exists()
