"""Bad input to ``driftband spectra``: one line naming the file and record, exit code 2,
no output file (and no leftover temporary file)."""

from __future__ import annotations

import os

import pytest

from driftband.cli import main
from vcf_fixtures import header, rec, write_text, write_vcf

SAMPLES = ["a1", "a2", "b1", "b2"]
SAMPLE_TABLE = "a1\tA\na2\tA\nb1\tB\nb2\tB\n"
GOOD = [
    rec(1, 5, "A", "G", ["0/1", "0/0", "1/1", "0/1"]),
    rec(1, 9, "C", "T", ["0/0", "0/1", "0/0", "0/0"], info="AA=C"),
    rec(2, 3, "G", "A", ["0/1", "0/0", "0/0", "0/0"], info="AA=G"),
]


HEADER_LINES = len(header(SAMPLES, [("1", 1000), ("2", 1000)]).splitlines())


def line(k: int) -> str:
    """':N' for the line of record k (1-based) of a VCF made by _vcf_text."""
    return f":{HEADER_LINES + k}"


def _vcf_text(records=GOOD, **kw):
    return header(SAMPLES, [("1", 1000), ("2", 1000)], **kw) + "\n".join(records) + "\n"


@pytest.fixture
def study(tmp_path):
    return {
        "dir": tmp_path,
        "vcf": write_vcf(tmp_path / "in.vcf", _vcf_text(), "bgzf"),
        "samples": write_text(tmp_path / "pm.tsv", SAMPLE_TABLE),
        "sites": write_text(
            tmp_path / "s.bed", "1\t0\t500\t4fold\n1\t500\t1000\t0fold\n2\t0\t1000\t4fold\n"
        ),
        "out": tmp_path / "out" / "spectra.json",
    }


def run(capfd, st, *extra, vcf=None, sample_table=None, sites=None):
    args = [
        "spectra",
        str(vcf or st["vcf"]),
        "--samples",
        str(sample_table or st["samples"]),
        "--sites",
        str(sites or st["sites"]),
        "-o",
        str(st["out"]),
        *extra,
    ]
    rc = main(args)
    err = capfd.readouterr().err.strip()
    return rc, err


def expect_error(capfd, st, *extra, names=(), **kw):
    rc, err = run(capfd, st, *extra, **kw)
    assert rc == 2, err
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("driftband spectra: error: ")
    assert "Traceback" not in err
    for n in names:
        assert str(n) in lines[0], (n, lines[0])
    assert not st["out"].exists()
    leftovers = [p for p in st["dir"].rglob("*.tmp")]
    assert not leftovers
    return lines[0]


def test_good_input_works(capfd, study):
    rc, err = run(capfd, study)
    assert rc == 0, err
    assert study["out"].exists()


def test_missing_vcf(capfd, study):
    expect_error(capfd, study, vcf=study["dir"] / "nope.vcf.gz", names=["nope.vcf.gz", "not found"])


def test_truncated_bgzf(capfd, study):
    data = study["vcf"].read_bytes()
    cut = study["dir"] / "cut.vcf.gz"
    cut.write_bytes(data[:-40])
    expect_error(capfd, study, vcf=cut, names=["cut.vcf.gz", "truncated"])


def test_truncated_plain_vcf(capfd, study):
    text = _vcf_text()
    p = write_text(study["dir"] / "cut.vcf", text[:-12])
    msg = expect_error(capfd, study, vcf=p, names=["cut.vcf:", "truncated"])
    assert f"cut.vcf:{text.count(chr(10))}" in msg  # the line of the cut record


