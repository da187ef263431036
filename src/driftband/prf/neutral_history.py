r"""Neutral spectra under a size history, from the coalescent (fast; no I/O).

The number of lineages of a sample of ``n`` gene copies, followed back in time, is a
pure-death Markov chain: with ``k`` lineages in an epoch of size :math:`\nu N_{anc}` they
coalesce at rate :math:`\binom{k}{2}/\nu` per :math:`2N_{anc}` generations (Kingman
1982; Griffiths & Tavaré 1994 for variable size). All rates of an epoch scale by the same
factor :math:`1/\nu(t)`, so the chain over an epoch is :math:`\exp(Q_0\Lambda)` with
:math:`\Lambda = \int dt/\nu(t)` exact also for exponential epochs. The expected time
:math:`T_k` spent with ``k`` lineages is the integral of the state probabilities:
per constant epoch from one block matrix exponential (Van Loan 1978), per exponential
epoch by the same over substeps (Richardson-extrapolated), and over the infinite
ancestral epoch
:math:`-Q_0^{-1}p`. The expected spectrum is then (Griffiths & Tavaré 1998; Polanski &
Kimmel 2003)

.. math::

    E[\xi_i] = \frac{\theta_{anc} L}{2} \sum_{k=2}^{n} k\,T_k\,
        \frac{\binom{n-i-1}{k-2}}{\binom{n-1}{k-1}},

which at constant size gives Fu's (1995) :math:`\theta L / i`. This is the neutral class
of :class:`driftband.prf.history.HistorySfs` at ``S = 0`` with the ancestral reference, in
milliseconds instead of a solve of the diffusion: what a fit of the history to the
neutral class needs.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.linalg import expm
from scipy.special import gammaln

from .expected import _check_n
from .history import History

__all__ = ["lineage_times", "neutral_history_sfs"]

#: Substeps of an exponential epoch per unit of |ln(nu_end / nu_start)| (at least one
#: unit): the size is constant over each, at its geometric midpoint; the error falls as
#: the square of the step, and the runs with this many and twice as many substeps are
#: extrapolated.
EXP_SUBSTEPS = 16


def _generator(n: int) -> np.ndarray:
    """Q_0 over the transient states k = n, n-1, ..., 2 (index n - k), unit size."""
    k = np.arange(n, 1, -1, dtype=float)
    rate = k * (k - 1) / 2.0
    m = k.size
    q = np.diag(-rate)
    q[np.arange(1, m), np.arange(m - 1)] = rate[:-1]  # k -> k - 1
    return q


def _constant_epoch(q: np.ndarray, p: np.ndarray, nu: float, dt: float) -> tuple:
    """State probabilities after ``dt`` at size ``nu`` and the expected time in each
    state during it (Van Loan's block exponential)."""
    m = q.shape[0]
    block = np.zeros((2 * m, 2 * m))
    block[:m, :m] = q * (dt / nu)
    block[:m, m:] = np.eye(m) * dt
    e = expm(block)
    return e[:m, :m] @ p, e[:m, m:] @ p


def _exponential_epoch(
    q: np.ndarray, p: np.ndarray, a: float, b: float, dur: float, m: int
) -> tuple[np.ndarray, np.ndarray]:
    """An exponential epoch from ``nu_start = a`` to ``nu_end = b`` (b at the sample side)
    in ``m`` constant substeps at their geometric midpoints."""
    total = np.zeros_like(p)
    for j in range(m):  # back in time: from nu_end towards nu_start
        nu = b * (a / b) ** ((j + 0.5) / m)
        p, t = _constant_epoch(q, p, nu, dur / m)
        total += t
    return p, total


def lineage_times(n: int, history: History) -> np.ndarray:
    """Expected time with k lineages, k = 2..n, in units of 2 N_anc generations.

    Parameters
    ----------
    n : int
        Sampled gene copies, ``n >= 2``.
    history : a history of :mod:`driftband.prf.history`

    Returns
    -------
    ndarray, shape (n - 1,)
        ``T[k - 2]`` for k = 2..n.

    Examples
    --------
    >>> from driftband.prf.history import ConstantSize
    >>> np.allclose(lineage_times(4, ConstantSize()), [1.0, 1 / 3, 1 / 6])
    True
    """
    n = _check_n(n)
    q = _generator(n)
    p = np.zeros(n - 1)
    p[0] = 1.0  # n lineages at the sample
    total = np.zeros(n - 1)
    for dur, a, b in reversed(history.epochs()):  # from the sample back in time
        if a == b:
            p, t = _constant_epoch(q, p, a, dur)
            total += t
            continue
        # midpoint substeps (error ~ step^2), Richardson-extrapolated from m and 2m
        m = EXP_SUBSTEPS * max(1, math.ceil(abs(math.log(b / a))))
        runs = [_exponential_epoch(q, p, a, b, dur, k) for k in (m, 2 * m)]
        (p1, t1), (p2, t2) = runs
        p, t = (4 * p2 - p1) / 3, (4 * t2 - t1) / 3
        total += t
    total += np.linalg.solve(-q, p)  # the ancestral epoch, nu = 1, forever
    return total[::-1]  # k = 2..n


def neutral_history_sfs(n: int, history: History) -> np.ndarray:
    r"""Expected neutral spectrum per unit :math:`\theta_{anc} L`, classes 1..n-1.

    Parameters
    ----------
    n : int
        Sampled gene copies.
    history : a history of :mod:`driftband.prf.history`

    Returns
    -------
    ndarray, shape (n - 1,)

    Examples
    --------
    >>> from driftband.prf.history import ConstantSize
    >>> np.allclose(neutral_history_sfs(5, ConstantSize()), [1, 1 / 2, 1 / 3, 1 / 4])
    True
    """
    n = _check_n(n)
    t = lineage_times(n, history)
    k = np.arange(2, n + 1)
    i = np.arange(1, n)
    # P(i | k) = C(n-i-1, k-2) / C(n-1, k-1), zero where n - i - 1 < k - 2
    a = (n - i - 1)[:, None]
    b = (k - 2)[None, :]
    with np.errstate(invalid="ignore"):
        logc = (
            gammaln(a + 1)
            - gammaln(b + 1)
            - gammaln(np.maximum(a - b, 0) + 1)
            - (gammaln(n) - gammaln(k) - gammaln(n - k + 1))[None, :]
        )
    p_ik = np.where(a >= b, np.exp(logc), 0.0)
    return 0.5 * (p_ik * (k * t)[None, :]).sum(axis=1)
