"""The analytic gradient of the profile log-likelihood and the fits that use it.

References, named beside each check: an independent numerical derivative of the
objective (central differences at two steps combined by Richardson extrapolation, with a
step study showing the reference itself is converged); mpmath quadrature of the
Sawyer & Hartl (1992) spectrum for the derivative in the beneficial coefficient; the
Karush–Kuhn–Tucker conditions of the profiled counts (Poisson scores, by hand); the fits
of the optimiser's own finite-difference gradient (the path used before).
"""

from pathlib import Path

import mpmath
import numpy as np
import pytest

import driftband
from driftband.fit.likelihood import Objective, SpectrumPair, poisson_loglik, profile_counts
from driftband.fit.mle import fit_model
from driftband.fit.models import DfeModel
from driftband.prf.dfe import DfeExpectation
from driftband.prf.expected import kernel
from driftband.prf.families import GammaDfe
from driftband.spectra.io import read_spectra

N = 14
EX = DfeExpectation(N)


def _spectra(folded: bool) -> SpectrumPair:
    """Poisson spectra of a gamma DFE with a demographic distortion r_i (seeded)."""
    rng = np.random.default_rng(3)
    i = np.arange(1, N)
    r = 1.0 + 0.4 * np.sin(i / 2.0)
    L = 2e5
    xn = rng.poisson(0.01 * L * r / i).astype(float)
    xs = rng.poisson(0.01 * L * r * EX.mean_g(GammaDfe(0.3, 300.0))).astype(float)
    xn[-1] += 40  # misoriented-looking excess at n−1
    full = [np.concatenate([[L - v.sum()], v, [0.0]]) for v in (xn, xs)]
    if folded:
        full = [
            np.concatenate([[f[0] + f[-1]], f[1 : N // 2] + f[N - 1 : N // 2 : -1], [f[N // 2]]])
            for f in full
        ]
    return SpectrumPair.from_arrays(N, folded, full[0], full[1], L, L)


def _richardson(f, x, h):
    """(4 D(h/2) − D(h)) / 3 with D the central difference, per coordinate."""
    out = np.empty(x.size)
    for j in range(x.size):
        e = np.zeros(x.size)
        e[j] = 1.0
        d1 = (f(x + h * e) - f(x - h * e)) / (2 * h)
        d2 = (f(x + h / 2 * e) - f(x - h / 2 * e)) / h
        out[j] = (4 * d2 - d1) / 3
    return out


MODELS = [
    DfeModel("gamma"),
    DfeModel("lognormal"),
    DfeModel("discrete"),
    DfeModel("gamma", beneficial=True),
]
# (folded, eps): eps None = estimated; fixed rates otherwise
CASES = [(False, None), (False, 0.0), (False, 0.03), (True, 0.0)]


@pytest.mark.parametrize("model", MODELS, ids=lambda m: m.name)
@pytest.mark.parametrize("folded, eps", CASES)
@pytest.mark.parametrize("equilibrium", [False, True], ids=["nuisance", "equilibrium"])
def test_gradient_matches_a_richardson_difference(model, folded, eps, equilibrium):
    if folded and model.beneficial:
        pytest.skip("no beneficial class on folded spectra")
    data = _spectra(folded)
    obj = Objective(data, model, eps=eps, equilibrium=equilibrium, expectation=EX)
    rng = np.random.default_rng(7)
    x = model.starts()[2] + 0.2 * rng.standard_normal(model.n_free)
    if obj.free_eps:
        x = np.append(x, -3.5)
    f, g = obj.value_and_grad(x)
    assert f == pytest.approx(obj(x), rel=1e-12)
    # step study: the reference at two step sizes agrees to 1e-7 before it is used
    ref = _richardson(obj, x, 1e-3)
    ref2 = _richardson(obj, x, 4e-3)
    scale = np.maximum(np.abs(ref), 1.0)
    assert np.all(np.abs(ref - ref2) <= 1e-7 * scale)
    assert np.all(np.abs(g - ref) <= 1e-6 * scale), (g, ref)


def test_beneficial_derivative_against_mpmath():
    # ∂g_i/∂S of the Sawyer & Hartl (1992) integral, differentiated by mpmath at 30 digits.
    mpmath.mp.dps = 30
    n = 10
    k = kernel(n)

    def g(i, S):
        def f(x):
            w = mpmath.expm1(-S * (1 - x)) / mpmath.expm1(-S)
            return x ** (i - 1) * (1 - x) ** (n - i - 1) * w

        return mpmath.binomial(n, i) * mpmath.quad(f, [0, min(mpmath.mpf(1) / S, 0.5), 1])

    for s in (0.05, 3.0, 80.0):
        got = k.dg_beneficial(s)
        for i in (1, 5, 9):
            want = float(mpmath.diff(lambda S, i=i: g(i, S), mpmath.mpf(s)))
            assert got[i - 1] == pytest.approx(want, rel=1e-9)


def test_profiled_counts_meet_the_kkt_conditions():
    # With misorientation the counts c are profiled by Newton steps. At a maximum over
    # c ≥ 0 the Poisson score ∂logL/∂c_j is 0 where c_j > 0 and ≤ 0 where c_j = 0 (Karush–
    # Kuhn–Tucker). A DFE that leaves the excess at n−1 to misorientation puts c_{n−1} on
    # its bound; the score of its partner class must still vanish there.
    data = _spectra(False)
    eps = 0.03
    gbar = EX.mean_g(GammaDfe(0.3, 300.0))
    c, _ln, _ls = profile_counts(data, gbar, eps)
    a = data.sites_neutral / np.arange(1, N)
    b = data.sites_selected * gbar

    def loglik(cc):
        ln = (1 - eps) * cc * a + eps * cc[::-1] * a[::-1]
        ls = (1 - eps) * cc * b + eps * cc[::-1] * b[::-1]
        return poisson_loglik(data.neutral, ln) + poisson_loglik(data.selected, ls)

    # the score by hand: Σ (x/λ − 1) ∂λ/∂c_j over both classes and both entries j, n−j
    ln = (1 - eps) * c * a + eps * c[::-1] * a[::-1]
    ls = (1 - eps) * c * b + eps * c[::-1] * b[::-1]
    rn, rs = data.neutral / ln - 1, data.selected / ls - 1
    score = (1 - eps) * (rn * a + rs * b) + eps * (rn[::-1] * a + rs[::-1] * b)
    pos = c > 0
    assert np.all(np.abs(score[pos] * c[pos]) <= 1e-6 * (data.neutral + data.selected)[pos])
    assert np.all(score[~pos] <= 1e-9)
    # and no feasible nudge of a single count raises the likelihood
    base = loglik(c)
    for j in range(c.size):
        for d in (1e-4, -1e-4):
            cc = c.copy()
            cc[j] = max(cc[j] * (1 + d), 0.0) if cc[j] > 0 else 1e-6 * c.mean()
            assert loglik(cc) <= base + 1e-9


@pytest.fixture(scope="module")
def demo_pairs():
    demo = Path(driftband.__file__).parent / "data" / "demo"
    ss = read_spectra(demo / "snail.truth.spectra.json")
    return {name: SpectrumPair.from_population(p) for name, p in ss.populations.items()}


@pytest.mark.parametrize("family", ["gamma", "lognormal", "discrete"])
def test_fits_reach_the_optimum_of_the_finite_difference_path(demo_pairs, family, monkeypatch):
    # The fits before the analytic gradient (L-BFGS-B's own finite differences) on the
    # demo spectra: the same maximum (log-likelihood within 1e-6, shares within 1e-4),
    # or a higher one where the finite differences stopped short of a bound.
    model = DfeModel(family)
    for name, data in demo_pairs.items():
        ex = DfeExpectation(data.n)
        new = fit_model(data, model, eps=None, expectation=ex, stderr=False)
        monkeypatch.setattr(Objective, "analytic_gradient", False)
        old = fit_model(data, model, eps=None, expectation=ex, stderr=False)
        monkeypatch.setattr(Objective, "analytic_gradient", True)
        assert new.success and old.success
        assert new.n_eval < old.n_eval / 2, name
        assert new.loglik >= old.loglik - 1e-6, name
        if not new.at_bounds or set(new.at_bounds) == set(old.at_bounds):
            assert new.loglik == pytest.approx(old.loglik, abs=1e-6), name
            assert new.shares == pytest.approx(old.shares, abs=1e-4), name


def test_joint_fit_reaches_the_optimum_of_the_finite_difference_path(demo_pairs, monkeypatch):
    # The joint fits of the tests between populations pass the chain-ruled gradient of
    # both objectives (shared DFE vector, fitted log Ne ratio along the scale direction,
    # one ε each); the finite-difference path (the one used before) finds the same maximum.
    from driftband.compare.lrt import joint_fit, scale_shift

    model = DfeModel("gamma")
    objs = [
        Objective(d, model, eps=None, expectation=DfeExpectation(d.n)) for d in demo_pairs.values()
    ]
    free = scale_shift(model, 1.0)
    start = np.concatenate([np.log([0.3, 300.0]), [-1.5], [-4.0, -4.0]])
    zero = [np.zeros(2), np.zeros(2)]
    new = joint_fit(objs, model, zero, [start], free=free)
    monkeypatch.setattr(Objective, "analytic_gradient", False)
    old = joint_fit(objs, model, zero, [start], free=free)
    assert new[2] and old[2]
    assert new[0] == pytest.approx(old[0], abs=1e-6)
