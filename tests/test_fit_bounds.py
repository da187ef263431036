"""Parameters at a bound: listed, no Wald s.e., warned about, shown as such; boundary LRTs.

Sources. The model of the spectra is the Poisson random field of Sawyer & Hartl (1992)
with the nuisance factors of Eyre-Walker, Woolfit & Phelps (2006), as in
test_fit_likelihood.py. A Wald standard error needs an interior maximum; at a boundary the
limiting distribution is not normal and the LRT of a parameter whose null value is on the
boundary follows the χ̄² mixture of Self & Liang (1987, Case 5 and its corollaries, from
memory): 0.5·χ²(df−1) + 0.5·χ²(df) for one such parameter. The 5 % critical value of
0.5·χ²(0) + 0.5·χ²(1) is the 10 % point of χ²(1), 2.706 (common practice).
"""

from __future__ import annotations

import copy
import json
import warnings
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from driftband.cli import main
from driftband.compare.pair import boundary_parameters, chibar2_sf, compare_pair
from driftband.exceptions import BoundWarning, OptionError
from driftband.fit.likelihood import Objective, SpectrumPair
from driftband.fit.mle import FitResult, fit_model
from driftband.fit.models import DfeModel
from driftband.fit.options import FitOptions
from driftband.fit.results import PopulationFit
from driftband.prf import DfeExpectation, GammaDfe
from driftband.report import build_report, build_summary_md, read_fit_doc

N = 20


def _expected_pair(dfe, n=N, L=1e6, theta=0.01):
    """Spectra equal to their expectation under ``dfe`` (no misorientation, r_i = 1)."""
    i = np.arange(1, n)
    gbar = DfeExpectation(n).mean_g(dfe)
    xn, xs = theta * L / i, theta * L * gbar
    full = lambda x: np.concatenate([[L - x.sum()], x, [0.0]])  # noqa: E731
    return SpectrumPair.from_arrays(n, False, full(xn), full(xs), L, L)


def _tiny_pair():
    # n = 8, 300 sites per class; one selected polymorphism, a singleton.
    xn = np.array([4.0, 1, 0, 0, 2, 0, 3])
    xs = np.array([1.0, 0, 0, 0, 0, 0, 0])
    full = lambda x: np.concatenate([[300 - x.sum()], x, [0.0]])  # noqa: E731
    return SpectrumPair.from_arrays(8, False, full(xn), full(xs), 300.0, 300.0)


@pytest.fixture(scope="module")
def no_beneficial():
    """gamma+beneficial fitted to spectra made without beneficial mutations."""
    data = _expected_pair(GammaDfe(0.3, 500.0))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        f = fit_model(data, DfeModel("gamma", beneficial=True), population="lake", eps=0.0)
    return data, f, caught


def test_beneficial_mass_on_data_without_it_is_at_its_bound(no_beneficial):
    # The data equal their expectation under p_b = 0, so the truth maximises the Poisson
    # likelihood (λ = x is its maximiser, Gibbs' inequality): the estimate of p_b goes to
    # its lower bound (1e-6 stands in for 0), and S_b is then not identified.
    data, f, caught = no_beneficial
    assert "beneficial_fraction" in f.at_bounds
    assert f.params["beneficial_fraction"] == pytest.approx(1e-6, rel=1e-2)
    assert np.isnan(f.stderr["beneficial_fraction"]) and np.isnan(f.stderr["beneficial_S"])
    assert np.isfinite(f.stderr["shape"])  # interior parameters keep theirs
    # the objective at the estimate is no worse than at the truth (p_b at its bound)
    obj = Objective(data, DfeModel("gamma", beneficial=True), eps=0.0)
    truth = np.array([np.log(0.3), np.log(500.0), np.log(1e-6 / (1 - 1e-6)), np.log(10.0)])
    assert f.loglik >= -obj(truth) - 1e-6
    bound = [w for w in caught if issubclass(w.category, BoundWarning)]
    assert len(bound) == 1  # once per fit
    assert str(bound[0].message).startswith(
        "lake / gamma+beneficial: beneficial_fraction is at its lower bound"
    )


