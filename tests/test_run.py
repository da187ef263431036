"""``driftband run`` and ``driftband demo`` end to end on the demo study of example_vcfs/.

The demo study is simulated (example_vcfs/make_demo.sh) with one gamma distribution of s
(shape 0.3, mean |S| = 400 at the lake's N = 2000) in a lake (N = 2000) and a spring
(N = 300) population, so its truth is known: with S = 4Ns, the share of new mutations
with |Ne*s| < 1 is the gamma CDF at 1 on the |Ne*s| axis, computed here with scipy.
"""

from __future__ import annotations

import csv
import hashlib
import json
import os
import re
import shutil
from pathlib import Path

import pytest
from scipy import stats

from driftband import run as runmod
from driftband._io import atomic_output
from driftband.cli import main
from driftband.run import driver as run_driver

ROOT = Path(__file__).resolve().parents[1]
EX = ROOT / "example_vcfs"
DEMO = EX / "snail.study.toml"
STAGES = ["classify[snail]", "spectra[snail]", "fit", "bootstrap", "compare", "report"]
#: Bootstrap replicates of the demo runs here: enough for percentile intervals to exist;
#: their coverage is the business of benchmarks/calibrate.py.
BOOT = "5"


def _tsv(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh, delimiter="\t"))


def _last_run(log_text: str) -> str:
    """The log of the latest run in run.log."""
    return log_text.split(": run of study ")[-1]


def _stage_lines(text: str) -> dict[str, str]:
    """Stage -> 'skipped' / 'running' as the log of one run says."""
    out = {}
    for m in re.finditer(r"stage (\S+): (skipped|running)", text):
        out[m.group(1)] = m.group(2)
    return out


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    """The demo study run with a reduced bootstrap (BOOT replicates, 2 workers)."""
    out = tmp_path_factory.mktemp("demo") / "out"
    rc = main(
        ["run", str(DEMO), "--out-dir", str(out), "--bootstrap", BOOT, "--workers", "2", "-q"]
    )
    assert rc == 0
    return out


def _truth_share(mean_nes: float, shape: float = 0.3) -> float:
    # Gamma DFE on |Ne*s| (scipy.stats.gamma); the effectively neutral band is |Ne*s| < 1
    # (the README's band edges on |Ne*s|; common practice).
    return float(stats.gamma(shape, scale=mean_nes / shape).cdf(1.0))


# ------------------------------------------------------------------ the whole job


def test_output_folder_layout(demo_run):
    out = demo_run
    for name in (
        "report.html",
        "summary.md",
        "bands.tsv",
        "fit.json",
        "compare.tsv",
        "run.log",
        "sites.bed",
        "spectra.json",
        "provenance/stages.json",
        "provenance/study.json",
        "provenance/study.toml",
        "provenance/fit.point.json",
        "provenance/snail.classify.tsv",
    ):
        assert (out / name).is_file(), name
        assert (out / name).stat().st_size > 0, name
    assert not [p for p in out.rglob("*.tmp")], "temporary files left behind"
    stages = json.loads((out / "provenance/stages.json").read_text())["stages"]
    assert sorted(stages) == sorted(STAGES)
    for rec in stages.values():  # every output's checksum is recorded
        assert all(len(v) == 64 for v in rec["outputs"].values())
    # sites.bed is a BED4 of the two classes, 0-based half-open (BED convention).
    first = (out / "sites.bed").read_text().split("\n", 1)[0].split("\t")
    assert first[0] == "chr1" and int(first[1]) < int(first[2])
    assert first[3] in ("0fold", "4fold")


