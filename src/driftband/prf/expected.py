r"""Expected site frequency spectra under the equilibrium Poisson random field.

For a sample of ``n`` gene copies and scaled selection coefficient :math:`S = 4N_e s`
(fitnesses 1 : 1+s : 1+2s; :math:`S < 0` deleterious), the expected number of sites with
``i`` derived copies, per unit of :math:`\theta L`, is (Sawyer & Hartl 1992)

.. math::

    g_i(S) = \binom{n}{i} \int_0^1 x^{i-1} (1-x)^{n-i-1}
             \frac{1 - e^{-S(1-x)}}{1 - e^{-S}} \, dx, \qquad i = 1, \dots, n-1 .

It is computed by the trapezoid rule in the logit variable :math:`y = \ln(x/(1-x))`:

.. math::

    g_i(S) = \binom{n}{i} \int_{-\infty}^{\infty} x^i (1-x)^{n-i} w_S(x)\, dy,
    \qquad w_S(x) = \frac{1 - e^{-S(1-x)}}{1 - e^{-S}} \in [0, 1].

The integrand is positive, analytic in a strip and decays exponentially in ``y``, so the
trapezoid rule converges geometrically. With step :math:`h = \min(0.6/\sqrt{n}, 0.2)` on
:math:`y \in [-64, 52]` the relative error is about 1e-13 for every ``n`` up to a few
thousand and every :math:`|S| \le 10^8` (measured against mpmath; see
``reference_checks/check_prf_mpmath.py``). One matrix ``A`` (classes x nodes) is built per
``n``; a table of spectra over a grid of ``S`` is then one BLAS product ``W @ A.T``.

No I/O happens here.
"""

from __future__ import annotations

import functools
import math

import numpy as np
from numpy.typing import ArrayLike
from scipy.special import logsumexp

__all__ = [
    "SfsKernel",
    "expected_sfs",
    "fixation_ratio",
    "fold_sfs",
    "kernel",
    "log_fixation_ratio",
    "misorient",
]

#: Logit range of the trapezoid nodes; covers |S| up to about 1e8 for n up to a few 1000.
Y_MIN, Y_MAX = -64.0, 52.0
#: Trapezoid step is ``min(H_SCALE / sqrt(n), H_MAX)``: 0.6/sqrt(n) gives ~1e-13 for n >= 10
#: (0.9/sqrt(n) only 3e-8 at n = 10); for n < 10 it is too coarse at large |S| (2e-11 at
#: n = 4, S = -1e4, measured against mpmath), hence the cap 0.2 (<= 1e-14 there).
H_SCALE = 0.6
H_MAX = 0.2
#: Below this value ``g`` is recomputed in log space by :meth:`SfsKernel.log_g`.
_SAFE_MIN = 1e-280
#: Number of S values processed per block (bounds the memory of the W matrix).
_CHUNK = 512


def _log1mexp(z: np.ndarray) -> np.ndarray:
    """``log(1 - exp(-z))`` for ``z > 0``, accurate for small and large ``z``."""
    z = np.asarray(z, dtype=float)
    out = np.empty_like(z)
    small = z < math.log(2.0)
    out[small] = np.log(-np.expm1(-z[small]))
    out[~small] = np.log1p(-np.exp(-z[~small]))
    return out


def _log_binom(n: int) -> np.ndarray:
    """``log C(n, i)`` for i = 1..n-1, correctly rounded from exact integers.

    (``gammaln(n+1) - gammaln(i+1) - gammaln(n-i+1)`` loses ~2e-12 at n = 2000.)
    """
    half = [math.log(math.comb(n, i)) for i in range(1, n // 2 + 1)]
    full = half + half[: (n - 1) - len(half)][::-1]
    return np.array(full, dtype=float)


def _check_n(n: int) -> int:
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)):
        raise TypeError(f"`n` (sample size) must be an integer, got {type(n).__name__}")
    n = int(n)
    if n < 2:
        raise ValueError(f"`n` (number of sampled gene copies) must be >= 2, got {n}")
    return n