def test_corrupt_gzip(capfd, study):
    p = study["dir"] / "bad.vcf.gz"
    import gzip

    data = gzip.compress(_vcf_text().encode())
    p.write_bytes(data[: len(data) // 2])
    expect_error(capfd, study, vcf=p, names=["bad.vcf.gz"])


@pytest.mark.parametrize(
    "records,where",
    [
        ([GOOD[1], GOOD[0], GOOD[2]], line(2)),  # position decreases
        ([GOOD[0], GOOD[2], GOOD[1]], line(3)),  # chromosome 1 again after 2
    ],
)
def test_unsorted_vcf(capfd, study, records, where):
    p = write_vcf(study["dir"] / "uns.vcf", _vcf_text(records))
    expect_error(capfd, study, vcf=p, names=["uns.vcf" + where, "not sorted"])


def test_vcf_without_gt(capfd, study):
    text = _vcf_text().replace('##FORMAT=<ID=GT,Number=1,Type=String,Description="Genotype">\n', "")
    p = write_text(study["dir"] / "nogt.vcf", text)
    expect_error(capfd, study, vcf=p, names=["nogt.vcf", "GT"])


def test_record_without_gt(capfd, study):
    records = [GOOD[0], rec(1, 9, "C", "T", ["3", "4", "5", "6"], info="AA=C", fmt="DP")]
    p = write_text(study["dir"] / "recgt.vcf", _vcf_text(records))
    expect_error(capfd, study, vcf=p, names=["recgt.vcf" + line(2), "record 1:9", "no GT"])


def test_bad_genotype_text(capfd, study):
    records = [GOOD[0], rec(1, 9, "C", "T", ["0/x", "0/0", "0/0", "0/0"], info="AA=C")]
    p = write_text(study["dir"] / "badgt.vcf", _vcf_text(records))
    expect_error(capfd, study, vcf=p, names=["badgt.vcf" + line(2), "record 1:9"])


def test_allele_index_beyond_alt(capfd, study):
    records = [rec(1, 9, "C", "T", ["0/2", "0/0", "0/0", "0/0"], info="AA=C")]
    p = write_text(study["dir"] / "idx.vcf", _vcf_text(records))
    expect_error(capfd, study, vcf=p, names=["idx.vcf" + line(1), "record 1:9", "ALT"])


def test_wrong_number_of_columns(capfd, study):
    records = [GOOD[0], rec(1, 9, "C", "T", ["0/1", "0/0", "0/0"], info="AA=C")]
    p = write_text(study["dir"] / "cols.vcf", _vcf_text(records))
    expect_error(capfd, study, vcf=p, names=["cols.vcf" + line(2), "record 1:9", "columns"])


def test_bad_pos(capfd, study):
    records = [GOOD[0].replace("\t5\t", "\tfive\t", 1)]
    p = write_text(study["dir"] / "pos.vcf", _vcf_text(records))
    expect_error(capfd, study, vcf=p, names=["pos.vcf" + line(1), "POS"])


@pytest.mark.parametrize(
    "content,what",
    [(b"", "empty"), (b"hello\tworld\n", "not a VCF"), (b"\x00\x01binary", "not a VCF")],
)
def test_not_a_vcf(capfd, study, content, what):
    p = study["dir"] / "x.vcf"
    p.write_bytes(content)
    expect_error(capfd, study, vcf=p, names=["x.vcf", what])


def test_index_older_than_file(capfd, study):
    tbi = str(study["vcf"]) + ".tbi"
    st = os.stat(study["vcf"])
    os.utime(tbi, (st.st_atime, st.st_mtime - 100))
    expect_error(capfd, study, names=["in.vcf.gz", "older", "tabix"])


def test_sample_table_duplicate_sample(capfd, study):
    pm = write_text(study["dir"] / "dup.tsv", SAMPLE_TABLE + "a1\tB\n")
    expect_error(capfd, study, sample_table=pm, names=["dup.tsv:5", "'a1'", "twice"])


def test_sample_table_unknown_sample(capfd, study):
    pm = write_text(study["dir"] / "unk.tsv", "sample\tpopulation\n" + SAMPLE_TABLE + "zz\tB\n")
    expect_error(capfd, study, sample_table=pm, names=["unk.tsv:6", "'zz'", "not among"])


def test_population_with_one_sample(capfd, study):
    pm = write_text(study["dir"] / "one.tsv", "a1\tA\na2\tA\nb1\tB\n")
    expect_error(capfd, study, sample_table=pm, names=["one.tsv:3", "'B'", "at least 2"])


def test_chr_prefix_mismatch(capfd, study):
    bed = write_text(study["dir"] / "chr.bed", "chr1\t0\t500\t4fold\nchr2\t0\t500\t0fold\n")
    expect_error(capfd, study, sites=bed, names=["chr.bed", "'chr' prefix", "sed"])


def test_site_in_two_classes(capfd, study):
    bed = write_text(study["dir"] / "two.bed", "1\t0\t500\t4fold\n1\t499\t600\t0fold\n")
    expect_error(capfd, study, sites=bed, names=["two.bed", "1:500", "'0fold'", "'4fold'"])


def test_class_without_callable_sites_after_mask(capfd, study):
    mask = write_text(study["dir"] / "mask.bed", "1\t0\t400\n")
    expect_error(
        capfd, study, "--callable", str(mask), names=["s.bed", "'0fold'", "no callable sites"]
    )


def test_class_without_callable_sites_after_missing_data(capfd, study):
    records = [rec(1, p, "A", "G", ["./.", "0/1", "0/0", "0/0"]) for p in range(501, 1001)]
    records += [rec(1, 3, "A", "G", ["0/1", "0/1", "0/0", "0/0"])]
    records.sort(key=lambda r: int(r.split("\t")[1]))
    p = write_vcf(study["dir"] / "miss.vcf", _vcf_text(records), "bgzf")
    bed = write_text(study["dir"] / "m.bed", "1\t0\t500\t4fold\n1\t500\t1000\t0fold\n")
    expect_error(
        capfd,
        study,
        "--project",
        "4",
        vcf=p,
        sites=bed,
        names=["'0fold'", "'A'", "no callable sites left"],
    )


def test_existing_output_needs_force(capfd, study):
    study["out"].parent.mkdir(parents=True)
    study["out"].write_text("keep me")
    rc, err = run(capfd, study)
    assert rc == 2 and len(err.splitlines()) == 1 and "--force" in err
    assert study["out"].read_text() == "keep me"
    tsv = study["dir"] / "t.tsv"
    tsv.write_text("old")
    study["out"].unlink()
    rc, err = run(capfd, study, "--tsv", str(tsv))
    assert rc == 2 and "t.tsv" in err and not study["out"].exists()
    rc, err = run(capfd, study, "--tsv", str(tsv), "--force")
    assert rc == 0 and study["out"].exists() and tsv.read_text().startswith("population")


def test_unknown_population_in_project(capfd, study):
    expect_error(capfd, study, "--project", "C=4", names=["--project", "'C'"])


def test_impossible_project(capfd, study):
    expect_error(capfd, study, "--project", "A=9", names=["--project", "A=9", "at most 4"])


def test_unknown_outgroup(capfd, study):
    expect_error(capfd, study, "--ancestral", "outgroup:Z", names=["outgroup:Z", "'Z'"])


def test_aa_without_header_field(capfd, study):
    p = write_vcf(study["dir"] / "noaa.vcf", _vcf_text(aa=False).replace("AA=", "XX="))
    expect_error(capfd, study, vcf=p, names=["noaa.vcf", "INFO/AA", "--ancestral fold"])


def test_bad_option_values(capfd, study):
    expect_error(capfd, study, "--ancestral", "maybe", names=["--ancestral", "maybe"])
    expect_error(capfd, study, "--project", "x", names=["--project", "'x'"])
    expect_error(capfd, study, "--block-size", "0", names=["--block-size"])
    expect_error(capfd, study, "--regions", "1:50-10", names=["--regions", "1:50-10"])
    expect_error(capfd, study, "--regions", "chrX", names=["--regions", "'chrX'"])
    expect_error(
        capfd,
        study,
        "--min-dp",
        "5",
        names=["FORMAT/DP"],
        vcf=write_vcf(
            study["dir"] / "nodp.vcf",
            _vcf_text().replace(
                '##FORMAT=<ID=DP,Number=1,Type=Integer,Description="Read depth">\n', ""
            ),
        ),
    )


def test_overlapping_blocks(capfd, study):
    b = write_text(study["dir"] / "blk.bed", "1\t0\t100\tg1\n1\t50\t150\tg2\n")
    expect_error(capfd, study, "--blocks", str(b), names=["blk.bed:2", "overlap"])


def test_non_integer_depth(capfd, study):
    records = [
        GOOD[0],
        rec(1, 9, "C", "T", ["0/1:7", "0/0:1.5", "0/0:3", "0/0:4"], info="AA=C", fmt="GT:DP"),
    ]
    p = write_text(study["dir"] / "dp.vcf", _vcf_text(records))
    expect_error(capfd, study, "--min-dp", "2", vcf=p, names=["dp.vcf" + line(2), "record 1:9"])