def test_band_table(demo_run):
    rows = _tsv(demo_run / "bands.tsv")
    # The columns the README documents for bands.tsv, at least.
    need = ["population", "band", "nes_low", "nes_high", "share", "ci_low", "ci_high", "model"]
    assert all(c in rows[0] for c in need)
    assert {r["population"] for r in rows} == {"lake", "spring"}  # not the outgroup
    assert {r["role"] for r in rows} == {"headline", "family"}
    assert {r["model"] for r in rows if r["role"] == "headline"} == {"averaged"}
    rows = [r for r in rows if r["role"] == "headline"]
    for pop in ("lake", "spring"):
        sub = [r for r in rows if r["population"] == pop]
        assert [float(r["nes_low"]) for r in sub] == [0, 1, 10, 100]
        assert [float(r["nes_high"]) for r in sub] == [1, 10, 100, float("inf")]
        # S = 4*Ne*s (the README's conventions): the S columns are four times the |Ne*s|
        # columns.
        assert [float(r["S_low"]) for r in sub] == [0, 4, 40, 400]
        shares = [float(r["share"]) for r in sub]
        assert all(0.0 <= s <= 1.0 for s in shares)
        assert sum(shares) == pytest.approx(1.0, abs=1e-5)
        for r in sub:
            lo, hi = float(r["ci_low"]), float(r["ci_high"])
            assert 0.0 <= lo <= hi <= 1.0
        assert len({r["model"] for r in sub}) == 1


def test_small_population_has_larger_neutral_share_near_truth(demo_run):
    rows = _tsv(demo_run / "bands.tsv")
    first = {r["population"]: r for r in rows if r["band"] == "0-1" and r["role"] == "headline"}
    lake, spring = float(first["lake"]["share"]), float(first["spring"]["share"])
    assert spring > lake
    # Truth: one distribution of s, S = 4Ns scales with N: mean |Ne*s| = 400/4 = 100 in
    # the lake and 100 * 300/2000 = 15 in the spring (the simulation's parameters).
    t_lake, t_spring = _truth_share(100.0), _truth_share(15.0)
    assert t_lake == pytest.approx(0.195, abs=0.002)  # scipy gamma CDF (computed)
    assert t_spring == pytest.approx(0.343, abs=0.002)
    assert lake == pytest.approx(t_lake, abs=0.04)
    assert spring == pytest.approx(t_spring, abs=0.05)
    # The truth stored by the simulator agrees with scipy's gamma CDF.
    truth = json.loads((EX / "snail.truth.spectra.json").read_text())
    sim = truth["provenance"]["simulation"]["populations"]
    assert sim["lake"]["nes_band_shares"]["present_size"][0] == pytest.approx(t_lake, 1e-6)
    assert sim["spring"]["nes_band_shares"]["present_size"][0] == pytest.approx(t_spring, 1e-6)


def test_comparison_of_the_pair(demo_run):
    rows = _tsv(demo_run / "compare.tsv")
    assert {(r["population_a"], r["population_b"]) for r in rows} == {("lake", "spring")}
    by = {r["test"]: r for r in rows}
    assert set(by) == {
        "shared_dfe_lrt",
        "neutral_share_difference",
        "ne_only_free_lrt",
        "ne_only_lrt",
    }
    fit = json.loads((demo_run / "fit.json").read_text())
    pops = fit["populations"]
    # The model compared is the one with the lowest AIC summed over the populations
    # (the AIC of the joint model of separate fits).
    total = {m: sum(p["models"][m]["aic"] for p in pops.values()) for m in pops["lake"]["models"]}
    assert fit["options"]["compare_model"] == min(total, key=total.get)
    # the likelihood-ratio tests use that model; the share difference compares the
    # headline shares, averaged over the families
    assert {by[t]["model"] for t in ("shared_dfe_lrt", "ne_only_lrt")} == {
        min(total, key=total.get)
    }
    assert by["neutral_share_difference"]["model"] == "averaged"
    d = by["neutral_share_difference"]
    assert float(d["estimate"]) > 0 and float(d["ci_low"]) > 0
    # Ne ratio from the ratio of neutral diversity (theta = 4*Ne*mu with one mu; common
    # practice): the simulated ratio is 300/2000 = 0.15.
    assert float(by["ne_only_lrt"]["ne_ratio"]) == pytest.approx(0.15, abs=0.03)
    # The two populations share one distribution of s: the "only Ne differs" constraint
    # should not be rejected at any reasonable level, the "same DFE on S" one should.
    assert float(by["ne_only_lrt"]["p_value"]) > 0.01
    assert float(by["shared_dfe_lrt"]["p_value"]) < 1e-6
    # Bootstraps: every family (the averaged headline's interval needs them all), every
    # replicate in its place.
    for name, p in pops.items():
        booted = set(p["bootstrap"]["models"])
        assert booted == set(p["models"]), name
        assert p["bootstrap"]["replicates"] == int(BOOT)
        for b in p["bootstrap"]["models"].values():
            assert len(b["shares"]) == len(b["converged"]) == int(BOOT)
        assert len(p["bootstrap"]["averaged"]["shares"]) == int(BOOT)


