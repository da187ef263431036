"""Fixation probabilities: Kimura's diffusion formula against the exact Wright-Fisher chain.

The exact reference is a diploid Wright-Fisher model (fitnesses 1 : 1+s : 1+2s, selection
then binomial sampling of 2N genes) solved as an absorbing Markov chain with numpy/scipy
(an outside, assumption-free computation). Checked against it:

- Kimura (1962), u = (1 - e^{-2s}) / (1 - e^{-4Ns}) for a new mutant (from memory);
- Haldane (1927), u ~ 2s for 1/(2N) << s << 1 (from memory), and the Poisson branching
  process it comes from, 1 - u = exp(-(1+s) u);
- the neutral value u = 1/(2N) (common practice: fixation probability = initial
  frequency);
- driftband.prf.fixation_ratio, S/(1 - e^{-S}), the ratio to neutral used for divergence.

Expected sizes of the differences are from the project's NUMERICS notes, section 5.
"""

import functools
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq
from scipy.stats import binom

from driftband.prf import fixation_ratio


@functools.cache
def wf_fixation(N: int, s: float) -> np.ndarray:
    """Exact fixation probability from every state j = 0..2N of the diploid WF chain."""
    M = 2 * N
    p = np.arange(M + 1) / M
    pp = p * (1 + s + s * p) / (1 + 2 * s * p)  # after selection, genotypes 1 : 1+s : 1+2s
    P = binom.pmf(np.arange(M + 1)[None, :], M, pp[:, None])
    inner = slice(1, M)
    Q = P[inner, inner]
    b = P[inner, M]
    u = np.linalg.solve(np.eye(M - 1) - Q, b)
    return np.concatenate(([0.0], u, [1.0]))


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


# NUMERICS section 5: relative difference |WF - Kimura| / Kimura at N = 50, 100, 200.
NUMERICS_DIFF = {-4: (0.054, 0.027, 0.014), -1: (0.0024, 0.0012, 0.0006),
                 1: (0.0015, 0.0008, 0.0004), 4: (0.011, 0.0056, 0.0028),
                 10: (0.022, 0.011, 0.0057)}


@pytest.mark.parametrize("S", sorted(NUMERICS_DIFF))
def test_kimura_against_exact_wright_fisher(S):
    # Source: Kimura (1962) vs the exact chain; the difference is O(1/N) at fixed S = 4Ns
    # and has the sizes listed in NUMERICS section 5 (to 30% here, from rounding there).
    diffs = []
    for N in (50, 100, 200):
        s = S / (4 * N)
        diffs.append(abs(wf_fixation(N, s)[1] / kimura(N, s) - 1))
    assert_allclose(diffs, NUMERICS_DIFF[S], rtol=0.3)
    # halving with each doubling of N (diffusion error ~ 1/N)
    ratios = np.array(diffs[:-1]) / np.array(diffs[1:])
    assert np.all((ratios > 1.7) & (ratios < 2.3))


def test_kimura_from_other_starting_frequencies():
    # Source: Kimura (1962) u(p) for p = j/(2N); N = 200, S = 4Ns = 8.
    N, s = 200, 8 / 800
    u = wf_fixation(N, s)
    for j in (5, 40, 200, 380):
        assert_allclose(u[j], kimura(N, s, j), rtol=0.01)


def test_ratio_to_neutral_matches_fixation_ratio():
    # NUMERICS section 5 table: 2N u from the exact chain at N = 100 (4 digits), and
    # driftband's S/(1 - e^{-S}) (Kimura 1962 without the (1-e^{-2s})/(2s) factor).
    N = 100
    table = {-4: 0.0733, -1: 0.5828, 1: 1.577, 4: 4.012, 10: 9.645, 40: 35.11}
    for S, v in table.items():
        s = S / (4 * N)
        r = 2 * N * wf_fixation(N, s)[1]
        assert_allclose(r, v, rtol=1e-3)
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
    # 2s is the first-order value; the relative error is about s (1.4% at s = 0.01,
    # 6% at s = 0.05 in NUMERICS section 5)
    assert abs(u / (2 * s) - 1) < 1.5 * s
    # Kimura's diffusion value drifts off as s grows (0.0952 vs 0.0937 at s = 0.05,
    # NUMERICS section 5)
    assert_allclose(u, kimura(N, s), rtol=s / 2)


def test_deleterious_mutants_rarely_fix():
    # Common practice: with |s| >> 1/(2N), deleterious mutants fix far less often than
    # neutral ones (ratio ~ |S| e^{-|S|}); N = 100, S = -20.
    N = 100
    s = -20 / (4 * N)
    r = 2 * N * wf_fixation(N, s)[1]
    assert r < 1e-7
    assert_allclose(r, 1.63e-8, rtol=0.01)  # NUMERICS section 5 table
