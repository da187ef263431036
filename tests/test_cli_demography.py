"""``driftband fit --demography``: explicit size histories end to end."""

import csv
import json

import pytest

from driftband.cli import main


@pytest.fixture(scope="module")
def declined(tmp_path_factory):
    """A population that declined four-fold 60 generations ago (tau = 60 / (2 * 400)),
    and one of constant size, simulated forward with one distribution of s."""
    d = tmp_path_factory.mktemp("declined")
    out = d / "spectra.json"
    rc = main(
        [
            "simulate",
            "--population",
            "lake:N=100,n=12",
            "--population",
            "sea:N=400,n=12",
            "--history",
            "lake=0:100,60:400",
            "--class-sites",
            "60000",
            "--theta",
            "0.02",
            "--true-dfe",
            "gamma:shape=0.3,mean=400",
            "--block-count",
            "20",
            "--seed",
            "3",
            "-o",
            str(out),
            "-q",
        ]
    )
    assert rc == 0
    return d, out


def test_one_change_history_is_fitted_recorded_and_bootstrapped(declined, tmp_path):
    _d, spectra = declined
    fit = tmp_path / "fit.json"
    argv = ["fit", str(spectra), "--dfe", "gamma", "--populations", "lake"]
    argv += ["--demography", "one-change", "--misorientation", "fixed:0"]
    assert main(argv + ["--bootstrap", "3", "--seed", "2", "-o", str(fit), "-q"]) == 0
    doc = json.loads(fit.read_text())
    assert doc["options"]["demography"] == "one-change"
    g = doc["populations"]["lake"]["models"]["gamma"]
    h = g["size_history"]
    assert h["model"] == "one-change" and h["S_refers_to"] == "current size"
    # a decline is found (true nu = 0.25; with 60,000 sites per class nu and tau trade
    # off); nu, tau, theta, shape and mean are free
    assert h["params"]["nu"] < 1.0
    assert h["neutral_fit"]["success"]
    assert g["n_params"] == 5
    # every replicate refits the history: its parameters get intervals
    boot = doc["populations"]["lake"]["bootstrap"]["models"]["gamma"]
    lo, hi = boot["params_ci"]["history_nu"]
    assert lo <= hi
    # the report shows the history: a plot, the parameters with intervals, the reference
    html, summary = tmp_path / "r.html", tmp_path / "r.md"
    assert main(["report", str(fit), "-o", str(html), "--summary", str(summary), "-q"]) == 0
    text = html.read_text()
    assert "Size history of lake" in text and "N / N_anc" not in text  # the plot is SVG
    assert "refer to the <strong>current</strong> size" in text
    # the same parameterisation as simulate's histories: a command to simulate from it
    assert "driftband simulate --history lake=0:" in text
    assert "- lake: one-change (nu = " in summary.read_text()


def test_fixed_history_from_a_demes_file(declined, tmp_path):
    _d, spectra = declined
    demes = tmp_path / "lake.yaml"
    demes.write_text(
        "time_units: generations\n"
        "demes:\n"
        "  - name: lake\n"
        "    epochs:\n"
        "      - {start_size: 400, end_time: 60}\n"
        "      - {start_size: 100, end_time: 0}\n"
    )
    fit = tmp_path / "fit.json"
    argv = ["fit", str(spectra), "--dfe", "gamma", "--populations", "lake"]
    argv += ["--demography", f"demes:{demes}", "--misorientation", "fixed:0", "-o", str(fit)]
    assert main(argv + ["-q"]) == 0
    h = json.loads(fit.read_text())["populations"]["lake"]["models"]["gamma"]["size_history"]
    assert h["model"] == "demes"
    assert h["nu_now"] == pytest.approx(0.25)
    # 60 generations of 2 * 400: tau = 0.075
    assert h["epochs"][0][0] == pytest.approx(0.075)


def test_only_ne_differs_on_the_fitted_histories(declined, tmp_path):
    # lake declined four-fold 60 generations ago, sea did not; both share one
    # distribution of s: the "only Ne differs" hypotheses are true
    _d, spectra = declined
    fit = tmp_path / "fit.json"
    argv = ["fit", str(spectra), "--dfe", "gamma", "--demography", "auto"]
    assert main(argv + ["--misorientation", "fixed:0", "-o", str(fit), "-q"]) == 0
    doc = json.loads(fit.read_text())
    lake = doc["populations"]["lake"]["models"]["gamma"]["size_history"]
    assert set(lake["candidates_aic"]) == {"equilibrium", "one-change", "two-change", "growth"}
    assert lake["model"] != "equilibrium"  # the decline is seen
    out = tmp_path / "compare.tsv"
    tests = "ne_only_lrt,ne_only_free_lrt"
    assert main(["compare", str(fit), "--tests", tests, "-o", str(out), "-q"]) == 0
    rows = {r["test"]: r for r in csv.DictReader(open(out), delimiter="\t")}
    r = rows["ne_only_lrt"]
    assert "current sizes of the fitted size histories" in r["note"]
    # the Ne ratio is that of the fitted current sizes (true 100/400 = 0.25 or its
    # inverse, by the pair's order), not the one of neutral diversity
    ratio = float(r["estimate"])
    assert 0.1 < min(ratio, 1 / ratio) < 0.5
    for t in ("ne_only_lrt", "ne_only_free_lrt"):
        assert float(rows[t]["p_raw"]) > 0.01


@pytest.mark.parametrize(
    "value, message",
    [
        ("bottleneck", "choose one of nuisance"),
        ("demes:", "choose one of nuisance"),
        ("demes:/no/such/file.yaml", "file.yaml"),
    ],
)
def test_bad_demography_is_one_line_and_exit_2(declined, tmp_path, capsys, value, message):
    _d, spectra = declined
    argv = ["fit", str(spectra), "--dfe", "gamma", "--demography", value]
    assert main(argv + ["-o", str(tmp_path / "f.json")]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and message in err
    assert not (tmp_path / "f.json").exists()