def test_report_and_summary(demo_run):
    html = (demo_run / "report.html").read_text(encoding="utf-8")
    md = (demo_run / "summary.md").read_text(encoding="utf-8")
    for text in (html, md):
        assert "lake" in text and "spring" in text
    # The study's input files are listed with their checksums in the report.
    assert _sha(EX / "snail.vcf.gz") in html
    assert _sha(EX / "snail.gff3") in html


def test_rerun_skips_every_stage(demo_run, capsys):
    before = {p.name: _sha(p) for p in demo_run.iterdir() if p.is_file() and p.name != "run.log"}
    rc = main(
        ["run", str(DEMO), "--out-dir", str(demo_run), "--bootstrap", BOOT, "--workers", "2", "-q"]
    )
    assert rc == 0
    assert capsys.readouterr().out.strip() == str(demo_run / "report.html")
    last = _last_run((demo_run / "run.log").read_text())
    assert _stage_lines(last) == {s: "skipped" for s in STAGES}
    after = {p.name: _sha(p) for p in demo_run.iterdir() if p.is_file() and p.name != "run.log"}
    assert after == before


def test_demo_command_finds_the_shipped_data(demo_run, capsys):
    path = runmod.demo_study_path()
    assert path.is_file()
    runmod.check_files(runmod.read_study(path))  # every file of the study is shipped
    # The same study as example_vcfs/: the demo reuses the folder and every stage.
    rc = main(["demo", "--out-dir", str(demo_run), "--bootstrap", BOOT, "--workers", "2", "-q"])
    assert rc == 0
    out = capsys.readouterr().out
    assert str(demo_run / "report.html") in out
    assert _stage_lines(_last_run((demo_run / "run.log").read_text())) == {
        s: "skipped" for s in STAGES
    }


def test_demo_data_size():
    files = [p for p in EX.iterdir() if p.name.startswith("snail.")]
    assert sum(p.stat().st_size for p in files) <= 5_000_000
    readme = (EX / "README.md").read_text(encoding="utf-8")
    script = (EX / "make_demo.sh").read_text(encoding="utf-8")
    assert "make_demo.sh" in readme and "--seed 2024" in readme and "--seed 2024" in script


# ------------------------------------------------- several datasets, --force, resume


def _two_dataset_study(tmp: Path, demo_out: Path) -> Path:
    """Two datasets from the demo files: 'north' (FASTA + GFF3, chr1) and 'south' (sites
    BED, chr2); projected to 10 gene copies, one model, no bootstrap, one cheap test."""
    bed = tmp / "classes.bed"
    shutil.copy(demo_out / "sites.bed", bed)
    text = f"""
[study]
name = "two datasets"

[[dataset]]
name = "north"
vcf = "{EX / "snail.vcf.gz"}"
samples = "{EX / "snail.samples.tsv"}"
fasta = "{EX / "snail.fa.gz"}"
gff = "{EX / "snail.gff3"}"
ancestral = "outgroup:sister"
regions = ["chr1"]
project = 10

[[dataset]]
name = "south"
vcf = "{EX / "snail.vcf.gz"}"
samples = "{EX / "snail.samples.tsv"}"
sites = "classes.bed"
ancestral = "outgroup:sister"
regions = ["chr2"]
project = 10
block_size = 50000

[fit]
dfe = ["gamma"]
misorientation = "fixed:0"

[bootstrap]
replicates = 0

[compare]
tests = ["neutral_share_difference"]
"""
    p = tmp / "two.toml"
    p.write_text(text, encoding="utf-8")
    return p


