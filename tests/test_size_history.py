"""Fits of a DFE given an explicit size history (two-step: history, then DFE)."""

from __future__ import annotations

import numpy as np
import pytest

from driftband.exceptions import OptionError
from driftband.fit.likelihood import SpectrumPair
from driftband.fit.mle import fit_model
from driftband.fit.models import DfeModel
from driftband.fit.size_history import check_demography, choose_history, prepare_history
from driftband.prf.dfe import DfeExpectation
from driftband.prf.expected import kernel
from driftband.prf.families import GammaDfe, band_shares
from driftband.prf.history import ConstantSize, HistorySfs, OneChange
from driftband.prf.history_table import FIT_RESOLUTION, HistoryKernel
from driftband.prf.neutral_history import neutral_history_sfs

OFF_NODE = np.array([-3e4, -777.0, -61.0, -4.4, -0.37, -0.004, 0.02, 0.7, 13.0, 240.0])


def test_constant_size_is_the_equilibrium_kernel_exactly():
    # Sawyer & Hartl (1992): at constant size the spectrum is the equilibrium PRF one
    k = HistoryKernel(12, ConstantSize())
    assert np.allclose(k.g(OFF_NODE), kernel(12).g(OFF_NODE), rtol=1e-13)
    assert np.allclose(k.neutral(), 1.0 / np.arange(1, 12), rtol=1e-13)


def test_an_old_change_leaves_the_equilibrium_at_the_current_size():
    # A change 5 x 2N_anc generations ago (20 x 2N_now for a four-fold decline) has been
    # forgotten: the spectrum on the current size is the equilibrium one (Kimura 1964's
    # diffusion relaxes to its stationary density; common practice)
    n = 12
    k = HistoryKernel(n, OneChange(0.25, 5.0), beneficial=True)
    g, ref = k.g(OFF_NODE), kernel(n).g(OFF_NODE)
    big = ref >= 1e-6 * ref.sum(axis=1, keepdims=True)
    assert np.max(np.abs(g / ref - 1)[big]) < 1e-4


def test_the_neutral_class_is_the_coalescent_spectrum():
    # Griffiths & Tavare / Polanski & Kimmel: the neutral spectrum of the history, on the
    # current size (divided by nu_now)
    h = OneChange(0.3, 0.2)
    k = HistoryKernel(10, h)
    assert np.allclose(k.neutral(), neutral_history_sfs(10, h) / 0.3, rtol=1e-12)
    assert np.allclose(k.g(0.0), k.neutral(), rtol=1e-9)


def test_table_follows_the_solver_between_its_nodes():
    # the interpolated table against the same solver at the same resolution, on the
    # classes holding at least 1e-3 of each spectrum
    n = 12
    h = OneChange(0.25, 0.05)
    k = HistoryKernel(n, h, beneficial=True)
    ref = HistorySfs(n, h, "current", FIT_RESOLUTION).table(OFF_NODE)
    big = ref >= 1e-3 * ref.sum(axis=1, keepdims=True)
    assert np.max(np.abs(k.g(OFF_NODE) / ref - 1)[big]) < 2e-2


def test_a_table_without_the_beneficial_side_refuses_positive_S():
    k = HistoryKernel(8, OneChange(0.5, 0.1))
    assert np.all(k.nodes <= 0)
    with pytest.raises(ValueError, match="no beneficial S"):
        k.g(3.0)


def test_beneficial_derivative_matches_differences():
    k = HistoryKernel(10, OneChange(0.5, 0.1), beneficial=True)
    for s in (0.3, 7.0, 90.0):
        num = (k.g(s * (1 + 1e-6)) - k.g(s * (1 - 1e-6))) / (2e-6 * s)
        assert np.allclose(k.dg_beneficial(s), num, rtol=1e-4, atol=1e-12)


def _data(n, history, dfe, seed, L=1e6, theta=0.01):
    k = HistoryKernel(n, history)
    ex = DfeExpectation(n, k)
    rng = np.random.default_rng(seed)
    xn = rng.poisson(theta * L * k.neutral()).astype(float)
    xs = rng.poisson(theta * L * ex.mean_g(dfe)).astype(float)
    return SpectrumPair(n, False, xn, xs, L, L, None, None)


def test_two_step_fit_recovers_history_and_shares_on_the_current_size():
    dfe = GammaDfe(0.3, 400.0)
    d = _data(12, OneChange(0.25, 0.1), dfe, seed=3)
    fh = prepare_history(d, "one-change", eps=0.0)
    assert fh.params["nu"] == pytest.approx(0.25, rel=0.1)
    assert fh.params["tau"] == pytest.approx(0.1, rel=0.15)
    f = fit_model(d, DfeModel("gamma"), eps=0.0, history=fh)
    true = band_shares(dfe, f.band_edges)
    assert np.max(np.abs(f.shares - true)) < 0.03
    # nu, tau, theta, shape, mean: five parameters
    assert f.n_params == 5
    assert f.size_history is not None and f.size_history["model"] == "one-change"
    # the nuisance-factor fit ties S to no size: on these data its share is off by more
    f0 = fit_model(d, DfeModel("gamma"), eps=0.0)
    assert abs(f0.shares[0] - true[0]) > abs(f.shares[0] - true[0])


