"""The PRF likelihood and its profiled nuisance parameters.

Exact checks: the closed-form / EM profile of the nuisance factors must equal a direct
numerical maximisation of the full Poisson likelihood over them (scipy.optimize), and the
maximum-likelihood estimates must recover the parameters of spectra Poisson-sampled from
the model (the model of Eyre-Walker, Woolfit & Phelps 2006, from memory: nuisance factors
r_i shared by neutral and selected classes).
"""

import numpy as np
import pytest
from scipy import optimize

from driftband.fit.likelihood import SpectrumPair, poisson_loglik, profile_counts
from driftband.fit.mle import fit_model
from driftband.fit.models import DfeModel
from driftband.prf import DfeExpectation, GammaDfe, band_shares


def _model_spectra(n, dfe, theta, Ln, Ls, r=None, eps=0.0):
    """Expected observed polymorphic counts (i = 1..n-1) under the model."""
    i = np.arange(1, n)
    r = np.ones(n - 1) if r is None else r
    gbar = DfeExpectation(n).mean_g(dfe)
    en = theta * Ln * r / i
    es = theta * Ls * r * gbar
    mis = lambda e: (1 - eps) * e + eps * e[::-1]  # noqa: E731
    return mis(en), mis(es)


def _pair(n, xn, xs, Ln, Ls):
    full = lambda x, L: np.concatenate([[L - x.sum()], x, [0]])  # noqa: E731
    return SpectrumPair.from_arrays(n, False, full(xn, Ln), full(xs, Ls), Ln, Ls)


def _direct_profile(data, gbar, eps):
    """Maximise the full Poisson likelihood over log c numerically (reference)."""
    n = data.n
    i = np.arange(1, n)
    a, b = data.sites_neutral / i, data.sites_selected * gbar

    def nll(logc):
        c = np.exp(logc)
        ln = (1 - eps) * c * a + eps * (c * a)[::-1]
        ls = (1 - eps) * c * b + eps * (c * b)[::-1]
        return -(poisson_loglik(data.neutral, ln) + poisson_loglik(data.selected, ls))

    x0 = np.log((data.neutral + data.selected + 0.5) / (a + b))
    r = optimize.minimize(
        nll, x0, method="L-BFGS-B", options={"ftol": 1e-15, "gtol": 1e-10, "maxiter": 20000}
    )
    return -r.fun


@pytest.mark.parametrize("eps", [0.0, 0.04])
def test_profile_equals_direct_maximisation(eps):
    rng = np.random.default_rng(3)
    n = 12
    dfe = GammaDfe(shape=0.4, mean=300.0)
    r = np.linspace(1.0, 1.8, n - 1)
    en, es = _model_spectra(n, dfe, 0.01, 2e5, 2e5, r, eps)
    data = _pair(n, rng.poisson(en).astype(float), rng.poisson(es).astype(float), 2e5, 2e5)
    gbar = DfeExpectation(n).mean_g(dfe)
    _c, ln, ls = profile_counts(data, gbar, eps)
    ll = poisson_loglik(data.neutral, ln) + poisson_loglik(data.selected, ls)
    ref = _direct_profile(data, gbar, eps)
    assert ll >= ref - 1e-6
    assert ll == pytest.approx(ref, abs=1e-5)


def test_equilibrium_theta_closed_form():
    n = 10
    dfe = GammaDfe(0.5, 50.0)
    en, es = _model_spectra(n, dfe, 0.02, 1e5, 1e5)
    data = _pair(n, en, es, 1e5, 1e5)
    c, _ln, _ls = profile_counts(data, DfeExpectation(n).mean_g(dfe), 0.0, equilibrium=True)
    np.testing.assert_allclose(c, 0.02, rtol=1e-12)