def test_several_datasets_force_and_interrupted_resume(demo_run, tmp_path, monkeypatch):
    study = _two_dataset_study(tmp_path, demo_run)
    out = tmp_path / "out"
    assert main(["run", str(study), "--out-dir", str(out), "--workers", "2", "-q"]) == 0
    for name in (
        "north.sites.bed",
        "north.spectra.json",
        "south.spectra.json",
        "provenance/north.classify.tsv",
    ):
        assert (out / name).is_file(), name
    assert not (out / "south.sites.bed").exists()  # given as a BED: used in place
    fit = json.loads((out / "fit.json").read_text())
    names = ["north/lake", "north/spring", "south/lake", "south/spring"]
    assert list(fit["populations"]) == names
    assert {p["dataset"] for p in fit["populations"].values()} == {"north", "south"}
    pairs = {(r["population_a"], r["population_b"]) for r in _tsv(out / "compare.tsv")}
    assert len(pairs) == 6  # every pair, across datasets
    assert {r["population"] for r in _tsv(out / "bands.tsv")} == set(names)

    # --force redoes every stage; interrupt it in the report stage, half-way through
    # writing report.html.
    old_report = _sha(out / "report.html")

    def interrupted(*args, **kwargs):
        with atomic_output(out / "report.html", force=True) as fh:
            fh.write("<html><body>half")
            raise KeyboardInterrupt

    monkeypatch.setattr(run_driver, "stage_report", interrupted)
    with pytest.raises(KeyboardInterrupt):
        runmod.run_study(runmod.read_study(study), out, force=True, workers=2)
    assert _sha(out / "report.html") == old_report  # the old file, not a half-written one
    assert not [p for p in out.rglob("*.tmp")]
    log = (out / "run.log").read_text()
    last = _last_run(log)
    assert _stage_lines(last) == {
        s: "running"
        for s in (
            "classify[north]",
            "spectra[north]",
            "spectra[south]",
            "fit",
            "bootstrap",
            "compare",
            "report",
        )
    }
    assert "stage report: interrupted" in last
    monkeypatch.undo()

    # The next run resumes: everything but the report is reused. (A temporary file left
    # by a run killed mid-write is removed.)
    stale = out / ".report.html.k1ll3d.tmp"
    stale.write_text("<html>")
    assert main(["run", str(study), "--out-dir", str(out), "--workers", "2", "-q"]) == 0
    last = _last_run((out / "run.log").read_text())
    assert _stage_lines(last) == {
        "classify[north]": "skipped",
        "spectra[north]": "skipped",
        "spectra[south]": "skipped",
        "fit": "skipped",
        "bootstrap": "skipped",
        "compare": "skipped",
        "report": "running",
    }
    assert _sha(out / "report.html") != old_report  # rewritten by this run
    assert not stale.exists() and "left by an interrupted run" in last

    # A changed option reruns its stage and those after it, nothing before.
    text = study.read_text().replace('tests = ["neutral_share_difference"]', "tests = []")
    study.write_text(text)
    assert main(["run", str(study), "--out-dir", str(out), "--workers", "2", "-q"]) == 0
    last = _last_run((out / "run.log").read_text())
    st = _stage_lines(last)
    assert st["fit"] == "skipped" and st["bootstrap"] == "skipped"
    assert "compare" not in st and st["report"] == "running"
    assert "stage compare: not run ([compare] tests is empty)" in last
    assert not (out / "compare.tsv").exists()  # the stale table is gone

    # The folder now holds this study: the demo study is refused there.
    before = (out / "provenance/stages.json").read_text()
    assert main(["run", str(DEMO), "--out-dir", str(out), "-q"]) == 2
    assert (out / "provenance/stages.json").read_text() == before


# ------------------------------------------------------------------ bad input


def _write(tmp: Path, body: str) -> Path:
    p = tmp / "study.toml"
    p.write_text(body, encoding="utf-8")
    return p


GOOD = f"""[study]
name = "x"

[[dataset]]
vcf = "{EX / "snail.vcf.gz"}"
samples = "{EX / "snail.samples.tsv"}"
fasta = "{EX / "snail.fa.gz"}"
gff = "{EX / "snail.gff3"}"
"""


def _err(capsys) -> str:
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err  # one line, no traceback
    return err[0]