def test_lognormal_on_a_tiny_spectrum_has_log_sd_at_bound():
    # One selected singleton and nothing else: a spread of S only adds expected selected
    # polymorphisms in higher classes, where none were seen, so the likelihood grows as
    # the DFE narrows to a point mass: lognormal sigma -> 0 (lower bound 0.01), gamma
    # shape -> infinity (upper bound 100; the gamma tends to a point mass).
    data = _tiny_pair()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        ln = fit_model(data, DfeModel("lognormal"), population="pond", eps=0.0)
        ga = fit_model(data, DfeModel("gamma"), population="pond", eps=0.0)
    assert ln.at_bounds == ("sd_log_abs_S",) and np.isnan(ln.stderr["sd_log_abs_S"])
    assert ga.at_bounds == ("shape",) and np.isnan(ga.stderr["shape"])
    msgs = [str(w.message) for w in caught if issubclass(w.category, BoundWarning)]
    assert msgs[0].startswith("pond / lognormal: sd_log_abs_S is at its lower bound (0.01)")
    assert msgs[1].startswith("pond / gamma: shape is at its upper bound (100)")


def test_misorientation_free_vs_fixed_zero_without_misorientation():
    # Poisson-sampled spectra with no misorientation: the unconstrained estimate of ε falls
    # below 0 in about half of the samples (5 of seeds 0-11; seed 2 is one); then ε sits at its
    # lower bound (logit −13.8, ε = 1.016e−6), is listed, has no s.e., and the fit with ε
    # fixed at 0 reaches the same log-likelihood up to that ε.
    en = _expected_pair(GammaDfe(0.3, 500.0), L=2e5)
    rng = np.random.default_rng(2)
    full = lambda x: np.concatenate([[2e5 - x.sum()], x, [0.0]])  # noqa: E731
    data = SpectrumPair.from_arrays(
        N,
        False,
        full(rng.poisson(en.neutral).astype(float)),
        full(rng.poisson(en.selected).astype(float)),
        2e5,
        2e5,
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", BoundWarning)
        free = fit_model(data, DfeModel("gamma"), eps=None)
        fixed = fit_model(data, DfeModel("gamma"), eps=0.0)
    assert "misorientation_rate" in free.at_bounds
    assert free.eps == pytest.approx(1.0 / (1.0 + np.exp(13.8)), rel=1e-2)
    assert np.isnan(free.stderr["misorientation_rate"])
    assert (
        "misorientation_rate" not in fixed.at_bounds and "misorientation_rate" not in fixed.stderr
    )
    assert free.loglik == pytest.approx(fixed.loglik, abs=1e-2)


def test_at_bounds_round_trip_and_old_files(no_beneficial):
    _data, f, _w = no_beneficial
    d = json.loads(json.dumps(f.to_dict()))
    assert d["at_bounds"] == list(f.at_bounds)
    assert FitResult.from_dict(d).at_bounds == f.at_bounds
    assert (
        FitResult.from_dict(d).stderr["beneficial_fraction"]
        != FitResult.from_dict(d).stderr["beneficial_fraction"]
    )  # NaN
    del d["at_bounds"]  # a file written before the key existed
    assert FitResult.from_dict(d).at_bounds == ()


def test_folded_spectra_refuse_a_beneficial_class(tmp_path, capsys):
    # Folding maps derived frequency x and 1 − x to one class, so the sign of S (and with
    # it a beneficial class) cannot be told from a folded spectrum (common practice).
    t = tmp_path / "folded.tsv"
    rows = ["population\tclass\tn\tfolded\tderived_copies\tsite_count"]
    for cls, v in (("4fold", [2000, 1000, 660, 500, 400]), ("0fold", [600, 250, 150, 100, 80])):
        rows.append(f"lake\t{cls}\t10\ttrue\t0\t{200000 - sum(v)}")
        rows += [f"lake\t{cls}\t10\ttrue\t{i}\t{x}" for i, x in enumerate(v, start=1)]
    t.write_text("\n".join(rows) + "\n")
    out = tmp_path / "fit.json"
    for opt in (["--beneficial"], ["--dfe", "gamma+beneficial"]):
        rc = main(["fit", str(t), "-o", str(out), *opt])
        err = capsys.readouterr().err
        assert rc == 2
        assert len(err.strip().splitlines()) == 1
        assert "--dfe (or --beneficial)" in err and "'lake'" in err and "folded" in err
        assert not out.exists()
    data = SpectrumPair.from_arrays(
        10, True, [0, 2000, 1000, 660, 500, 400], [0, 600, 250, 150, 100, 80], 2e5, 2e5
    )
    with pytest.raises(OptionError, match="folded"):
        fit_model(data, DfeModel("lognormal", beneficial=True))


@pytest.mark.parametrize("t", [0.0, 0.5, 2.706, 5.0, 11.3])
@pytest.mark.parametrize("df", [1, 2, 4])
def test_chibar2_matches_a_hand_computation(t, df):
    # 0.5·P(χ²(df−1) ≥ t) + 0.5·P(χ²(df) ≥ t), with χ²(0) a point mass at 0 (scipy.stats.chi2).
    low = (1.0 if t <= 0 else 0.0) if df == 1 else stats.chi2.sf(t, df - 1)
    assert chibar2_sf(t, df, 1) == pytest.approx(0.5 * low + 0.5 * stats.chi2.sf(t, df))
    assert chibar2_sf(t, df, 0) == pytest.approx(stats.chi2.sf(t, df))


def test_chibar2_five_percent_point_and_monte_carlo():
    # The textbook 5 % point 2.706 of 0.5·χ²(0) + 0.5·χ²(1) (common practice), and a Monte
    # Carlo of the statistic itself: one parameter on its boundary, max(Z, 0)² with
    # Z ~ N(0, 1), plus two interior ones, χ²(2) (Self & Liang 1987, Case 5).
    assert chibar2_sf(2.706, 1, 1) == pytest.approx(0.05, abs=1e-4)
    rng = np.random.default_rng(1)
    z = rng.standard_normal((200_000, 3))
    tstat = np.maximum(z[:, 0], 0.0) ** 2 + z[:, 1] ** 2 + z[:, 2] ** 2
    for c in (2.0, 6.0, 9.0):
        assert np.mean(tstat >= c) == pytest.approx(chibar2_sf(c, 3, 1), abs=3e-3)


def test_shared_dfe_lrt_uses_the_mixture_when_p_b_is_at_zero(no_beneficial):
    # Both populations without beneficial mutations: the null (shared) fit puts p_b on its
    # boundary, so the p-value is the χ̄² one and the note says so.
    data, fa, _w = no_beneficial
    model = DfeModel("gamma", beneficial=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", BoundWarning)
        db = _expected_pair(GammaDfe(0.3, 500.0), L=5e5)
        fb = fit_model(db, model, population="spring", eps=0.0)
    pa, pb = (
        PopulationFit("lake", data, {model.name: fa}),
        PopulationFit("spring", db, {model.name: fb}),
    )
    opts = FitOptions(models=(model,), eps=0.0)
    (row,) = compare_pair(pa, pb, model, opts, tests=("shared_dfe_lrt",))
    assert "Self & Liang 1987" in row.note and "beneficial_fraction" in row.note
    assert row.p_value == pytest.approx(chibar2_sf(row.statistic, 4, 1))
    assert boundary_parameters(model, fa.x[:4]) == ["beneficial_fraction"]
    # no boundary: plain χ²
    assert boundary_parameters(DfeModel("gamma"), np.log([0.3, 500.0])) == []


def test_report_and_summary_show_at_bound():
    fit = read_fit_doc(Path(__file__).parent / "data" / "report" / "fit.json")
    doc = copy.deepcopy(fit)
    pop = doc["populations"]["lake"]
    best = pop["best_model"]
    f = pop["models"][best]
    name = next(iter(f["params"]))
    f["at_bounds"] = [name]
    f["stderr"][name] = None
    html = build_report(doc, None, None, {})
    assert "at bound (" in html
    assert f"{name} at bound: the share rests on a limit of the fit" in html  # headline flag
    md = build_summary_md(doc, None, None, {})
    assert f"{name} at bound" in md
    # without the key (older files) nothing is flagged
    assert "at bound" not in build_summary_md(fit, None, None, {})
