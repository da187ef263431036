"""Fuzzing the table and annotation readers: the sample table (sample_table), BED files, FASTA
and GFF3. Bad input is refused with one line naming the file and line; odd-but-valid
spellings give the canonical result.

Format rules: BED is 0-based half-open with start <= end (UCSC genome browser FAQ,
"BED format"); GFF3 columns, 1-based inclusive coordinates, strand in {+,-,.,?} and
CDS phase in {0,1,2} (Sequence Ontology GFF3 specification 1.26); FASTA names unique
(samtools faidx documentation: an index maps each name to one sequence).
"""

from __future__ import annotations

import gzip
from pathlib import Path

import pytest

from fuzz_helpers import expect_refusal, expect_success, spectra_content
from test_fuzz_vcf import SAMPLE_TABLE, SITES, vcf_text
from vcf_fixtures import write_vcf


@pytest.fixture(scope="module")
def vcf(tmp_path_factory):
    d = tmp_path_factory.mktemp("tables")
    return write_vcf(d / "v.vcf", vcf_text(), "bgzf")


def spectra_args(vcf, sample_table, sites, out) -> list:
    return [
        "spectra", vcf, "--samples", sample_table, "--sites", sites, "--all-sites-callable",
        "-o", out, "-q",
    ]  # fmt: skip


# ----------------------------------------------------------------- sample_table
BAD_SAMPLE_TABLES = [
    ("duplicate-sample", SAMPLE_TABLE + "a1\tB\n", ":5", ["a1"]),
    ("unknown-sample", SAMPLE_TABLE + "zz\tB\n", "", ["zz"]),
    ("one-column", "a1\na2\nb1\nb2\n", ":1", []),
    ("empty", "", "", []),
    ("only-comments", "# sample\tpop\n", "", []),
    ("one-sample-pop", "a1\tA\na2\tA\nb1\tB\n", "", ["B"]),
    ("binary", "\x00\x01\x02garbage\n", "", []),
    ("empty-population", "a1\t\na2\tA\nb1\tB\nb2\tB\n", ":1", []),
    ("row-without-a-header-column", "population\tdepth\tsample\nA\t30\ta1\nA\t30\n", ":3", []),
]


@pytest.mark.parametrize("case", BAD_SAMPLE_TABLES, ids=[c[0] for c in BAD_SAMPLE_TABLES])
def test_bad_sample_table(capfd, vcf, tmp_path, case):
    _id, text, line, names = case
    pm = tmp_path / "pm.tsv"
    pm.write_text(text)
    (tmp_path / "s.bed").write_text(SITES)
    out = tmp_path / "o.json"
    args = spectra_args(vcf, pm, tmp_path / "s.bed", out)
    expect_refusal(capfd, tmp_path, args, ["pm.tsv" + line, *names], [out])


@pytest.fixture(scope="module")
def canonical(vcf, tmp_path_factory):
    from driftband.cli import main

    d = tmp_path_factory.mktemp("tcanon")
    (d / "pm.tsv").write_text(SAMPLE_TABLE)
    (d / "s.bed").write_text(SITES)
    out = d / "c.json"
    assert main([str(a) for a in spectra_args(vcf, d / "pm.tsv", d / "s.bed", out)]) == 0
    return spectra_content(out)


ODD_SAMPLE_TABLES = {
    "crlf": SAMPLE_TABLE.replace("\n", "\r\n"),
    "comments-and-blank-lines": "# sample\tpopulation\n\n" + SAMPLE_TABLE + "\n",
    "shuffled": "b2\tB\na1\tA\nb1\tB\na2\tA\n",
    "no-final-newline": SAMPLE_TABLE.rstrip("\n"),
    # a header names the columns: any order, other columns ignored
    "header-reordered-extra-columns": "population\tdepth\tSample\n"
    + "".join(f"{p}\t30\t{s}\n" for s, p in (ln.split("\t") for ln in SAMPLE_TABLE.splitlines())),
    "header-short-names": "id\tpop\n" + SAMPLE_TABLE,
}


@pytest.mark.parametrize("name", sorted(ODD_SAMPLE_TABLES))
def test_odd_sample_table(capfd, vcf, tmp_path, canonical, name):
    pm = tmp_path / "pm.tsv"
    pm.write_text(ODD_SAMPLE_TABLES[name])
    (tmp_path / "s.bed").write_text(SITES)
    out = tmp_path / "o.json"
    expect_success(capfd, spectra_args(vcf, pm, tmp_path / "s.bed", out))
    assert spectra_content(out) == canonical


