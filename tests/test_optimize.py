"""The shared optimiser set-up: the polish stays within the bounds, the value returned is the
objective at the point returned, and compare's joint fit records and warns about
non-convergence."""

import warnings

import numpy as np
import pytest
from scipy import optimize

from driftband.compare.lrt import joint_fit as _joint_fit
from driftband.compare.lrt import joint_starts as _starts
from driftband.compare.pair import compare_pair
from driftband.exceptions import ConvergenceWarning
from driftband.fit import optimize as fit_optimize
from driftband.fit.likelihood import Objective, SpectrumPair
from driftband.fit.mle import fit_model
from driftband.fit.models import DfeModel
from driftband.fit.optimize import minimize_multistart
from driftband.fit.options import FitOptions
from driftband.fit.results import PopulationFit
from driftband.prf import DfeExpectation, GammaDfe


def _outside(x):
    """Separable convex objective whose unconstrained minimum (3, -2) lies outside the box
    [-1, 1]^2; the kink in x1 is what Nelder-Mead is there for."""
    return float((x[0] - 3.0) ** 2 + 10.0 * abs(x[1] + 2.0))


BOX = [(-1.0, 1.0), (-1.0, 1.0)]


def test_the_unbounded_polish_would_leave_the_box():
    # The case is meaningful: scipy's Nelder-Mead without bounds, from the box's corner
    # (1, -1) that L-BFGS-B reaches, walks out to (3, -2).
    pol = optimize.minimize(_outside, [1.0, -1.0], method="Nelder-Mead")
    assert pol.x[0] > 2.5 and pol.x[1] < -1.5


@pytest.mark.parametrize("start", [[0.0, 0.0], [-0.9, 0.9], [1.0, -1.0]])
def test_polish_stays_within_bounds_and_reports_the_objective_there(start):
    # Worked by hand: a separable convex objective is minimised over a box at the
    # unconstrained minimiser clipped into the box (common practice): (1, -1), where
    # f = (1 - 3)^2 + 10 |-1 + 2| = 14.
    opt = minimize_multistart(_outside, [np.array(start)], BOX, polish="always")
    lo, hi = np.array(BOX).T
    assert np.all(opt.x >= lo) and np.all(opt.x <= hi)
    assert opt.fun == _outside(opt.x)
    assert opt.x == pytest.approx([1.0, -1.0], abs=1e-6)
    assert opt.fun == pytest.approx(14.0, abs=1e-5)


def test_polish_after_a_failed_run_is_bounded(monkeypatch):
    # The "if_failed" polish (the one fit_model uses) after an L-BFGS-B run that reports
    # failure: same bounds, same rule for the value.
    real = fit_optimize.optimize.minimize

    def lbfgsb_fails(f, x0, method, **kw):
        r = real(f, x0, method=method, **kw)
        if method == "L-BFGS-B":
            r.success = False
        return r

    monkeypatch.setattr(fit_optimize.optimize, "minimize", lbfgsb_fails)
    opt = minimize_multistart(_outside, [np.zeros(2)], BOX)
    assert np.all(np.abs(opt.x) <= 1.0)
    assert opt.fun == _outside(opt.x)


# ------------------------------------------------------------------ compare's joint fit
def _population(name, dfe, seed, n=8, L=2e5, theta=0.01):
    rng = np.random.default_rng(seed)
    i = np.arange(1, n)
    en, es = theta * L / i, theta * L * DfeExpectation(n).mean_g(dfe)
    xn, xs = rng.poisson(en).astype(float), rng.poisson(es).astype(float)
    full = lambda x: np.concatenate([[L - x.sum()], x, [0.0]])  # noqa: E731
    data = SpectrumPair.from_arrays(n, False, full(xn), full(xs), L, L)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        f = fit_model(data, DfeModel("gamma"), eps=0.0, stderr=False)
    return PopulationFit(name, data, {"gamma": f})


@pytest.fixture(scope="module")
def pair():
    return _population("a", GammaDfe(0.3, 300.0), 1), _population("b", GammaDfe(0.5, 50.0), 2)


def test_joint_fit_loglik_is_the_objective_at_its_parameters(pair):
    # The joint maximum reported must be the sum of the two populations' profile
    # log-likelihoods at the returned shared vector (evaluated afresh here), the vector
    # within the model's bounds, and no better than the separate fits (the shared DFE is
    # a special case of separate ones).
    pa, pb = pair
    model = DfeModel("gamma")
    objs = [Objective(p.data, model, eps=0.0) for p in pair]
    zero = [np.zeros(model.n_free)] * 2
    fa, fb = pa.fits["gamma"], pb.fits["gamma"]
    ll, z, _ok = _joint_fit(objs, model, zero, _starts(model, fa, fb, objs, zero))
    lo, hi = np.array(model.bounds()).T
    assert np.all(z >= lo) and np.all(z <= hi)
    assert ll == -(objs[0](z) + objs[1](z))
    assert ll <= fa.loglik + fb.loglik + 1e-6


def test_joint_fit_converged(pair):
    rows = compare_pair(*pair, DfeModel("gamma"), FitOptions(eps=0.0), tests=("shared_dfe_lrt",))
    assert rows[0].extra["converged"] is True
    assert "did not converge" not in rows[0].note


def test_joint_fit_not_converged_is_recorded_and_warned(pair, failing_optimizer):
    opts = FitOptions(eps=0.0)
    with pytest.warns(ConvergenceWarning, match="a vs b / gamma: the joint fit"):
        rows = compare_pair(*pair, DfeModel("gamma"), opts, tests=("shared_dfe_lrt",))
    assert rows[0].extra["converged"] is False
    assert "did not converge" in rows[0].note


def test_a_pair_with_a_fit_that_did_not_converge_is_written_with_its_warning(pair):
    # A fit that did not converge still gives rows, each noting it, and one warning:
    # never a silent number.
    import dataclasses

    pa, pb = pair
    bad = PopulationFit(
        "b", pb.data, {"gamma": dataclasses.replace(pb.fits["gamma"], success=False)}
    )
    with pytest.warns(ConvergenceWarning, match="'b' did not converge"):
        rows = compare_pair(
            pa, bad, DfeModel("gamma"), FitOptions(eps=0.0), tests=("shared_dfe_lrt",)
        )
    assert "did not converge: the tests that use it are unreliable" in rows[0].note


def test_minimisation_runs_with_one_blas_thread():
    # threadpoolctl's own report of the BLAS libraries, read inside the objective: one
    # thread each during the minimisation, the caller's setting restored after it.
    from threadpoolctl import threadpool_info, threadpool_limits

    seen = []

    def f(x):
        seen.append({i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"})
        return float((x[0] - 0.3) ** 2)

    with threadpool_limits(limits=2, user_api="blas"):
        before = {i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"}
        minimize_multistart(f, [np.array([0.0])], [(-1.0, 1.0)])
        after = {i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"}
    if not before or before == {1}:
        pytest.skip("no BLAS library with more than one thread here")
    assert seen and all(s == {1} for s in seen)
    assert after == before
