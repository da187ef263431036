"""The effect convention of the band edges (heterozygote or homozygote s).

Outside facts used here (common practice; the fitness schemes as the issue states them
and as textbooks write them, from memory): with genotype fitnesses 1 : 1+s : 1+2s the
scaled coefficient of Poisson random field theory is S = 4·Ne·s (Sawyer & Hartl 1992);
with 1 : 1+s/2 : 1+s the heterozygote effect is s/2, so S = 2·Ne·s and |Ne·s| < 1 means
|S| < 2. Gamma shares are checked against ``scipy.stats.gamma``.
"""

import csv
import json
import math

import pytest
from scipy import stats

from driftband.cli import main
from driftband.effect import convention_text, core_edges, shown_edges
from driftband.prf.families import GammaDfe, band_shares


def _rows(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh, delimiter="\t"))


def test_edges_round_trip_and_scale():
    for edges in [(0, 1, 10, 100), (0, 0.25, 3.5)]:
        for effect in ("heterozygote", "homozygote"):
            back = shown_edges(core_edges(edges, effect), effect)
            assert back == pytest.approx(edges, rel=0, abs=1e-15)
    # |S| = 4 * core edge: |Ne s_hom| < 1 is |S| < 2, |Ne s_het| < 1 is |S| < 4
    assert [4 * e for e in core_edges((0, 1, 10), "homozygote")] == [0, 2, 20]
    assert [4 * e for e in core_edges((0, 1, 10), "heterozygote")] == [0, 4, 40]
    with pytest.raises(ValueError, match="heterozygote or homozygote"):
        core_edges((0, 1), "dominant")


@pytest.mark.parametrize("effect,s_edges", [("heterozygote", 4.0), ("homozygote", 2.0)])
def test_gamma_share_under_each_convention_matches_scipy(effect, s_edges):
    shape, mean = 0.3, 200.0
    shares = band_shares(GammaDfe(shape=shape, mean=mean), core_edges((0, 1, 10), effect))
    ref = stats.gamma(shape, scale=mean / shape)
    # |S| ~ Gamma(shape, mean/shape): the share below |S| = s_edges and between the edges
    assert shares[0] == pytest.approx(ref.cdf(s_edges), rel=1e-9)
    assert shares[1] == pytest.approx(ref.cdf(10 * s_edges) - ref.cdf(s_edges), rel=1e-9)


def test_convention_line_names_the_fitness_scheme():
    assert "1 : 1+s : 1+2s" in convention_text("heterozygote")
    assert "4·|Ne·s|" in convention_text("heterozygote")
    assert "1 : 1+s/2 : 1+s" in convention_text("homozygote")
    assert "2·|Ne·s|" in convention_text("homozygote")


@pytest.fixture(scope="module")
def spectra(tmp_path_factory):
    d = tmp_path_factory.mktemp("effect")
    out = d / "spectra.json"
    args = ["simulate", "--population", "p:N=200,n=12", "--class-sites", "40000"]
    args += ["--theta", "0.02", "--true-dfe", "gamma:shape=0.3,mean=100", "--seed", "3"]
    assert main(args + ["-o", str(out), "-q"]) == 0
    return out


def _fit(spectra, tmp, tag, *extra):
    fit, bands = tmp / f"{tag}.json", tmp / f"{tag}.tsv"
    args = ["fit", str(spectra), "--dfe", "gamma", "--misorientation", "fixed:0"]
    args += ["-o", str(fit), "--bands-tsv", str(bands), "-q", *extra]
    assert main(args) == 0
    return json.loads(fit.read_text()), _rows(bands), fit


def test_fit_homozygote_bands_equal_the_same_edges_on_s(spectra, tmp_path):
    doc, rows, fit = _fit(spectra, tmp_path, "hom", "--effect", "homozygote")
    _, het_rows, _ = _fit(spectra, tmp_path, "het", "--bands", "0,0.5,5,50")
    assert doc["options"]["effect"] == "homozygote"
    first = [r for r in rows if r["role"] == "headline"][0]
    assert (first["band"], first["nes_high"], first["S_high"]) == ("0-1", "1", "2")
    assert first["effect"] == "homozygote"
    het_first = [r for r in het_rows if r["role"] == "headline"][0]
    assert het_first["S_high"] == "2" and het_first["effect"] == "heterozygote"
    assert float(first["share"]) == pytest.approx(float(het_first["share"]), abs=1e-12)
    # the default convention gives |S| < 4 for the same numbers: a larger share
    _, default_rows, _ = _fit(spectra, tmp_path, "default")
    default_first = [r for r in default_rows if r["role"] == "headline"][0]
    assert default_first["S_high"] == "4"
    assert float(default_first["share"]) > float(first["share"])

    # the report prints the convention beside the band tables
    html, summary = tmp_path / "r.html", tmp_path / "r.md"
    assert main(["report", str(fit), "-o", str(html), "--summary", str(summary), "-q"]) == 0
    text = summary.read_text()
    assert convention_text("homozygote") in text
    assert "(|S| < 2)" in text and "1 : 1+s/2 : 1+s" in text
    page = html.read_text()
    assert page.count("homozygote effect (fitness 1 : 1+s/2 : 1+s") >= 2
    assert math.isclose(doc["populations"]["p"]["models"]["gamma"]["band_edges"][1], 0.5)


def test_bad_effect_in_study_is_named(tmp_path, capsys):
    from test_run import GOOD, _err, _write

    p = _write(tmp_path, GOOD + "\n[fit]\neffect = 'dominant'\n")
    assert main(["run", str(p), "--out-dir", str(tmp_path / "o")]) == 2
    err = _err(capsys)
    assert str(p) in err and "effect" in err and "homozygote" in err
    assert not (tmp_path / "o").exists()
