"""Neutral spectra under size histories from the coalescent (prf.neutral_history).

Outside checks: Fu's (1995) neutral spectrum theta/i at constant size (closed form);
msprime's coalescent for the same history (expected branch lengths per frequency class,
averaged over replicates, tolerance from their standard error); the total branch length
E[L] = sum_k k T_k (Kingman's coalescent, common practice). The diffusion solver of
prf.history at S = 0 is a second, independent method of this package.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from driftband.prf.history import (
    ConstantSize,
    Epochs,
    ExponentialChange,
    HistorySfs,
    OneChange,
    TwoChanges,
)
from driftband.prf.neutral_history import lineage_times, neutral_history_sfs

msprime = pytest.importorskip("msprime")


@pytest.mark.parametrize("n", [2, 3, 10, 50, 200])
def test_constant_size_is_fu_theta_over_i(n):
    got = neutral_history_sfs(n, ConstantSize())
    np.testing.assert_allclose(got, 1.0 / np.arange(1, n), rtol=1e-10)
    # Kingman: E[T_k] = 1 / C(k, 2) in units of 2N generations
    k = np.arange(2, n + 1)
    np.testing.assert_allclose(lineage_times(n, ConstantSize()), 2.0 / (k * (k - 1)), rtol=1e-10)


HISTORIES = [
    OneChange(0.25, 0.2),
    OneChange(10.0, 0.05),
    TwoChanges(0.05, 0.02, 2.0, 0.3),
    ExponentialChange(5.0, 0.3),
    ExponentialChange(0.05, 0.1),
    Epochs(((0.2, 0.5, 0.5), (0.1, 0.5, 20.0))),
]


@pytest.mark.parametrize("h", HISTORIES, ids=lambda h: type(h).__name__)
def test_agrees_with_the_diffusion_solver_at_s_0(h):
    n = 12
    ours = neutral_history_sfs(n, h)
    pde = HistorySfs(n, h, reference="ancestral").g(0.0)
    np.testing.assert_allclose(ours, pde, rtol=2e-5)
    # the spectrum's total is (theta/2) times the expected total branch length
    k = np.arange(2, n + 1)
    assert math.isclose(ours.sum(), 0.5 * (k * lineage_times(n, h)).sum(), rel_tol=1e-12)


def _msprime_mean(h, n, n_anc=1000, reps=3000):
    dem = msprime.Demography()
    dem.add_population(name="p", initial_size=n_anc * h.nu_now)
    t = 0.0
    for dur, a, b in reversed(h.epochs()):
        g0 = t * 2 * n_anc
        rate = 0.0 if a == b else math.log(b / a) / (dur * 2 * n_anc)
        dem.add_population_parameters_change(
            time=g0, population="p", initial_size=n_anc * b, growth_rate=rate
        )
        t += dur
    dem.add_population_parameters_change(
        time=t * 2 * n_anc, population="p", initial_size=n_anc, growth_rate=0.0
    )
    dem.sort_events()
    ts_iter = msprime.sim_ancestry(
        samples={"p": n // 2}, demography=dem, sequence_length=1, num_replicates=reps,
        random_seed=5,
    )  # fmt: skip
    afs = np.array(
        [
            ts.allele_frequency_spectrum(mode="branch", polarised=True, span_normalise=True)[1:n]
            for ts in ts_iter
        ]
    )
    # branch lengths in generations; per unit theta_anc = 4 N_anc mu: divide by 4 N_anc
    return afs.mean(axis=0) / (4 * n_anc), afs.std(axis=0, ddof=1) / (4 * n_anc) / math.sqrt(reps)


@pytest.mark.parametrize(
    "h", [OneChange(0.25, 0.2), ExponentialChange(5.0, 0.3)], ids=["decline", "growth"]
)
def test_agrees_with_msprime(h):
    n = 10
    mean, se = _msprime_mean(h, n)
    ours = neutral_history_sfs(n, h)
    assert np.all(np.abs(ours - mean) < 4.5 * se), (ours, mean, se)
