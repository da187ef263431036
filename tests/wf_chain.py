"""The exact diploid Wright-Fisher chain, a reference for fixation probabilities in tests.

Genotype fitnesses 1 : 1+s : 1+2s; each generation selection moves the derived-allele
frequency p to p' = p (1 + s + s p) / (1 + 2 s p) (genotype frequencies weighted by their
fitnesses over the mean fitness 1 + 2 s p), then 2N gene copies are drawn binomially with
probability p'. Fixation probabilities from every state solve the absorbing-chain system
(I - Q) u = P[:, 2N] over the transient states (standard absorbing Markov chain; numpy and
scipy only). No diffusion mathematics and no driftband code.
"""

from __future__ import annotations

import functools

import numpy as np
from scipy.stats import binom


@functools.cache
def wf_fixation(N: int, s: float) -> np.ndarray:
    """Exact fixation probability from every state j = 0..2N of the diploid WF chain.

    Parameters
    ----------
    N : int
        Diploid population size (2N gene copies).
    s : float
        Selection coefficient, fitnesses 1 : 1+s : 1+2s; needs s > -1/2.

    Returns
    -------
    numpy.ndarray
        Shape (2N + 1,), float64: entry j is the probability that an allele at j copies
        fixes (entry 0 is 0, entry 2N is 1). Cached: do not modify it.
    """
    M = 2 * N
    p = np.arange(M + 1) / M
    pp = p * (1 + s + s * p) / (1 + 2 * s * p)
    P = binom.pmf(np.arange(M + 1)[None, :], M, pp[:, None])
    inner = slice(1, M)
    u = np.linalg.solve(np.eye(M - 1) - P[inner, inner], P[inner, M])
    out = np.concatenate(([0.0], u, [1.0]))
    out.flags.writeable = False
    return out