# ----------------------------------------------------------------- BED of site classes
BAD_BEDS = [
    ("start-after-end", "1\t500\t100\t4fold\n", ":1"),
    ("negative-start", "1\t-5\t100\t4fold\n", ":1"),
    ("text-start", "1\tabc\t100\t4fold\n", ":1"),
    ("float-end", "1\t0\t100.5\t4fold\n", ":1"),
    ("three-columns", "1\t0\t100\n", ":1"),
    ("one-column", "1\n", ":1"),
    ("second-line-bad", "1\t0\t100\t4fold\n1\t200\tx\t0fold\n", ":2"),
    ("site-in-two-classes", "1\t0\t500\t4fold\n1\t400\t1000\t0fold\n", ""),
    ("empty", "", ""),
    ("binary", "\x00\xff\xfe garbage\n", ""),
    ("huge-end", "1\t0\t99999999999999999999999\t4fold\n", ":1"),
]


@pytest.mark.parametrize("case", BAD_BEDS, ids=[c[0] for c in BAD_BEDS])
def test_bad_sites_bed(capfd, vcf, tmp_path, case):
    _id, text, line = case
    (tmp_path / "pm.tsv").write_text(SAMPLE_TABLE)
    bed = tmp_path / "s.bed"
    bed.write_bytes(text.encode("latin-1"))
    out = tmp_path / "o.json"
    args = spectra_args(vcf, tmp_path / "pm.tsv", bed, out)
    expect_refusal(capfd, tmp_path, args, ["s.bed" + line], [out])


ODD_BEDS = {
    "crlf": SITES.replace("\n", "\r\n"),
    "track-and-comment-lines": "track name=classes\n# a comment\n" + SITES,
    "unsorted": "\n".join(reversed(SITES.strip().split("\n"))) + "\n",
    "split-intervals": "1\t0\t250\t4fold\n1\t250\t500\t4fold\n1\t500\t1000\t0fold\n"
    "2\t0\t1000\t4fold\n",
    "gzip": None,
}


@pytest.mark.parametrize("name", sorted(ODD_BEDS))
def test_odd_sites_bed(capfd, vcf, tmp_path, canonical, name):
    (tmp_path / "pm.tsv").write_text(SAMPLE_TABLE)
    bed = tmp_path / "s.bed"
    text = ODD_BEDS[name]
    if text is None:
        bed = tmp_path / "s.bed.gz"
        bed.write_bytes(gzip.compress(SITES.encode()))
    else:
        bed.write_text(text)
    out = tmp_path / "o.json"
    expect_success(capfd, spectra_args(vcf, tmp_path / "pm.tsv", bed, out))
    assert spectra_content(out)["populations"] == canonical["populations"]


# ----------------------------------------------------------------- FASTA and GFF3
@pytest.fixture(scope="module")
def genome(tmp_path_factory):
    """A small simulated reference and its genes (real codons)."""
    from driftband.cli import main

    d = tmp_path_factory.mktemp("genome")
    args = ["simulate", "--population", "A:N=50,n=4", "--class-sites", "300", "--seed", "1"]
    assert (
        main([*args, "--write-vcf", str(d / "sim"), "--genome", "-q", "-o", str(d / "s.json")]) == 0
    )
    return d


def classify_args(fasta, gff, out) -> list:
    return ["classify", "--fasta", fasta, "--gff", gff, "-o", out, "-q"]


def _fasta_text(genome) -> str:
    return (genome / "sim.fa").read_text()


def _gff_lines(genome) -> list[str]:
    return (genome / "sim.gff3").read_text().splitlines()


def _bad_fastas(genome) -> list[tuple[str, str | bytes, str]]:
    fa = _fasta_text(genome)
    first = fa.split(">")[1]
    return [
        ("duplicate-contig", fa + ">" + first.replace("A", "T"), ">"),
        ("empty", "", ""),
        ("no-header", "ACGTACGT\nACGT\n", ""),
        ("unequal-lines", fa.replace("\n", "\nAC\n", 3), ""),
        ("gzip-not-bgzip", gzip.compress(fa.encode()), "bgzip"),
        ("binary", b"\x00\x01\x02\x03" * 50, ""),
    ]


@pytest.mark.parametrize("k", range(6))
def test_bad_fasta(capfd, genome, tmp_path, k):
    name, content, word = _bad_fastas(genome)[k]
    fa = tmp_path / "ref.fa"
    fa.write_bytes(content if isinstance(content, bytes) else content.encode())
    out = tmp_path / "c.bed"
    names = ["ref.fa"] + ([word] if word not in ("", ">") else [])
    if name == "duplicate-contig":
        names.append("twice")
    # the FASTA's index (.fai) may be made beside it: that is not an output of the command
    line = expect_refusal_allowing_index(
        capfd, tmp_path, classify_args(fa, genome / "sim.gff3", out)
    )
    for n in names:
        assert n in line, (n, line)
    assert not out.exists()