class SfsKernel:
    r"""Expected unfolded spectrum :math:`g_i(S)` for one sample size ``n``.

    Built once per ``n`` (use :func:`kernel` for a cached instance).

    Parameters
    ----------
    n : int
        Number of sampled gene copies, ``n >= 2``.

    Attributes
    ----------
    n : int
        Sample size.
    h : float
        Trapezoid step in the logit variable, ``min(0.6 / sqrt(n), 0.2)``.
    y : ndarray, shape (J,), float64
        Logit nodes on [-64, 52].
    x, one_minus_x : ndarray, shape (J,), float64
        Derived-allele frequency at the nodes and its complement (both computed
        without cancellation).
    A : ndarray, shape (n - 1, J), float64
        ``h * C(n, i) * x_j**i * (1 - x_j)**(n - i)`` for classes ``i = 1..n-1``
        (J = 2736 nodes at n = 200, 8647 at n = 2000, where A takes 138 MB).

    Notes
    -----
    ``g`` is accurate to about 1e-13 relative (against mpmath quadrature) wherever the
    value is above 1e-280; below that use :meth:`log_g`, which is accurate to about 1e-12
    in :math:`\ln g` down to any value (e.g. 1e-2400 for n = 1000, S = -1e5).

    Examples
    --------
    >>> k = SfsKernel(10)
    >>> bool(np.allclose(k.g(0.0), 1.0 / np.arange(1, 10), rtol=1e-12))
    True
    """

    def __init__(self, n: int) -> None:
        n = _check_n(n)
        self.n = n
        self.h = min(H_SCALE / math.sqrt(n), H_MAX)
        J = int(math.ceil((Y_MAX - Y_MIN) / self.h)) + 1
        self.y = Y_MIN + self.h * np.arange(J)
        # log x = -log(1 + e^-y), log(1-x) = -log(1 + e^y): no cancellation anywhere.
        self.log_x = -np.logaddexp(0.0, -self.y)
        self.log_1mx = -np.logaddexp(0.0, self.y)
        self.x = np.exp(self.log_x)
        self.one_minus_x = np.exp(self.log_1mx)
        i = np.arange(1, n, dtype=float)
        self._log_a_row = _log_binom(n) + math.log(self.h)
        self._i = i
        self.A = np.exp(self._log_A())

    def _log_A(self, rows: np.ndarray | None = None) -> np.ndarray:
        """``log A`` for the given class rows (0-based; all rows if None)."""
        i = self._i if rows is None else self._i[rows]
        c = self._log_a_row if rows is None else self._log_a_row[rows]
        return (
            c[:, None]
            + i[:, None] * self.log_x[None, :]
            + (self.n - i)[:, None] * self.log_1mx[None, :]
        )

    # -- weights ---------------------------------------------------------------------
    def _weights(self, S: np.ndarray) -> np.ndarray:
        """``w_S(x_j)``, shape (len(S), J), for a 1-D array ``S`` of one kind: all
        ``S >= 1e-150``, all ``S <= -1e-150``, or all tiny (``|S| < 1e-150``, where
        ``w = (1-x)(1 + O(S))`` is the S = 0 limit) or NaN."""
        col = S[:, None]
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            if S[0] >= 1e-150:
                W = np.multiply(-col, self.one_minus_x)
                np.expm1(W, out=W)
                W /= np.expm1(-col)
            elif S[0] <= -1e-150:
                W = np.multiply(col, self.x)  # -t x
                np.exp(W, out=W)
                tmp = np.multiply(col, self.one_minus_x)
                np.expm1(tmp, out=tmp)
                W *= tmp
                W /= np.expm1(col)
            else:
                W = np.empty((S.size, self.y.size))
                W[:] = self.one_minus_x
                W[np.isnan(S)] = np.nan
        return W

    def _g_flat(self, flat: np.ndarray) -> np.ndarray:
        out = np.empty((flat.size, self.n - 1))
        kinds = np.where(flat >= 1e-150, 0, np.where(flat <= -1e-150, 1, 2))
        for kind in (0, 1, 2):
            idx = np.flatnonzero(kinds == kind)
            for lo in range(0, idx.size, _CHUNK):
                sub = idx[lo : lo + _CHUNK]
                res = self._weights(flat[sub]) @ self.A.T
                if sub.size == flat.size:
                    return res
                out[sub] = res
        return out

    def _log_weights(self, s: float) -> np.ndarray:
        """``log w_s(x_j)``, shape (J,), for one scalar ``s``."""
        with np.errstate(divide="ignore"):
            if s > 0:
                return _log1mexp(s * self.one_minus_x) - _log1mexp(np.array(s))
            if s < 0:
                t = -s
                return -t * self.x + _log1mexp(t * self.one_minus_x) - _log1mexp(np.array(t))
            return self.log_1mx.copy()

    # -- public ----------------------------------------------------------------------
    def g(self, S: ArrayLike) -> np.ndarray:
        r"""Expected count per unit :math:`\theta L` in each class, :math:`g_i(S)`.

        Parameters
        ----------
        S : array_like, float
            Scaled selection coefficients :math:`4 N_e s` (negative = deleterious), any
            shape. ``inf``/``-inf`` give the limits; NaN propagates.

        Returns
        -------
        ndarray, shape ``S.shape + (n - 1,)``, float64
            Entry ``[..., i-1]`` is :math:`g_i(S)`, ``i = 1..n-1``. Finite and >= 0 for
            every non-NaN ``S``; values below about 1e-300 underflow (see :meth:`log_g`).
        """
        S = np.asarray(S, dtype=float)
        return self._g_flat(S.reshape(-1)).reshape(S.shape + (self.n - 1,))

    def dg_beneficial(self, s: float) -> np.ndarray:
        r"""Derivative :math:`\partial g_i/\partial S` at one beneficial ``s > 0``.

        The same trapezoid sum as :meth:`g` with the weight differentiated:
        :math:`\partial_S w_S(x) = [e^{-S} (e^{-S u} - 1) - u e^{-S u} (e^{-S} - 1)]
        / (e^{-S} - 1)^2`, :math:`u = 1 - x` (for the beneficial point mass of a DFE).

        Parameters
        ----------
        s : float
            Scaled coefficient, > 0.

        Returns
        -------
        ndarray, shape (n - 1,), float64
        """
        if not s > 0:
            raise ValueError(f"`s` must be > 0, got {s!r}")
        u = self.one_minus_x
        e_su = np.exp(-s * u)
        em1 = math.expm1(-s)
        dw = (math.exp(-s) * np.expm1(-s * u) - u * e_su * em1) / (em1 * em1)
        return self.A @ dw

    def log_g(self, S: ArrayLike) -> np.ndarray:
        r"""Natural logarithm of :math:`g_i(S)`, accurate also where ``g`` underflows.

        Entries with :math:`g_i \ge 10^{-280}` are the log of :meth:`g`; the others are
        recomputed by a log-sum-exp over the same trapezoid nodes.

        Parameters
        ----------
        S : array_like, float
            Scaled selection coefficients, any shape.

        Returns
        -------
        ndarray, shape ``S.shape + (n - 1,)``, float64
            :math:`\ln g_i(S)`; ``-inf`` only for ``S = -inf``.
        """
        S = np.asarray(S, dtype=float)
        flat = S.reshape(-1)
        g = self.g(flat)
        with np.errstate(divide="ignore"):
            out = np.log(g)
        bad = ~(g >= _SAFE_MIN) & np.isfinite(flat)[:, None]
        for k in np.flatnonzero(bad.any(axis=1)):
            rows = np.flatnonzero(bad[k])
            lw = self._log_weights(float(flat[k]))
            out[k, rows] = logsumexp(self._log_A(rows) + lw[None, :], axis=1)
        return out.reshape(S.shape + (self.n - 1,))

    def __repr__(self) -> str:
        return f"SfsKernel(n={self.n})"


