"""Bootstrap bookkeeping: replicates keep their place, failures are counted, Akaike
weights are recomputed per replicate (Burnham & Anderson 2002, sec. 2.9 and 4.2)."""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest
from scipy import optimize, stats

from driftband.fit.bootstrap import _averaged, _summarise, mixture_interval, percentile_interval
from driftband.fit.results import akaike_weights


def _rep(share0: float, loglik: float, success: bool = True) -> dict:
    return {
        "params": {"shape": 0.3},
        "misorientation_rate": 0.0,
        "shares": [share0, 1 - share0],
        "fixation_ratio": 0.1,
        "theta": 0.01,
        "loglik": loglik,
        "success": success,
    }


FIT = SimpleNamespace(shares=np.array([0.2, 0.8]), params={"shape": 0.3}, n_params=3)


def test_failed_and_non_converged_replicates_keep_their_place_and_are_left_out():
    reps = [_rep(0.10, -5), None, _rep(0.90, -5, success=False), _rep(0.20, -5), _rep(0.30, -5)]
    mb = _summarise(FIT, reps, 0.95)
    assert mb.shares.shape == (5, 2) and np.all(np.isnan(mb.shares[1]))
    assert mb.converged.tolist() == [True, False, False, True, True]
    assert mb.replicates == 3 and mb.failed == 2
    # the interval is made of the converged replicates only (0.9 would widen it)
    assert tuple(mb.shares_ci[0]) == percentile_interval(np.array([0.1, 0.2, 0.3]), 0.95)
    d = mb.share_draws(0)
    assert np.isnan(d[1]) and np.isnan(d[2]) and d[3] == 0.2
    back = type(mb).from_dict(
        mb.to_dict() | {"shares": [None if np.isnan(r[0]) else list(r) for r in mb.shares]}
    )
    assert back.ok.tolist() == mb.ok.tolist()


def test_akaike_weights_by_hand():
    # w_k = exp(-Δ_k/2) / Σ exp(-Δ_j/2): ΔAIC 0 and 2 give 1/(1+e^-1) and e^-1/(1+e^-1)
    w = akaike_weights({"a": 10.0, "b": 12.0, "c": math.nan})
    assert w["a"] == pytest.approx(1 / (1 + math.exp(-1)), rel=1e-12)
    assert w["b"] == pytest.approx(math.exp(-1) / (1 + math.exp(-1)), rel=1e-12)
    assert w["c"] == 0.0


def test_averaged_shares_reweigh_every_replicate():
    pf = SimpleNamespace(
        fits={"a": SimpleNamespace(n_params=3), "b": SimpleNamespace(n_params=4)}, best=FIT
    )
    ra = [_rep(0.1, -10.0), _rep(0.1, -10.0), _rep(0.1, -10.0)]
    rb = [_rep(0.5, -10.0), _rep(0.5, -5.0), None]
    models = {"a": _summarise(FIT, ra, 0.95), "b": _summarise(FIT, rb, 0.95)}
    av = _averaged(pf, models, 0.95)
    # replicate 0: AIC a = 26, b = 28 -> weights 1/(1+e^-1), e^-1/(1+e^-1)
    wa = 1 / (1 + math.exp(-1))
    assert av.weights["a"][0] == pytest.approx(wa) and av.shares[0, 0] == pytest.approx(
        wa * 0.1 + (1 - wa) * 0.5
    )
    # replicate 1: b's log-likelihood is 5 higher, AIC b = 18 < 26: b dominates
    wb = 1 / (1 + math.exp(-4))
    assert av.weights["b"][1] == pytest.approx(wb)
    # replicate 2: b failed, so a takes all the weight
    assert av.weights["a"][2] == 1.0 and av.shares[2, 0] == pytest.approx(0.1)