def expect_refusal_allowing_index(capfd, root, args) -> str:
    from fuzz_helpers import run

    rc, err = run(capfd, args)
    lines = err.splitlines()
    assert rc == 2, err
    assert len(lines) == 1 and lines[0].startswith("driftband classify: error: "), err
    assert "Traceback" not in err and "internal error" not in err
    assert not list(root.rglob("*.tmp"))
    return lines[0]


def _gff_with(genome, k: int, col: int, value: str) -> str:
    """The GFF3 with column ``col`` (0-based) of its k-th CDS line set to ``value``."""
    lines = _gff_lines(genome)
    cds = [i for i, line in enumerate(lines) if "\tCDS\t" in line]
    f = lines[cds[k]].split("\t")
    f[col] = value
    lines[cds[k]] = "\t".join(f)
    return "\n".join(lines) + "\n", cds[k] + 1


BAD_GFF_EDITS = [
    ("start-text", 3, "abc"),
    ("end-text", 4, "x"),
    ("start-zero", 3, "0"),
    ("end-before-start", 4, "2"),
    ("strand", 6, "*"),
    ("phase", 7, "5"),
    ("end-beyond-contig", 4, "99999999"),
]


@pytest.mark.parametrize("case", BAD_GFF_EDITS, ids=[c[0] for c in BAD_GFF_EDITS])
def test_bad_gff_line(capfd, genome, tmp_path, case):
    _id, col, value = case
    text, line = _gff_with(genome, 0, col, value)
    gff = tmp_path / "a.gff3"
    gff.write_text(text)
    out = tmp_path / "c.bed"
    msg = expect_refusal_allowing_index(capfd, tmp_path, classify_args(genome / "sim.fa", gff, out))
    assert "a.gff3" in msg, msg
    assert not out.exists()


BAD_GFFS = [
    ("no-cds", "##gff-version 3\nchr1\tx\tgene\t1\t10\t.\t+\t.\tID=g\n"),
    ("empty", ""),
    ("few-columns", "##gff-version 3\nchr1\tx\tCDS\t1\t10\n"),
    ("binary", "\x00\x01garbage"),
]


@pytest.mark.parametrize("case", BAD_GFFS, ids=[c[0] for c in BAD_GFFS])
def test_bad_gff_file(capfd, genome, tmp_path, case):
    gff = tmp_path / "a.gff3"
    gff.write_text(case[1])
    out = tmp_path / "c.bed"
    msg = expect_refusal_allowing_index(capfd, tmp_path, classify_args(genome / "sim.fa", gff, out))
    assert "a.gff3" in msg, msg
    assert not out.exists()


def test_classify_gives_back_the_simulated_classes(capfd, genome, tmp_path):
    out = tmp_path / "c.bed"
    expect_success(capfd, classify_args(genome / "sim.fa", genome / "sim.gff3", out))
    assert sorted(out.read_text().splitlines()) == sorted(
        (genome / "sim.sites.bed").read_text().splitlines()
    )


@pytest.mark.parametrize("spelling", ["crlf", "lowercase", "gzip-gff", "no-version-line"])
def test_odd_annotation_spellings(capfd, genome, tmp_path, spelling):
    fa, gff = genome / "sim.fa", genome / "sim.gff3"
    if spelling == "crlf":
        gff = tmp_path / "a.gff3"
        gff.write_bytes((genome / "sim.gff3").read_bytes().replace(b"\n", b"\r\n"))
    elif spelling == "lowercase":  # soft-masked bases are still bases
        fa = tmp_path / "r.fa"
        fa.write_text(
            "".join(
                line if line.startswith(">") else line.lower()
                for line in _fasta_text(genome).splitlines(True)
            )
        )
    elif spelling == "gzip-gff":
        gff = tmp_path / "a.gff3.gz"
        gff.write_bytes(gzip.compress((genome / "sim.gff3").read_bytes()))
    else:
        gff = tmp_path / "a.gff3"
        gff.write_text("\n".join(_gff_lines(genome)[1:]) + "\n")
    out = tmp_path / "c.bed"
    expect_success(capfd, classify_args(fa, gff, out))
    assert sorted(out.read_text().splitlines()) == sorted(
        (genome / "sim.sites.bed").read_text().splitlines()
    )
    Path(out).unlink()