@functools.lru_cache(maxsize=8)
def kernel(n: int) -> SfsKernel:
    """Cached :class:`SfsKernel` for sample size ``n`` (LRU cache of 8 kernels).

    Parameters
    ----------
    n : int
        Number of sampled gene copies, ``n >= 2``.

    Returns
    -------
    SfsKernel
        Shared instance; treat it as read-only.
    """
    return SfsKernel(n)


def expected_sfs(n: int, S: ArrayLike) -> np.ndarray:
    r"""Expected unfolded spectrum :math:`g_i(S)`, ``i = 1..n-1``, per unit :math:`\theta L`.

    Parameters
    ----------
    n : int
        Number of sampled gene copies.
    S : array_like, float
        Scaled selection coefficients :math:`4N_e s`, any shape.

    Returns
    -------
    ndarray, shape ``S.shape + (n - 1,)``, float64

    Examples
    --------
    >>> e = expected_sfs(4, 0.0)
    >>> [round(float(v), 12) for v in e]
    [1.0, 0.5, 0.333333333333]
    """
    return kernel(_check_n(n)).g(S)


def fold_sfs(E: ArrayLike, n: int) -> np.ndarray:
    r"""Fold spectra on the last axis into minor-allele classes.

    :math:`\eta_j = E_j + E_{n-j}` for :math:`1 \le j < n/2` and
    :math:`\eta_{n/2} = E_{n/2}` for even ``n``.

    Parameters
    ----------
    E : array_like, shape ``(..., n - 1)``
        Unfolded entries for ``i = 1..n-1``.
    n : int
        Number of sampled gene copies.

    Returns
    -------
    ndarray, shape ``(..., n // 2)``
        Entry ``[..., j-1]`` is :math:`\eta_j`, ``j = 1..n//2``.

    Examples
    --------
    >>> fold_sfs([1.0, 2.0, 3.0, 4.0], 5).tolist()
    [5.0, 5.0]
    >>> fold_sfs([1.0, 2.0, 3.0], 4).tolist()
    [4.0, 2.0]
    """
    n = _check_n(n)
    E = np.asarray(E, dtype=float)
    if E.shape[-1:] != (n - 1,):
        raise ValueError(
            f"`E` must have n - 1 = {n - 1} entries on its last axis, got shape {E.shape}"
        )
    m = n // 2
    out = E[..., :m] + E[..., ::-1][..., :m]
    if n % 2 == 0:
        out[..., m - 1] = E[..., m - 1]
    return out