def test_mixture_interval_solves_the_model_averaged_tail_areas():
    """Turek & Fletcher (2012) define the model-averaged tail-area interval by
    Σ_m w_m·P_m(θ ≤ end) = α/2 and 1 − α/2. With each model's bootstrap values set at the
    quantiles of its normal sampling distribution (scipy.stats.norm), the mixture
    interval solves the same equations (brentq on the normal CDFs) to the quantile grid's
    resolution."""
    B = 4000
    u = (np.arange(B) + 0.5) / B
    mus, sds, w = np.array([0.24, 0.25, 0.33]), np.array([0.010, 0.011, 0.015]), [0.6, 0.3, 0.1]
    values = stats.norm.ppf(u[:, None], mus, sds)
    lo, hi = mixture_interval(values, np.tile(w, (B, 1)), 0.95)

    def tail(x: float, p: float) -> float:
        return float(np.dot(w, stats.norm.cdf(x, mus, sds))) - p

    assert lo == pytest.approx(optimize.brentq(tail, 0.0, 1.0, args=(0.025,)), abs=2e-4)
    assert hi == pytest.approx(optimize.brentq(tail, 0.0, 1.0, args=(0.975,)), abs=2e-4)
    # the per-replicate averages Σ w θ would give a narrower interval, centred on 0.252
    avg = values @ np.array(w)
    a_lo, a_hi = percentile_interval(avg, 0.95)
    assert a_hi - a_lo < hi - lo


def test_mixture_interval_of_one_model_is_its_percentile_interval():
    # numpy's Hazen plotting positions: the same rule, one model, equal weights
    x = np.random.default_rng(2).normal(size=(501, 1))
    x[7] = np.nan  # a failed refit is left out
    lo, hi = mixture_interval(x, np.ones_like(x), 0.9)
    ref = np.quantile(x[np.isfinite(x)], [0.05, 0.95], method="hazen")
    assert (lo, hi) == pytest.approx(tuple(ref), rel=1e-12)
    # replicates whose weights are all NaN (no family converged) are left out, and no
    # weight at all gives NaN ends
    w = np.ones_like(x)
    w[:250] = np.nan
    assert mixture_interval(x, w, 0.9) == pytest.approx(
        tuple(np.quantile(x[250:][np.isfinite(x[250:])], [0.05, 0.95], method="hazen"))
    )
    assert all(np.isnan(mixture_interval(x, np.full_like(x, np.nan), 0.9)))


def test_a_family_failing_in_most_replicates_is_named_in_the_headline():
    # When a family with real Akaike weight fails in most replicates, the averaged interval
    # leaves it out of them; the headline says so rather than hiding it.
    import warnings

    from driftband.fit.likelihood import SpectrumPair
    from driftband.fit.mle import fit_model
    from driftband.fit.models import DfeModel
    from driftband.fit.results import BootstrapResult, ModelBootstrap, PopulationFit
    from driftband.prf.dfe import DfeExpectation
    from driftband.prf.families import GammaDfe

    n, L = 8, 2e5
    rng = np.random.default_rng(3)
    i = np.arange(1, n)
    xn = rng.poisson(0.01 * L / i).astype(float)
    xs = rng.poisson(0.01 * L * DfeExpectation(n).mean_g(GammaDfe(0.3, 300.0))).astype(float)
    data = SpectrumPair(n, False, xn, xs, L, L)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fits = {
            f: fit_model(data, DfeModel(f), eps=0.0, stderr=False) for f in ("gamma", "lognormal")
        }
    B = 10

    def mb(name: str, failed: int) -> ModelBootstrap:
        conv = np.arange(B) >= failed
        shares = np.tile(fits[name].shares, (B, 1))
        return ModelBootstrap(B - failed, failed, {}, shares, {}, [], conv)

    boot = BootstrapResult(
        B, 40, 1, 0.95, {"gamma": mb("gamma", 0), "lognormal": mb("lognormal", 8)}
    )
    pf = PopulationFit("p", data, fits, bootstrap=boot)
    assert min(pf.weights().values()) > 0.05  # both families carry weight
    notes = " ".join(pf.headline().notes)
    assert "lognormal family" in notes and "in 8 of 10 bootstrap replicates" in notes
    assert "gamma family" not in notes
