"""Size histories fitted to the neutral class (fit.history_fit).

Checks: on spectra equal to their expectation the fit returns the history it came from
(the maximiser of a Poisson likelihood is its mean, Gibbs' inequality); on spectra of
msprime's coalescent with mutations (an outside simulator) a recent decline is found and
preferred by AIC over constant size; bad requests are refused in one line.
"""

from __future__ import annotations

import numpy as np
import pytest

from driftband.exceptions import OptionError
from driftband.fit.history_fit import HISTORY_MODELS, compare_histories, fit_neutral_history
from driftband.fit.likelihood import SpectrumPair
from driftband.prf.history import ExponentialChange, OneChange, TwoChanges
from driftband.prf.neutral_history import neutral_history_sfs

N = 16
L = 1e7
THETA = 0.005


def _pair(x, folded=False):
    z = np.ones_like(x)
    return SpectrumPair(N, folded, np.asarray(x, float), z, L, L, None, None)


def _exact(h, eps=0.0):
    g = neutral_history_sfs(N, h)
    return THETA * L * ((1 - eps) * g + eps * g[::-1])


@pytest.mark.parametrize(
    "model, h, want",
    [
        ("one-change", OneChange(0.2, 0.1), {"nu": 0.2, "tau": 0.1}),
        ("one-change", OneChange(5.0, 0.05), {"nu": 5.0, "tau": 0.05}),
        pytest.param(  # about 12 s: every evaluation solves the exponential epoch
            "growth",
            ExponentialChange(8.0, 0.2),
            {"nu": 8.0, "tau": 0.2},
            marks=pytest.mark.slow,
        ),  # fmt: skip
    ],
)
def test_exact_spectra_give_back_their_history(model, h, want):
    f = fit_neutral_history(_pair(_exact(h, eps=0.02)), model)
    assert f.success and not f.at_bounds
    for k, v in want.items():
        assert f.params[k] == pytest.approx(v, rel=2e-3), (k, f.params)
    assert f.eps == pytest.approx(0.02, rel=2e-3)
    assert f.theta == pytest.approx(THETA, rel=2e-3)


def test_two_changes_and_folded_spectra():
    h = TwoChanges(0.1, 0.05, 2.0, 0.1)
    f = fit_neutral_history(_pair(_exact(h)), "two-change", eps=0.0)
    got = [f.params[k] for k in ("nu1", "tau1", "nu2", "tau2")]
    np.testing.assert_allclose(got, [0.1, 0.05, 2.0, 0.1], rtol=5e-3)
    g = _exact(OneChange(0.3, 0.2))
    folded = g[: N // 2].copy()
    folded[: N // 2 - 1] += g[::-1][: N // 2 - 1]
    ff = fit_neutral_history(SpectrumPair(N, True, folded, np.ones(N // 2), L, L), "one-change")
    assert ff.eps == 0.0
    assert ff.params["nu"] == pytest.approx(0.3, rel=2e-3)
    assert ff.params["tau"] == pytest.approx(0.2, rel=2e-3)


def test_aic_prefers_the_true_model_on_exact_spectra():
    eq = compare_histories(_pair(THETA * L / np.arange(1, N)), ["equilibrium", "one-change"])
    assert eq[0].model == "equilibrium"  # others gain nothing over their penalty
    dec = compare_histories(_pair(_exact(OneChange(0.2, 0.1))), ["equilibrium", "one-change"])
    assert dec[0].model == "one-change" and dec[1].aic - dec[0].aic > 100


def test_a_decline_simulated_by_msprime_is_found():
    """msprime: N = 2000 falling to 400 at 400 generations ago (nu 0.2, tau 0.1 in units
    of 2 N_anc), 10 diploid samples, mutations on a 20 Mb sequence with recombination."""
    msprime = pytest.importorskip("msprime")
    dem = msprime.Demography()
    dem.add_population(name="p", initial_size=400)
    dem.add_population_parameters_change(time=400, population="p", initial_size=2000)
    ts = msprime.sim_ancestry(
        samples={"p": N // 2}, demography=dem, sequence_length=2e7,
        recombination_rate=1e-8, random_seed=3,
    )  # fmt: skip
    ts = msprime.sim_mutations(ts, rate=2.5e-8, random_seed=4, discrete_genome=False)
    afs = ts.allele_frequency_spectrum(mode="site", polarised=True, span_normalise=False)
    x = np.asarray(afs[1:N], float)
    d = SpectrumPair(N, False, x, np.ones(N - 1), 2e7, 2e7, None, None)
    fits = {f.model: f for f in compare_histories(d, ["equilibrium", "one-change"])}
    f = fits["one-change"]
    assert fits["equilibrium"].aic - f.aic > 10
    assert 0.1 < f.params["nu"] < 0.4 and 0.05 < f.params["tau"] < 0.2, f.params
    # theta on the ancestral size: 4 * 2000 * 2.5e-8 = 2e-4 per site
    assert f.theta == pytest.approx(2e-4, rel=0.2)


def test_bad_requests_are_refused():
    with pytest.raises(OptionError, match="unknown size-history model 'bottle'"):
        fit_neutral_history(_pair(_exact(OneChange(0.2, 0.1))), "bottle")
    small = SpectrumPair(4, False, np.array([10.0, 5.0, 3.0]), np.ones(3), L, L)
    with pytest.raises(OptionError, match="two-change history has 4 parameters"):
        fit_neutral_history(small, "two-change")
    assert set(HISTORY_MODELS) == {"equilibrium", "one-change", "two-change", "growth"}
