"""The Wright–Fisher generation: selection on a semidominant diploid, then binomial drift.

Genotype fitnesses 1 : 1+s : 1+2s (semidominance; the README's conventions). Under random
mating the derived-allele frequency after selection is exactly

    p' = p (1 + s + s p) / (1 + 2 s p),

(genotype frequencies p², 2pq, q² weighted by their fitnesses and renormalised by the
mean fitness 1 + 2sp), and the next generation's 2N gene copies are a binomial draw with
probability p'. Nothing here uses diffusion theory.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "FixationResult",
    "selection_step",
    "simulate_fixation",
    "simulate_trajectories",
    "wf_generation",
]


def selection_step(p: np.ndarray | float, s: np.ndarray | float) -> np.ndarray:
    """Derived-allele frequency after one round of selection (before drift).

    Parameters
    ----------
    p : float or ndarray of float
        Derived-allele frequencies in [0, 1].
    s : float or ndarray of float
        Selection coefficients (heterozygote effect; genotype fitnesses 1 : 1+s : 1+2s),
        s >= −0.5. Broadcast against ``p``.

    Returns
    -------
    ndarray of float64
        p (1 + s + s p) / (1 + 2 s p); equal to ``p`` bit for bit where s = 0.

    Examples
    --------
    >>> float(selection_step(0.2, 0.1))  # (0.048 + 0.176) / 1.04
    0.2153846153846154
    """
    p = np.asarray(p, dtype=float)
    s = np.asarray(s, dtype=float)
    sp = s * p
    return p * (1.0 + s + sp) / (1.0 + 2.0 * sp)


def wf_generation(
    counts: np.ndarray, s: np.ndarray, two_n_parent: int, two_n: int, rng: np.random.Generator
) -> np.ndarray:
    """One Wright–Fisher generation of many independent (unlinked) biallelic sites.

    Parameters
    ----------
    counts : ndarray of int64, shape (m,)
        Derived copies among the parents' ``two_n_parent`` gene copies.
    s : ndarray of float64, shape (m,)
        Selection coefficient of each site's derived allele.
    two_n_parent, two_n : int
        Gene copies (2N) of the parent and the offspring generation (they differ at a
        size change).
    rng : numpy.random.Generator

    Returns
    -------
    ndarray of int64, shape (m,)
        Derived copies among the offspring's ``two_n`` gene copies:
        Binomial(two_n, selection_step(counts / two_n_parent, s)).
    """
    p = selection_step(counts / two_n_parent, s)
    # Guard against rounding just outside [0, 1] (p' is a convex combination in exact
    # arithmetic).
    np.clip(p, 0.0, 1.0, out=p)
    return rng.binomial(two_n, p)


@dataclass
class FixationResult:
    """Fates of a cohort of new mutations.

    Attributes
    ----------
    mutations : int
        Cohort size.
    fixed, lost : int
        Mutations absorbed at frequency 1 and 0.
    mean_fixation_time, mean_loss_time : float
        Mean generations to absorption, conditional on the fate (NaN if none).
    """

    mutations: int
    fixed: int
    lost: int
    mean_fixation_time: float
    mean_loss_time: float

    @property
    def probability(self) -> float:
        """Fraction of the cohort that fixed."""
        return self.fixed / self.mutations if self.mutations else float("nan")

    @property
    def standard_error(self) -> float:
        """Binomial standard error of :attr:`probability`."""
        u = self.probability
        return float(np.sqrt(u * (1 - u) / self.mutations)) if self.mutations else float("nan")


def simulate_fixation(
    N: int,
    s: float,
    mutations: int,
    rng: np.random.Generator,
    initial_count: int = 1,
    max_generations: int | None = None,
) -> FixationResult:
    """Follow ``mutations`` independent new mutations until each is lost or fixed.

    Uses the simulator's own generation step (:func:`wf_generation`) at constant size.

    Parameters
    ----------
    N : int
        Diploid population size (2N gene copies).
    s : float
        Selection coefficient (fitnesses 1 : 1+s : 1+2s).
    mutations : int
        Cohort size.
    rng : numpy.random.Generator
    initial_count : int
        Copies at the start (1: a new mutation, frequency 1/(2N)).
    max_generations : int, optional
        Stop after this many generations (default 1000·N, far beyond any absorption
        time); mutations still segregating then count as neither fixed nor lost.

    Returns
    -------
    FixationResult
    """
    two_n = 2 * int(N)
    if not 0 < initial_count < two_n:
        raise ValueError("initial_count must be in 1..2N-1")
    cnt = np.full(int(mutations), int(initial_count), dtype=np.int64)
    sv = np.full(cnt.size, float(s))
    fixed = lost = 0
    tfix = tloss = 0.0
    limit = 1000 * int(N) if max_generations is None else int(max_generations)
    gen = 0
    while cnt.size and gen < limit:
        gen += 1
        cnt = wf_generation(cnt, sv, two_n, two_n, rng)
        nl = int(np.count_nonzero(cnt == 0))
        nf = int(np.count_nonzero(cnt == two_n))
        if nl or nf:
            lost += nl
            fixed += nf
            tloss += gen * nl
            tfix += gen * nf
            keep = (cnt > 0) & (cnt < two_n)
            cnt = cnt[keep]
            sv = sv[keep]
    return FixationResult(
        int(mutations),
        fixed,
        lost,
        tfix / fixed if fixed else float("nan"),
        tloss / lost if lost else float("nan"),
    )


def simulate_trajectories(
    N: int,
    s: float,
    replicates: int,
    generations: int,
    rng: np.random.Generator,
    initial_count: int = 1,
) -> np.ndarray:
    """Allele-count trajectories of independent replicate sites at constant size.

    Parameters
    ----------
    N : int
        Diploid population size.
    s : float
        Selection coefficient.
    replicates : int
        Independent sites.
    generations : int
        Generations to run.
    rng : numpy.random.Generator
    initial_count : int
        Derived copies at generation 0.

    Returns
    -------
    ndarray of int64, shape (generations + 1, replicates)
        Row t holds the derived copies (out of 2N) after t generations; absorbed sites
        stay at 0 or 2N.
    """
    two_n = 2 * int(N)
    out = np.empty((int(generations) + 1, int(replicates)), dtype=np.int64)
    out[0] = int(initial_count)
    sv = np.full(int(replicates), float(s))
    for t in range(1, int(generations) + 1):
        out[t] = wf_generation(out[t - 1], sv, two_n, two_n, rng)
    return out
