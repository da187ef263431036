"""``driftband fit`` and ``driftband compare`` end to end on small simulated studies."""

import csv
import json

import numpy as np
import pytest

from driftband.cli import main


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    """Two populations simulated forward with one distribution of s (N 400 vs 100)."""
    d = tmp_path_factory.mktemp("study")
    out = d / "spectra.json"
    rc = main(
        [
            "simulate",
            "--population",
            "big:N=400,n=16",
            "--population",
            "small:N=100,n=16",
            "--class-sites",
            "60000",
            "--theta",
            "0.02",
            "--true-dfe",
            "gamma:shape=0.3,mean=200",
            "--block-count",
            "30",
            "--seed",
            "11",
            "-o",
            str(out),
            "-q",
        ]
    )
    assert rc == 0
    return d, out


def _read_tsv(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh, delimiter="\t"))


def test_fit_bootstrap_compare(study, tmp_path):
    _d, spectra = study
    fit = tmp_path / "fit.json"
    bands = tmp_path / "bands.tsv"
    rc = main(
        [
            "fit",
            str(spectra),
            "--dfe",
            "gamma",
            "--misorientation",
            "fixed:0",
            "--bootstrap",
            "12",
            "--workers",
            "1",
            "--seed",
            "3",
            "-o",
            str(fit),
            "--bands-tsv",
            str(bands),
            "-q",
        ]
    )
    assert rc == 0
    rows = _read_tsv(bands)
    assert {r["population"] for r in rows} == {"big", "small"}
    # one family: the headline rows are the gamma fit's, and so are the family rows
    assert {(r["role"], r["model"]) for r in rows} == {("headline", "gamma"), ("family", "gamma")}
    assert all(r["weight"] == "1" for r in rows if r["role"] == "family")
    rows = [r for r in rows if r["role"] == "headline"]
    for pop in ("big", "small"):
        sub = [r for r in rows if r["population"] == pop]
        assert [r["band"] for r in sub] == ["0-1", "1-10", "10-100", ">=100"]
        shares = np.array([float(r["share"]) for r in sub])
        assert shares.sum() == pytest.approx(1.0, abs=1e-5)  # 6 significant digits
        for r in sub:
            assert float(r["ci_low"]) <= float(r["share"]) + 1e-9 <= float(r["ci_high"]) + 2e-9
    doc = json.loads(fit.read_text())
    big = doc["populations"]["big"]
    assert big["models"]["gamma"]["success"]
    assert big["bootstrap"]["replicates"] == 12
    # The small population carries the larger effectively neutral share (S = 4Ns scales
    # with N for one distribution of s: the drift-barrier expectation, common practice).
    sb = float(next(r["share"] for r in rows if r["population"] == "big"))
    ss = float(next(r["share"] for r in rows if r["population"] == "small"))
    assert ss > sb

    cmp_path = tmp_path / "compare.tsv"
    assert main(["compare", str(fit), "-o", str(cmp_path), "-q"]) == 0
    crow = _read_tsv(cmp_path)
    assert {r["test"] for r in crow} == {
        "shared_dfe_lrt",
        "neutral_share_difference",
        "ne_only_free_lrt",
        "ne_only_lrt",
    }
    lrt = next(r for r in crow if r["test"] == "shared_dfe_lrt")
    assert lrt["df"] == "2"
    diff = next(r for r in crow if r["test"] == "neutral_share_difference")
    assert float(diff["ci_low"]) <= float(diff["estimate"]) <= float(diff["ci_high"])
    ne = next(r for r in crow if r["test"] == "ne_only_lrt")
    # Neutral diversity ratio small/big is about 100/400 for equal mutation rates.
    assert 0.1 < float(ne["ne_ratio"]) < 0.5 or 2 < float(ne["ne_ratio"]) < 10
    free = next(r for r in crow if r["test"] == "ne_only_free_lrt")
    assert free["df"] == "1"  # the shape shared, the scale free: k - 1
    assert free["ne_ratio_pi"] == ne["ne_ratio"]
    # Twelve replicates are too few to estimate the linkage adjustment: the p-value is
    # the raw one, and the note says why.
    assert free["p_value"] == free["p_raw"] and "not adjusted for linked sites" in free["note"]

    # Same seed, different worker count: identical bootstrap.
    fit2 = tmp_path / "fit2.json"
    assert (
        main(
            [
                "fit",
                str(spectra),
                "--dfe",
                "gamma",
                "--misorientation",
                "fixed:0",
                "--bootstrap",
                "12",
                "--workers",
                "2",
                "--seed",
                "3",
                "-o",
                str(fit2),
                "-q",
            ]
        )
        == 0
    )
    doc2 = json.loads(fit2.read_text())
    for pop in ("big", "small"):
        assert (
            doc2["populations"][pop]["bootstrap"]["models"]["gamma"]["shares"]
            == doc["populations"][pop]["bootstrap"]["models"]["gamma"]["shares"]
        )