def test_unknown_key_is_named_with_file_and_line(tmp_path, capsys):
    p = _write(tmp_path, GOOD + "ancestor = 'aa'\n")
    assert main(["run", str(p), "--out-dir", str(tmp_path / "o")]) == 2
    err = _err(capsys)
    assert f"{p}:9:" in err and "unknown key 'ancestor' in [dataset]" in err
    p = _write(tmp_path, GOOD + "[fitting]\ndfe = ['gamma']\n")
    assert main(["run", str(p), "--out-dir", str(tmp_path / "o")]) == 2
    assert "unknown section [fitting]" in _err(capsys)
    p = _write(tmp_path, GOOD + "[bootstrap]\nreplicates = 'many'\n")
    assert main(["run", str(p), "--out-dir", str(tmp_path / "o")]) == 2
    err = _err(capsys)
    assert "[bootstrap] key 'replicates' must be an integer" in err and f"{p}:10" in err
    assert not (tmp_path / "o").exists()  # nothing was started


def test_missing_file_is_named(tmp_path, capsys):
    p = _write(tmp_path, GOOD.replace("snail.gff3", "snail.gff"))
    assert main(["run", str(p), "--out-dir", str(tmp_path / "o")]) == 2
    err = _err(capsys)
    assert str(EX / "snail.gff") in err and "not found" in err and str(p) in err
    assert main(["run", str(tmp_path / "none.toml"), "--out-dir", str(tmp_path / "o")]) == 2
    assert "none.toml: study file not found" in _err(capsys)


def test_dataset_needs_site_classes(tmp_path, capsys):
    body = GOOD.replace(f'gff = "{EX / "snail.gff3"}"\n', "")
    assert main(["run", str(_write(tmp_path, body)), "--out-dir", str(tmp_path / "o")]) == 2
    assert "[dataset] key 'gff' is missing" in _err(capsys)
    body = GOOD + f'sites = "{EX / "tiny.sites.bed"}"\n'
    assert main(["run", str(_write(tmp_path, body)), "--out-dir", str(tmp_path / "o")]) == 2
    assert "either sites" in _err(capsys)


def test_folder_of_another_study_or_foreign_files_is_refused(demo_run, tmp_path, capsys):
    p = _write(tmp_path, GOOD.replace('name = "x"', 'name = "another"'))
    before = (demo_run / "provenance/stages.json").read_text()
    assert main(["run", str(p), "--out-dir", str(demo_run)]) == 2
    err = _err(capsys)
    assert "holds the results of another study" in err and "--force" in err
    assert (demo_run / "provenance/stages.json").read_text() == before
    foreign = tmp_path / "mine"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("keep me")
    assert main(["run", str(p), "--out-dir", str(foreign)]) == 2
    assert "holds no driftband run" in _err(capsys)
    assert os.listdir(foreign) == ["notes.txt"]


def test_stage_error_named_once(tmp_path, capsys):
    # a sample size beyond the called copies shows only when the records are counted
    body = GOOD + 'project = 999\nregions = ["chr1"]\n'
    out = tmp_path / "o"
    assert main(["run", str(_write(tmp_path, body)), "--out-dir", str(out), "-q"]) == 2
    err = _err(capsys)
    assert err.startswith("driftband run: error: stage spectra[snail]: ")
    assert "999" in err
    log = (out / "run.log").read_text()
    assert log.count("=999") == 1 and "ERROR stage spectra[snail]" in log
    stages = json.loads((out / "provenance/stages.json").read_text())["stages"]
    assert list(stages) == ["classify[snail]"]  # the failed stage left no record


def test_flags_mode_errors(tmp_path, capsys):
    assert main(["run", str(DEMO), "--vcf", "x.vcf.gz"]) == 2
    assert "--vcf: with a study file" in _err(capsys)
    assert (
        main(
            [
                "run",
                "--vcf",
                str(EX / "snail.vcf.gz"),
                "--samples",
                str(EX / "snail.samples.tsv"),
                "--sites",
                str(tmp_path / "no.bed"),
                "--out-dir",
                str(tmp_path / "o"),
            ]
        )
        == 2
    )
    err = _err(capsys)
    assert str(tmp_path / "no.bed") in err and "--sites" in err
    assert (
        main(
            [
                "run",
                "--vcf",
                str(EX / "snail.vcf.gz"),
                "--samples",
                str(EX / "snail.samples.tsv"),
                "--fasta",
                str(EX / "snail.fa.gz"),
                "--out-dir",
                str(tmp_path / "o"),
            ]
        )
        == 2
    )
    assert "--gff is missing" in _err(capsys)
    assert main(["run", str(DEMO)]) == 2
    assert "no output folder" in _err(capsys)