def test_exact_expectations_give_truth_no_worse():
    # At the expected spectra themselves the MLE is the truth; the objective at the
    # estimate must be no worse than at the truth (scipy's assert_nlff_less_or_close idea).
    n = 20
    true = GammaDfe(0.3, 800.0)
    r = 1.0 + 0.5 * np.sin(np.arange(1, n))
    en, es = _model_spectra(n, true, 0.01, 1e6, 1e6, r)
    data = _pair(n, en, es, 1e6, 1e6)
    f = fit_model(data, DfeModel("gamma"), eps=0.0, stderr=False)
    _c, ln, ls = profile_counts(data, DfeExpectation(n).mean_g(true), 0.0)
    ll_true = poisson_loglik(data.neutral, ln) + poisson_loglik(data.selected, ls)
    assert f.loglik >= ll_true - 1e-6
    assert f.params["shape"] == pytest.approx(0.3, rel=1e-3)
    assert f.params["mean_abs_S"] == pytest.approx(800.0, rel=1e-2)
    np.testing.assert_allclose(f.nuisance, r / r[0], rtol=1e-3)
    np.testing.assert_allclose(f.shares, band_shares(true, f.band_edges), atol=1e-4)


def test_parameter_recovery_within_three_standard_errors():
    # 50 spectra Poisson-sampled from the model (with nuisance factors): each estimate
    # should lie within 3 asymptotic standard errors of the truth (>= 99.7 % for a normal
    # estimator; allow one miss per parameter in 50), and the z-scores should centre on 0.
    n = 16
    true = GammaDfe(0.35, 400.0)
    r = np.linspace(1.0, 1.5, n - 1)
    en, es = _model_spectra(n, true, 0.01, 5e5, 5e5, r)
    rng = np.random.default_rng(2024)
    ex = DfeExpectation(n)
    z = {"shape": [], "mean_abs_S": []}
    for _ in range(50):
        data = _pair(n, rng.poisson(en).astype(float), rng.poisson(es).astype(float), 5e5, 5e5)
        f = fit_model(
            data,
            DfeModel("gamma"),
            eps=0.0,
            expectation=ex,
            starts=[np.log([0.5, 200.0]), np.log([0.2, 2000.0])],
        )
        for k, tv in (("shape", 0.35), ("mean_abs_S", 400.0)):
            z[k].append((f.params[k] - tv) / f.stderr[k])
    for k, v in z.items():
        v = np.asarray(v)
        assert np.all(np.isfinite(v)), k
        assert np.sum(np.abs(v) > 3) <= 1, (k, v)
        assert abs(np.mean(v)) < 0.6, (k, np.mean(v))
        assert 0.6 < np.std(v) < 1.5, (k, np.std(v))


def test_misorientation_rate_recovered():
    n = 20
    true = GammaDfe(0.3, 500.0)
    en, es = _model_spectra(n, true, 0.01, 2e6, 2e6, eps=0.05)
    data = _pair(n, en, es, 2e6, 2e6)
    f = fit_model(data, DfeModel("gamma"), eps=None, stderr=False)
    assert f.eps == pytest.approx(0.05, abs=2e-3)
    assert f.params["shape"] == pytest.approx(0.3, rel=2e-2)


def test_folded_fit_recovers_shape():
    n = 20
    true = GammaDfe(0.25, 2000.0)
    en, es = _model_spectra(n, true, 0.01, 1e6, 1e6)
    h = n // 2
    fold = lambda e: np.concatenate([e[: h - 1] + e[::-1][: h - 1], [e[h - 1]]])  # noqa: E731
    xn, xs = fold(en), fold(es)
    full = lambda x, L: np.concatenate([[L - x.sum()], x])  # noqa: E731
    data = SpectrumPair.from_arrays(n, True, full(xn, 1e6), full(xs, 1e6), 1e6, 1e6)
    f = fit_model(data, DfeModel("gamma"), eps=None, stderr=False)
    assert not f.eps_free
    assert f.params["shape"] == pytest.approx(0.25, rel=1e-2)


def test_non_convergence_is_flagged_and_warned(failing_optimizer):
    # A fit whose optimiser reports failure is kept, flagged and warned about.
    import warnings

    from driftband.exceptions import ConvergenceWarning

    n = 10
    en, es = _model_spectra(n, GammaDfe(0.5, 50.0), 0.01, 1e5, 1e5)
    data = _pair(n, en, es, 1e5, 1e5)
    with warnings.catch_warnings(record=True) as w:
        warnings.simplefilter("always")
        f = fit_model(data, DfeModel("gamma"), eps=0.0, stderr=False)
    assert not f.success
    assert any(issubclass(x.category, ConvergenceWarning) for x in w)
    assert np.isfinite(f.loglik)