@pytest.mark.parametrize(
    "argv, message",
    [
        (["--misorientation", "fixed:-0.1"], "--misorientation"),
        (["--bands", "0,10,1"], "--bands"),
        (["--bands", "1,10"], "--bands"),
        (["--populations", "nowhere"], "'nowhere'"),
        (["--neutral", "synonymous"], "no class 'synonymous'"),
        (["--dfe", "weibull"], "unknown DFE family"),
    ],
)
def test_fit_bad_options(study, tmp_path, capsys, argv, message):
    _d, spectra = study
    out = tmp_path / "fit.json"
    rc = main(["fit", str(spectra), "-o", str(out), *argv])
    err = capsys.readouterr().err
    assert rc == 2
    assert message in err
    assert len(err.strip().splitlines()) == 1
    assert not out.exists()


def test_fit_refuses_existing_output(study, tmp_path, capsys):
    _d, spectra = study
    out = tmp_path / "fit.json"
    out.write_text("keep")
    assert main(["fit", str(spectra), "-o", str(out)]) == 2
    assert "--force" in capsys.readouterr().err
    assert out.read_text() == "keep"


def test_fit_bad_spectra_files(tmp_path, capsys):
    p = tmp_path / "s.json"
    p.write_text(json.dumps({"schema": "driftband-spectra", "schema_version": 7}))
    assert main(["fit", str(p), "-o", str(tmp_path / "f.json")]) == 2
    assert "schema version 7" in capsys.readouterr().err
    # An all-zero selected spectrum, and n < 4, in reviewer-mode tables.
    t = tmp_path / "t.tsv"
    t.write_text(
        "population\tclass\tcallable_sites\tc0\tc1\tc2\tc3\tc4\tc5\tc6\n"
        "p\t4fold\t1000\t\t30\t12\t9\t6\t4\t0\n"
        "p\t0fold\t1000\t\t0\t0\t0\t0\t0\t0\n"
    )
    assert main(["fit", str(t), "-o", str(tmp_path / "f.json")]) == 2
    assert "no polymorphic sites" in capsys.readouterr().err
    t.write_text(
        "population\tclass\tcallable_sites\tc0\tc1\tc2\tc3\n"
        "p\t4fold\t1000\t\t30\t12\t0\n"
        "p\t0fold\t1000\t\t10\t2\t0\n"
    )
    assert main(["fit", str(t), "-o", str(tmp_path / "f.json")]) == 2
    assert "n >= 4" in capsys.readouterr().err


def test_reviewer_table_fit(tmp_path):
    # A published-style wide table: the fit runs without a VCF and writes bands.tsv.
    n = 10
    i = np.arange(1, n)
    neutral = np.round(2000 / i).astype(int)
    selected = np.round(600 / i**1.3).astype(int)
    t = tmp_path / "table.tsv"
    with open(t, "w") as fh:
        fh.write(
            "population\tclass\tcallable_sites\t" + "\t".join(f"c{k}" for k in range(n + 1)) + "\n"
        )
        for cls, v in (("4fold", neutral), ("0fold", selected)):
            fh.write(f"pond\t{cls}\t200000\t\t" + "\t".join(map(str, v)) + "\t0\n")
    bands = tmp_path / "bands.tsv"
    assert (
        main(
            [
                "fit",
                str(t),
                "--dfe",
                "gamma",
                "-o",
                str(tmp_path / "f.json"),
                "--bands-tsv",
                str(bands),
                "-q",
            ]
        )
        == 0
    )
    rows = [r for r in _read_tsv(bands) if r["role"] == "headline"]
    assert len(rows) == 4 and rows[0]["ci_low"] == "" and rows[0]["interval"] == ""


def test_compare_errors(study, tmp_path, capsys):
    _d, spectra = study
    fit = tmp_path / "fit.json"
    assert (
        main(
            [
                "fit",
                str(spectra),
                "--dfe",
                "gamma",
                "--misorientation",
                "fixed:0",
                "-o",
                str(fit),
                "-q",
            ]
        )
        == 0
    )
    out = tmp_path / "c.tsv"
    assert main(["compare", str(fit), "--pairs", "big:nowhere", "-o", str(out)]) == 2
    assert "'nowhere'" in capsys.readouterr().err
    # Asking explicitly for the bootstrap test on fits without bootstrap.
    assert main(["compare", str(fit), "--tests", "neutral_share_difference", "-o", str(out)]) == 2
    assert "--bootstrap" in capsys.readouterr().err
    # The LRTs do not need the bootstrap.
    assert (
        main(["compare", str(fit), "--tests", "shared_dfe_lrt,ne_only_lrt", "-o", str(out), "-q"])
        == 0
    )
    assert not (tmp_path / "x").exists()