def test_readme_documents_every_study_key():
    """The README's "Study files" listing holds every key of STUDY_KEYS, and no other."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    block = text.split("## Study files", 1)[1].split("```toml", 1)[1].split("```", 1)[0]
    found: dict[str, set] = {}
    section = None
    for line in block.splitlines():
        s = line.strip()
        m = re.match(r"^\[\[?(\w+)\]?\]", s)
        if m:
            section = m.group(1)
            found.setdefault(section, set())
            continue
        m = re.match(r"^#?\s*(\w+)\s*=", s)
        if m and section:
            found[section].add(m.group(1))
    assert found == {k: set(v) for k, v in runmod.STUDY_KEYS.items()}


def test_flags_make_the_same_kind_of_study(tmp_path):
    """One dataset from flags: paths, options and the defaults of the study file."""
    from driftband.cli import get_parser
    from driftband.cli.run import study_from_args

    args = get_parser().parse_args(
        [
            "run",
            "--vcf",
            str(EX / "snail.vcf.gz"),
            "--samples",
            str(EX / "snail.samples.tsv"),
            "--fasta",
            str(EX / "snail.fa.gz"),
            "--gff",
            str(EX / "snail.gff3"),
            "--ancestral",
            "outgroup:sister",
            "--project",
            "lake=20,spring=18",
            "--block-size",
            "50000",
            "--regions",
            "chr1",
            "--dfe",
            "gamma,lognormal",
            "--bands",
            "0,1,10",
            "--out-dir",
            str(tmp_path),
        ]
    )
    st = study_from_args(args)
    (d,) = st.datasets
    assert st.name == d.name == "snail" and st.source is None
    assert d.classify and d.fasta == str(EX / "snail.fa.gz")
    assert d.project == {"lake": 20, "spring": 18} and d.block_size == 50_000
    assert d.regions == ["chr1"] and d.ancestral == "outgroup:sister"
    assert st.fit.dfe == ("gamma", "lognormal") and st.fit.bands == (0.0, 1.0, 10.0)
    assert st.bootstrap.replicates == 200 and st.compare.model == "auto"  # the run defaults
    assert st.bootstrap.models == "all" and st.fit.headline == "averaged"
    runmod.check_files(st)


def test_compare_with_its_defaults_repeats_the_run_s_comparisons(demo_run, tmp_path):
    """`driftband compare fit.json` with its defaults gives run's compare.tsv: the same
    model (auto), tests, adjustment and pairs in the same order (A:B orientation kept)."""
    out = tmp_path / "c.tsv"
    assert main(["compare", str(demo_run / "fit.json"), "-o", str(out), "-q"]) == 0
    ours, runs = _tsv(out), _tsv(demo_run / "compare.tsv")
    key = ("population_a", "population_b", "test", "model", "adjust")
    assert [tuple(r[k] for k in key) for r in ours] == [tuple(r[k] for k in key) for r in runs]
    for a, b in zip(ours, runs):
        for col in ("statistic", "p_raw", "p_value", "estimate"):
            if a[col] or b[col]:
                assert float(a[col]) == pytest.approx(float(b[col]), rel=1e-6), col


def test_run_log_has_the_progress_of_each_stage(demo_run):
    log = (demo_run / "run.log").read_text(encoding="utf-8")
    for stage in ("classify", "spectra", "fit", "bootstrap", "compare"):
        assert f"INFO {stage}: " in log and " done in " in log, stage


def test_study_demography_key(tmp_path, capsys):
    from driftband.run.stages import fit_options

    text = DEMO.read_text(encoding="utf-8")
    base = text.replace("[fit]\n", '[fit]\ndemography = "demes:lake.yaml"\n', 1)
    assert base != text
    study_file = tmp_path / "demes.toml"
    study_file.write_text(base.replace('"example_vcfs/', f'"{EX}/'), encoding="utf-8")
    study = runmod.read_study(study_file)
    # a demes file is found relative to the study file
    assert study.fit.demography == f"demes:{tmp_path / 'lake.yaml'}"
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace("[fit]\n", '[fit]\ndemography = "bottleneck"\n', 1))
    with pytest.raises(Exception, match="demography") as err:
        fit_options(runmod.read_study(bad))
    assert "choose one of nuisance" in str(err.value)