def test_auto_picks_a_change_over_equilibrium():
    n, L = 12, 1e6
    xn = np.random.default_rng(5).poisson(0.01 * L * neutral_history_sfs(n, OneChange(0.2, 0.05)))
    d = SpectrumPair(n, False, xn.astype(float), np.ones(n - 1), L, L, None, None)
    best, cand = choose_history(d, "auto", eps=0.0)
    assert set(cand) == {"equilibrium", "one-change", "two-change", "growth"}
    assert best.model != "equilibrium"
    assert cand["equilibrium"] > cand[best.model] + 10


def test_demography_choices_are_checked():
    assert check_demography(" demes:model.yaml ") == "demes:model.yaml"
    with pytest.raises(OptionError, match="choose one of nuisance"):
        check_demography("bottleneck")
    with pytest.raises(OptionError, match="needs unfolded spectra"):
        prepare_history(
            SpectrumPair(10, True, np.ones(5), np.ones(5), 1e4, 1e4, None, None), "one-change"
        )


def test_auto_keeps_the_history_when_it_fits_better_than_nuisance_factors():
    # data made under a one-change history (exact model): auto's history beats the
    # nuisance factors on AIC (n - 2 extra parameters buy nothing), and says so
    from driftband.fit.api import fit_population
    from driftband.fit.options import FitOptions

    d = _data(10, OneChange(0.25, 0.1), GammaDfe(0.3, 400.0), seed=7)
    pf = fit_population(d, FitOptions(eps=0.0, demography="auto"), "lake")
    h = pf.fits["gamma"].size_history
    assert h is not None and h["model"] != "nuisance"
    assert min(h["aic_history"].values()) < min(h["aic_nuisance_factors"].values())


def test_a_fitted_history_reads_back_as_simulate_history():
    # one parameterisation: tau in units of 2 N_anc generations, nu = N / N_anc, as
    # simulate's `--history AGO:SIZE` epochs (a change tau ago is 2 * N_anc * tau
    # generations before the sample)
    from driftband.fit.size_history import simulate_history_option
    from driftband.simulate._model import parse_history

    summary = {
        "model": "two-change",
        "params": {"nu1": 0.1, "tau1": 0.02, "nu2": 1.5, "tau2": 0.05},
    }
    text = simulate_history_option(summary, "lake", ancestral_size=1000)
    name, epochs = parse_history(text)
    assert name == "lake"
    # 1,500 for the last 2 * 1000 * 0.05 = 100 generations, 100 for the 40 before
    assert sorted(epochs) == [(0, 1500), (100, 100), (140, 1000)]
    growth = {"model": "growth", "params": {"nu": 2.0, "tau": 0.1}}
    assert simulate_history_option(growth, "lake") is None


def test_only_equilibrium_fixes_the_nuisance_factors_of_fits_without_a_history():
    # a bootstrap refit or a comparison of a population for which auto kept the nuisance
    # factors has no history: it must refit with nuisance factors, not at equilibrium
    from driftband.fit.options import FitOptions

    assert FitOptions(demography="equilibrium").equilibrium
    for d in ("nuisance", "auto", "one-change", "demes:x.yaml"):
        assert not FitOptions(demography=d).equilibrium


def test_auto_keeps_nuisance_factors_when_no_history_explains_the_distortion():
    # both classes distorted class by class alike (r_i, as by sampling or structure;
    # Eyre-Walker, Woolfit & Phelps 2006): the nuisance factors fit, a size history cannot
    from driftband.fit.api import fit_population
    from driftband.fit.options import FitOptions

    n, L, theta = 8, 1e7, 0.01
    dfe = GammaDfe(0.3, 400.0)
    r = np.array([1.0, 1.6, 0.7, 1.5, 0.6, 1.4, 0.8])
    xn = theta * L * r / np.arange(1, n)
    xs = theta * L * r * DfeExpectation(n).mean_g(dfe)
    d = SpectrumPair(n, False, np.round(xn), np.round(xs), L, L, None, None)
    pf = fit_population(d, FitOptions(eps=0.0, demography="auto"), "pond")
    f = pf.fits["gamma"]
    assert f.size_history is not None and f.size_history["model"] == "nuisance"
    assert not f.equilibrium  # the nuisance factors are free
    assert min(f.size_history["aic_nuisance_factors"].values()) < min(
        f.size_history["aic_history"].values()
    )
    assert np.max(np.abs(f.shares - band_shares(dfe, f.band_edges))) < 0.01
