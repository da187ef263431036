"""Fixation probabilities: Kimura's diffusion formula against the exact Wright-Fisher chain.

The exact reference is a diploid Wright-Fisher model (fitnesses 1 : 1+s : 1+2s, selection
then binomial sampling of 2N genes) solved as an absorbing Markov chain with numpy/scipy
(tests/wf_chain.py: an outside, assumption-free computation). Checked against it:

- Kimura (1962), u = (1 - e^{-2s}) / (1 - e^{-4Ns}) for a new mutant (from memory);
- Haldane (1927), u ~ 2s for 1/(2N) << s << 1 (from memory), and the Poisson branching
  process it comes from, 1 - u = exp(-(1+s) u);
- the neutral value u = 1/(2N) (common practice: fixation probability = initial
  frequency);
- driftband.prf.fixation_ratio, S/(1 - e^{-S}), the ratio to neutral used for divergence.

The diffusion approximation is off by O(1/N) at fixed S = 4Ns (common practice); the
tests check that law on the exact chain rather than tabulated sizes of the differences.
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from driftband.prf import fixation_ratio
from wf_chain import wf_fixation


def kimura(N: int, s: float, j: int = 1) -> float:
    """Kimura (1962): u(p) = (1 - e^{-4Nsp}) / (1 - e^{-4Ns}), p = j / (2N)."""
    if s == 0:
        return j / (2 * N)
    p = j / (2 * N)
    return math.expm1(-4 * N * s * p) / math.expm1(-4 * N * s)


@pytest.mark.parametrize("N", [50, 100, 200])
def test_neutral_fixation_is_initial_frequency(N):
    # Common practice: with no selection the allele frequency is a martingale.
    u = wf_fixation(N, 0.0)
    assert_allclose(u, np.arange(2 * N + 1) / (2 * N), atol=1e-12)
    assert_allclose(u[1], 1 / (2 * N), rtol=1e-10)


@pytest.mark.parametrize("S", [-4, -1, 1, 4, 10])
def test_kimura_against_exact_wright_fisher(S):
    # Source: Kimura (1962) vs the exact chain at N = 50, 100, 200 with S = 4Ns fixed: the
    # diffusion error is O(1/N) (common practice), so the relative difference halves with
    # each doubling of N, and it is small: under 2% at N = 200 for |S| <= 10.
    diffs = []
    for N in (50, 100, 200):
        s = S / (4 * N)
        diffs.append(abs(wf_fixation(N, s)[1] / kimura(N, s) - 1))
    ratios = np.array(diffs[:-1]) / np.array(diffs[1:])
    assert np.all((ratios > 1.7) & (ratios < 2.3))
    assert 0 < diffs[-1] < 0.02


def test_kimura_from_other_starting_frequencies():
    # Source: Kimura (1962) u(p) for p = j/(2N); N = 200, S = 4Ns = 8.
    N, s = 200, 8 / 800
    u = wf_fixation(N, s)
    for j in (5, 40, 200, 380):
        assert_allclose(u[j], kimura(N, s, j), rtol=0.01)


def test_ratio_to_neutral_matches_fixation_ratio():
    # Source: 2N u from the exact chain at N = 100 against driftband's S/(1 - e^{-S})
    # (Kimura 1962 without the (1-e^{-2s})/(2s) factor, about 1 - s).
    N = 100
    for S in (-4, -1, 1, 4, 10, 40):
        s = S / (4 * N)
        r = 2 * N * wf_fixation(N, s)[1]
        # diffusion value, including the factor dropped by the shortcut
        full = float(fixation_ratio(S)) * -math.expm1(-2 * s) / (2 * s)
        assert_allclose(2 * N * kimura(N, s), full, rtol=1e-12)
        assert abs(r / float(fixation_ratio(S)) - 1) < 0.13


@pytest.mark.parametrize("s", [0.01, 0.05])
def test_haldane_two_s(s):
    # Source: Haldane (1927), u ~ 2s for 1/(2N) << s << 1, from the Poisson branching
    # process 1 - u = exp(-(1 + s) u). N = 1000, so 1/(2N) = 5e-4.
    N = 1000
    u = wf_fixation(N, s)[1]
    branching = brentq(lambda x: 1 - x - math.exp(-(1 + s) * x), 1e-9, 1.0)
    assert_allclose(u, branching, rtol=5e-3)
    # 2s is the first-order value: solving u/2 + u^2/3 + O(u^3) = s (the branching
    # equation expanded; derived by hand) gives u = 2s - (8/3) s^2 + O(s^3), a relative
    # error of about -(4/3) s
    assert abs(u / (2 * s) - 1) < 1.5 * s
    assert_allclose(branching / (2 * s) - 1, -4 / 3 * s, rtol=2 * s, atol=0)
    # Kimura's diffusion value, about 1 - e^{-2s} here, drifts off as s grows (0.0952
    # against the branching value 0.0937 at s = 0.05, both computed in this test)
    assert_allclose(u, kimura(N, s), rtol=s / 2)


def test_deleterious_mutants_rarely_fix():
    # Common practice: with |s| >> 1/(2N), deleterious mutants fix far less often than
    # neutral ones (ratio ~ |S| e^{-|S|} = 4.1e-8, Kimura 1962); N = 100, S = -20.
    N, S = 100, -20
    s = S / (4 * N)
    r = 2 * N * wf_fixation(N, s)[1]
    assert r < 1e-7
    assert 0.2 < r / (-S * math.exp(S)) < 1
    # Kimura's value is far off at this N (the chain gives about 40% of it), and the
    # difference shrinks as N grows at fixed S (diffusion limit)
    d100 = abs(r / (2 * N * kimura(N, s)) - 1)
    d200 = abs(wf_fixation(2 * N, S / (8 * N))[1] / kimura(2 * N, S / (8 * N)) - 1)
    assert 0.3 < d100 < 0.8 and d200 < d100 / 1.5
