"""``driftband check``: the preflight predicts what ``run`` (its spectra stage) does, and
names every problem that would stop it.

References: the spectra that ``driftband spectra`` writes for the same inputs (the sample
size n and the segregating sites the check predicts), and counts made here from the VCF
with pysam (monomorphic records at class sites).
"""

from __future__ import annotations

import re
from pathlib import Path

import pysam

from driftband.cli import main
from driftband.spectra.build import build_spectra
from driftband.spectra.plan import parse_regions

ROOT = Path(__file__).resolve().parents[1]
EX = ROOT / "example_vcfs"
TINY = ["--samples", str(EX / "tiny.samples.tsv"), "--sites", str(EX / "tiny.sites.bed")]


def _check(capsys, *args):
    rc = main(["check", *map(str, args)])
    cap = capsys.readouterr()
    return rc, cap.out, cap.err


def _table(out: str, pop: str) -> dict[int, list[str]]:
    lines = out.split(f"sample sizes of {pop} ")[1].splitlines()[2:]
    rows = {}
    for ln in lines:
        if not ln.startswith("    "):
            break
        f = ln.replace("*", " ").split()
        rows[int(f[0])] = f[1:]
    return rows


def test_check_predicts_the_spectra(capsys):
    rc, out, err = _check(capsys, "--vcf", EX / "tiny.vcf.gz", *TINY)
    assert rc == 0, err
    assert "would succeed" in err
    ss = build_spectra(EX / "tiny.vcf.gz", EX / "tiny.samples.tsv", EX / "tiny.sites.bed")
    for pop in ("lowvale", "highvale"):
        n = ss.populations[pop].n
        starred = re.search(r"\*\s+(\d+) .*", out.split(f"sample sizes of {pop} ")[1])
        assert starred is not None and int(starred.group(1)) == n
        row = _table(out, pop)[n]
        st = ss.populations[pop].stats
        assert float(row[1].replace(",", "")) == round(st["0fold"]["segregating"])
        assert float(row[2].replace(",", "")) == round(st["4fold"]["segregating"])
    assert f"lowvale to n = {ss.populations['lowvale'].n}" in out
    # the tiny VCF holds some monomorphic records (counted here with pysam at class sites)
    sites = parse_regions([str(EX / "tiny.sites.bed")])
    mono = 0
    with pysam.VariantFile(str(EX / "tiny.vcf.gz")) as vf:
        for r in vf:
            if r.alts is None and sites.contains(r.chrom, [r.pos - 1])[0]:
                mono += 1
    assert mono > 0
    assert f"variants-only   no ({mono:,} monomorphic records" in out


def test_check_reports_problems_and_exits_2(tmp_path, capsys):
    pm = tmp_path / "pm.tsv"
    pm.write_text((EX / "tiny.samples.tsv").read_text() + "ghost01\tlowvale\n")
    bed = tmp_path / "chr.bed"
    bed.write_text(
        "".join("chr" + ln for ln in (EX / "tiny.sites.bed").read_text().splitlines(True))
    )
    rc, out, err = _check(
        capsys, "--vcf", EX / "tiny.vcf.gz", "--samples", pm, "--sites", bed, "--ancestral", "aa"
    )
    assert rc == 2
    assert "lowvale: 8 found, missing 1: ghost01" in out
    assert "problem:" in out and "'ghost01'" in out
    assert "'chr' prefix" in out  # the hint for chromosome names
    assert "2 problem(s)" in err and "would stop" in err
    assert "Traceback" not in err


def test_check_names_a_missing_aa_field(tmp_path, capsys):
    vcf = tmp_path / "noaa.vcf"
    text = pysam.BGZFile(str(EX / "tiny.vcf.gz")).read().decode()
    vcf.write_text("".join(ln for ln in text.splitlines(True) if "ID=AA," not in ln))
    rc, out, _ = _check(capsys, "--vcf", vcf, *TINY)
    assert rc == 2 and "declares no ##INFO=<ID=AA>" in out
    rc, out, _ = _check(capsys, "--vcf", vcf, *TINY, "--ancestral", "fold")
    assert rc == 0 and "folded" in out


def test_run_refuses_before_any_work(tmp_path, capsys):
    pm = tmp_path / "pm.tsv"
    pm.write_text((EX / "tiny.samples.tsv").read_text() + "ghost01\tlowvale\n")
    out = tmp_path / "results"
    args = ["run", "--vcf", EX / "tiny.vcf.gz", "--samples", pm, "--sites", EX / "tiny.sites.bed"]
    assert main([*map(str, args), "--out-dir", str(out), "-q"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("driftband run: error: preflight: ")
    assert "ghost01" in err[0]
    assert not out.exists()  # nothing written


def test_check_of_a_study_file_with_an_ancestral_fasta(tmp_path, capsys):
    # The FASTA route in a study file: a path relative to the study file, checked.
    fa = tmp_path / "anc.fa"
    seqs = {"ctg1": "A" * 250_000, "ctg2": "N" * 250_000}
    fa.write_text("".join(f">{c}\n{s}\n" for c, s in seqs.items()))
    study = tmp_path / "s.toml"
    study.write_text(
        "[[dataset]]\n"
        f'vcf = "{EX / "tiny.vcf.gz"}"\nsamples = "{EX / "tiny.samples.tsv"}"\n'
        f'sites = "{EX / "tiny.sites.bed"}"\nancestral = "fasta:anc.fa"\n'
        "exclude_lowercase_ancestral = true\n"
    )
    rc, out, err = _check(capsys, study)
    assert rc == 0, out + err
    assert "ancestral FASTA anc.fa" in out
    # every ctg2 class site lacks an ancestral base (N): 1143 BED lines' worth of sites
    want = sum(
        int(f[2]) - int(f[1])
        for f in (ln.split("\t") for ln in (EX / "tiny.sites.bed").read_text().splitlines())
        if f[0] == "ctg2" and f[3] == "4fold"
    )
    assert re.search(rf"no_ancestral_base\s+0fold [\d,]+, 4fold {want:,}", out)
    study.write_text(study.read_text().replace("anc.fa", "missing.fa"))
    assert main(["run", str(study), "--out-dir", str(tmp_path / "o"), "-q"]) == 2
    assert "ancestral FASTA" in capsys.readouterr().err and not (tmp_path / "o").exists()