def misorient(E: ArrayLike, eps: ArrayLike) -> np.ndarray:
    r"""Apply ancestral misidentification on the last axis.

    :math:`\xi_i \leftarrow (1-\varepsilon) E_i + \varepsilon E_{n-i}`, ``i = 1..n-1``.

    Parameters
    ----------
    E : array_like, shape ``(..., n - 1)``
        Unfolded entries for ``i = 1..n-1``.
    eps : float or array_like broadcastable to ``E.shape[:-1]``
        Probability that the ancestral state is wrong, in [0, 1].

    Returns
    -------
    ndarray, shape ``(..., n - 1)``

    Examples
    --------
    >>> misorient([1.0, 0.0, 0.0], 0.25).tolist()
    [0.75, 0.0, 0.25]
    """
    E = np.asarray(E, dtype=float)
    eps = np.asarray(eps, dtype=float)
    if np.any((eps < 0) | (eps > 1)):
        raise ValueError(f"`eps` (misorientation rate) must be in [0, 1], got {eps}")
    e = eps[..., None]
    return (1.0 - e) * E + e * E[..., ::-1]


def fixation_ratio(S: ArrayLike) -> np.ndarray:
    r"""Substitution rate of a new mutation relative to a neutral one, :math:`S/(1-e^{-S})`.

    Kimura (1962) fixation probability of a new semidominant mutation, divided by the
    neutral 1/(2N), dropping the factor :math:`(1-e^{-2s})/(2s) \approx 1`.

    Parameters
    ----------
    S : array_like, float
        Scaled selection coefficients :math:`4N_e s`.

    Returns
    -------
    ndarray, same shape as ``S``, float64
        1 at ``S = 0``; about ``S`` for large positive ``S``; about
        :math:`|S| e^{-|S|}` for large negative ``S`` (underflows to 0 below ~ -745).

    Examples
    --------
    >>> fixation_ratio([0.0, 1.0, -1.0]).round(6).tolist()
    [1.0, 1.581977, 0.581977]
    """
    S = np.asarray(S, dtype=float)
    a = np.abs(S)
    with np.errstate(invalid="ignore", over="ignore"):
        base = np.where(a == 0, 1.0, a / -np.expm1(-np.where(a == 0, 1.0, a)))
        out = np.where(S < 0, base * np.exp(-a), base)
    out = np.where(np.isposinf(S), np.inf, out)
    out = np.where(np.isneginf(S), 0.0, out)
    return out[()] if out.ndim == 0 else out


def log_fixation_ratio(S: ArrayLike) -> np.ndarray:
    r"""Natural logarithm of :func:`fixation_ratio`, finite for any finite ``S``.

    Parameters
    ----------
    S : array_like, float

    Returns
    -------
    ndarray, same shape as ``S``, float64
        :math:`\ln S - \ln(1 - e^{-S})` (and its continuation, 0 at ``S = 0``);
        ``-inf`` at ``S = -inf``.
    """
    S = np.asarray(S, dtype=float)
    a = np.abs(S)
    safe = np.where(a == 0, 1.0, a)
    with np.errstate(divide="ignore"):
        base = np.log(safe) - _log1mexp(safe)
    base = np.where(a == 0, 0.0, base)
    with np.errstate(invalid="ignore"):
        out = np.where(S < 0, base - a, base)
    out = np.where(np.isneginf(S), -np.inf, out)
    return out[()] if out.ndim == 0 else out