def test_readme_reviewer_example(tmp_path):
    # The worked example of the README's "Refitting published spectra" section runs as
    # written and gives a valid band table.
    from pathlib import Path

    text = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    block = text.split("### Refitting published spectra")[1].split("```text")[1]
    table = block.split("```")[0].strip("\n")
    t = tmp_path / "pond.tsv"
    t.write_text(table + "\n")
    bands = tmp_path / "pond.bands.tsv"
    assert (
        main(
            [
                "fit",
                str(t),
                "--dfe",
                "gamma,discrete",
                "-o",
                str(tmp_path / "f.json"),
                "--bands-tsv",
                str(bands),
                "-q",
            ]
        )
        == 0
    )
    every = _read_tsv(bands)
    rows = [r for r in every if r["role"] == "headline"]
    assert [r["population"] for r in rows] == ["pond"] * 4
    assert {r["model"] for r in rows} == {"averaged"}
    assert sum(float(r["share"]) for r in rows) == pytest.approx(1.0, abs=1e-5)
    # The averaged share is the Akaike-weighted mean of the families' shares
    # (Burnham & Anderson 2002, sec. 4.2), with weights summing to one.
    fam = [r for r in every if r["role"] == "family"]
    w = {r["model"]: float(r["weight"]) for r in fam}
    assert set(w) == {"gamma", "discrete"} and sum(w.values()) == pytest.approx(1, abs=1e-5)
    for r in rows:
        mix = sum(w[f["model"]] * float(f["share"]) for f in fam if f["band"] == r["band"])
        assert float(r["share"]) == pytest.approx(mix, abs=2e-6)


def test_few_blocks_flag_the_interval_propose_a_block_size_and_give_no_p(tmp_path, capsys):
    # Fewer than 20 blocks (common practice for block resampling: too few blocks make the
    # bootstrap distribution coarse): the warning proposes a block size giving 20 blocks of
    # what the blocks cover, bands.tsv marks the interval unreliable, and the share
    # difference has no bootstrap p-value.
    sp = tmp_path / "sp.json"
    assert (
        main(
            [
                "simulate",
                "--population",
                "big:N=300,n=10",
                "--population",
                "small:N=60,n=10",
                "--class-sites",
                "20000",
                "--theta",
                "0.02",
                "--block-count",
                "6",
                "--seed",
                "3",
                "-o",
                str(sp),
                "-q",
            ]
        )
        == 0
    )
    doc = json.loads(sp.read_text())
    covered = sum(b["end"] - b["start"] for b in doc["blocks"])
    fit, bands = tmp_path / "f.json", tmp_path / "b.tsv"
    capsys.readouterr()
    import warnings

    # The CLI prints driftband's warnings on stderr; inside a test run Python's warning
    # machinery may have been taken over by an earlier test, so look in both places.
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        rc = main(
            [
                "fit",
                str(sp),
                "--dfe",
                "gamma",
                "--misorientation",
                "fixed:0",
                "--bootstrap",
                "4",
                "--workers",
                "1",
                "-o",
                str(fit),
                "--bands-tsv",
                str(bands),
            ]
        )
    assert rc == 0
    err = capsys.readouterr().err + "".join(str(w.message) for w in caught)
    size = covered // 20 // 1000 * 1000
    assert "only 6 blocks" in err and f"--block-size {size} " in err
    head = [r for r in _read_tsv(bands) if r["role"] == "headline"]
    assert {r["interval"] for r in head} == {"unreliable"}
    assert all("only 6 genomic blocks" in r["note"] for r in head)
    cmp_path = tmp_path / "c.tsv"
    assert (
        main(
            ["compare", str(fit), "--tests", "neutral_share_difference", "-o", str(cmp_path), "-q"]
        )
        == 0
    )
    (row,) = _read_tsv(cmp_path)
    assert row["p_value"] == "" and "no p-value: only 6 genomic blocks" in row["note"]
    assert row["ci_low"] != ""  # the interval is still written, marked by the note


def test_compare_model_defaults_to_the_lowest_summed_aic(study, tmp_path):
    """As in `run`: without --model, compare uses the model of lowest AIC summed over all
    populations (the AIC of the joint model of separate fits; Akaike 1974)."""
    _d, spectra = study
    fit, out = tmp_path / "fit.json", tmp_path / "compare.tsv"
    args = ["fit", str(spectra), "--dfe", "gamma,lognormal", "--misorientation", "fixed:0"]
    assert main(args + ["-o", str(fit), "-q"]) == 0
    doc = json.loads(fit.read_text())
    aic = {
        m: sum(p["models"][m]["aic"] for p in doc["populations"].values())
        for m in ("gamma", "lognormal")
    }
    assert main(["compare", str(fit), "--tests", "shared_dfe_lrt", "-o", str(out), "-q"]) == 0
    assert {r["model"] for r in _read_tsv(out)} == {min(aic, key=aic.get)}
