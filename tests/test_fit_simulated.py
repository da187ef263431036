"""Recovery of the DFE from forward Wright–Fisher simulations (``driftband simulate``).

The simulator uses no diffusion mathematics (selection p' = p(1+s+sp)/(1+2sp) and binomial
drift each generation), so agreement with the Poisson-random-field fit is a check of the
whole chain against the population-genetic model itself. Accuracy asked here: the
effectively neutral share (|Ne·s| < 1) within ±0.03 of the truth with ~1e5 selected
sites. The truth is the gamma DFE's band share computed with scipy.special.gammainc.
"""

import numpy as np
import pytest
from scipy.special import gammainc

from driftband.fit.likelihood import SpectrumPair
from driftband.fit.mle import fit_model
from driftband.fit.models import DfeModel
from driftband.simulate import build_populations, parse_dfe, simulate_study

SHAPE, MEAN_S = 0.3, 200.0
# Share with |Ne s| < 1, i.e. t = -S < 4, of Gamma(shape, mean): P(shape, 4 * shape / mean).
TRUE_NEUTRAL_SHARE = float(gammainc(SHAPE, 4.0 * SHAPE / MEAN_S))


def _simulate(history, seed, n_present):
    pops = build_populations([f"p:N={n_present},n=20"], history)
    study = simulate_study(
        pops,
        parse_dfe(f"gamma:shape={SHAPE},mean={MEAN_S}"),
        theta=0.02,
        sites={"0fold": 100_000, "4fold": 100_000},
        blocks=10,
        seed=seed,
    )
    return study.spectra.populations["p"]


def _share(pop, equilibrium):
    data = SpectrumPair.from_population(pop)
    f = fit_model(data, DfeModel("gamma"), eps=0.0, equilibrium=equilibrium, stderr=False)
    assert f.success
    return f.shares[0]


def test_truth_value():
    # Monte Carlo check of the scipy.special.gammainc value (beta = 0.3): 4e5 gamma draws
    # from numpy, within 4.4 binomial standard errors (sd 6.8e-4).
    t = np.random.default_rng(0).gamma(SHAPE, MEAN_S / SHAPE, size=400_000)
    assert np.mean(t < 4) == pytest.approx(TRUE_NEUTRAL_SHARE, abs=3e-3)


def test_equilibrium_recovery():
    pop = _simulate([], seed=101, n_present=300)
    assert _share(pop, equilibrium=False) == pytest.approx(TRUE_NEUTRAL_SHARE, abs=0.03)
    assert _share(pop, equilibrium=True) == pytest.approx(TRUE_NEUTRAL_SHARE, abs=0.03)


def test_recovery_after_expansion_with_nuisance_factors():
    # Four-fold expansion 60 generations ago (0.1 x 2N of the ancestral size 300): the
    # spectra are distorted towards rare variants; the nuisance factors absorb it.
    pop = _simulate(["0:1200,60:300"], seed=202, n_present=1200)
    with_r = _share(pop, equilibrium=False)
    assert with_r == pytest.approx(TRUE_NEUTRAL_SHARE, abs=0.03)
