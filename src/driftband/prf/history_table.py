r"""Tabulated expected spectra under one size history, for fitting a DFE (no I/O).

A DFE average needs the spectrum :math:`g_i(S)` at a few hundred values of ``S``
(:mod:`driftband.prf.dfe`) and a fit needs many averages, so solving the diffusion of
:class:`~driftband.prf.history.HistorySfs` at every node is out of the question. A
:class:`HistoryKernel` solves it once per history on a grid of ``S`` and interpolates
the **ratio** to the equilibrium spectrum at the current size, on the log scale,

.. math::

    \ln r_i(S) = \ln g^{hist}_i(S) - \ln g^{eq}_i(S),

which varies slowly (it tends to the neutral ratio as :math:`S \to 0` and to 1 where
selection is strong enough for the population to have re-equilibrated), by cubic
splines in :math:`u = \operatorname{asinh}(S / 0.01)`. ``S`` and :math:`\theta` refer to
the current size, as :class:`~driftband.prf.history.HistorySfs` with
``reference="current"``.

The grid starts at :data:`S_NODES`: ``S = 0`` and :math:`\pm 10^{k/2}` for :math:`|S|`
from 0.01 to :math:`10^5` on the deleterious side and to :math:`10^4` (the largest
beneficial ``S`` a fit allows) on the other, the beneficial side only when a beneficial
class is fitted. Intervals are then halved (in ``u``) where the spline, before a
midpoint is solved, misses it by more than :data:`TABLE_TOL` on a class holding at least
:data:`SHARE_FLOOR` of the spectrum, up to :data:`MAX_NODES` values of ``S``. Beyond the
last node the log ratio is held at its value there (a DFE's mass beyond
:math:`|S| = 10^5` contributes about :math:`1/|S|` per site). The solver runs at
:data:`FIT_RESOLUTION`, coarser than :data:`~driftband.prf.history.DEFAULT_RESOLUTION`.
Its error and the interpolation error are measured by
``benchmarks/bench_history_table.py`` and bounded in the tests: on DFE averages against
every quadrature node solved at the default settings, 1e-6 to 6e-4 for a four-fold
decline, a bottleneck with recovery and five-fold growth, but about 1e-2 for a 50-fold
expansion (the grid reaches :data:`MAX_NODES` before the spline meets its tolerance).

The neutral class of the same history comes from the coalescent
(:func:`~driftband.prf.neutral_history.neutral_history_sfs`), exact to rounding, through
:meth:`HistoryKernel.neutral`.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike
from scipy.interpolate import CubicSpline

from .expected import SfsKernel, _check_n, kernel
from .history import ConstantSize, History, HistorySfs, _Resolution
from .neutral_history import neutral_history_sfs

__all__ = ["FIT_RESOLUTION", "S_NODES", "HistoryKernel"]

#: Solver settings for the tables of a fit: the default grid step, y in [-22, 20]
#: (frequencies 3e-10 to 1 - 2e-9), steps growing by 40 %, five extrapolation levels.
FIT_RESOLUTION = _Resolution(h=0.1, rho=0.4, cap_adv=1.5, levels=5, y_lo=-22.0, y_hi=20.0)

#: Scale of the interpolation coordinate u = asinh(S / U_SCALE).
U_SCALE = 0.01


def _start_nodes() -> np.ndarray:
    k_neg = np.arange(-4, 11)  # 10^(k/2): 0.01 .. 1e5
    k_pos = np.arange(-4, 9)  # 0.01 .. 1e4
    return np.concatenate((-(10.0 ** (k_neg[::-1] / 2.0)), [0.0], 10.0 ** (k_pos / 2.0)))


#: The starting ``S`` grid of a table (current-size reference), increasing: refined
#: where the interpolation is not yet within :data:`TABLE_TOL`.
S_NODES = _start_nodes()
#: Interpolation tolerance: relative error of an entry holding at least
#: :data:`SHARE_FLOOR` of its row (the midpoints of the grid's intervals, predicted
#: before they are solved).
TABLE_TOL = 1e-2
SHARE_FLOOR = 1e-3
#: Most ``S`` values solved for one table.
MAX_NODES = 100
#: Entries below this fraction of the row's total are floored before taking logs (the
#: solver's departures there are rounding noise, possibly negative).
_LOG_FLOOR = 1e-12


class HistoryKernel:
    r"""Expected spectra :math:`g_i(S)` under one size history, tabulated once.

    Duck-types :class:`~driftband.prf.expected.SfsKernel` for
    :class:`~driftband.prf.dfe.DfeExpectation`: :attr:`n`, :meth:`g` and
    :meth:`dg_beneficial`.

    Parameters
    ----------
    n : int
        Number of sampled gene copies, ``n >= 2``.
    history : History
        A size history of :mod:`driftband.prf.history`.
    resolution : _Resolution, optional
        Solver settings (default :data:`FIT_RESOLUTION`).
    nodes : array_like, optional
        The starting ``S`` grid (default :data:`S_NODES`); increasing, holding 0.
    refine : bool
        Halve the intervals of the grid (in ``u``) until the spline predicts each new
        midpoint within :data:`TABLE_TOL` (default ``True``).
    beneficial : bool
        Tabulate the beneficial side (``S > 0``) too, for a beneficial class (default
        ``False``: about half the cost; :meth:`g` then refuses ``S > 0``).

    Notes
    -----
    ``S`` and :math:`\theta` are on the current size. For a constant size the ratio is
    1 and :meth:`g` is the equilibrium spectrum exactly.

    Examples
    --------
    >>> from driftband.prf.history import ConstantSize
    >>> k = HistoryKernel(8, ConstantSize())
    >>> bool(np.allclose(k.g(-5.0), kernel(8).g(-5.0), rtol=1e-12))
    True
    """

    def __init__(
        self,
        n: int,
        history: History,
        resolution: _Resolution | None = None,
        nodes: ArrayLike | None = None,
        refine: bool = True,
        beneficial: bool = False,
    ) -> None:
        self.n = _check_n(n)
        self.history = history
        self.eq: SfsKernel = kernel(self.n)
        self.beneficial = bool(beneficial)
        S = np.asarray(S_NODES if nodes is None else nodes, dtype=float)
        if not self.beneficial:
            S = S[S <= 0.0]
        if S.ndim != 1 or np.any(np.diff(S) <= 0) or not np.any(S == 0.0):
            raise ValueError("`nodes` must be an increasing 1-D grid holding 0")
        self._spline: CubicSpline | None = None
        self.nodes = S
        self.rounds = 0
        if isinstance(history, ConstantSize) or not history.epochs():
            return
        self._solver = HistorySfs(
            self.n, history, "current", resolution or FIT_RESOLUTION, mesh_S=float(np.abs(S).max())
        )
        self._fit_table(S, refine)

    # -- building ---------------------------------------------------------------------
    def _log_base(self, S: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``ln max(g_eq, floor * row total)``, the base the log ratio is taken against,
        and the log of the row total of ``g_eq``."""
        log_g = self.eq.log_g(S)
        log_tot = np.logaddexp.reduce(log_g, axis=-1, keepdims=True)
        return np.maximum(log_g, log_tot + math.log(_LOG_FLOOR)), log_tot

    def _floor_log_eq(self, S: np.ndarray) -> np.ndarray:
        return self._log_base(S)[0]

    def _log_ratio_of(self, S: np.ndarray, g_hist: np.ndarray) -> np.ndarray:
        base, log_tot = self._log_base(S)
        floor = np.maximum(_LOG_FLOOR * np.exp(log_tot), np.finfo(float).tiny)
        return np.log(np.maximum(g_hist, floor)) - base

    def _solve(self, S: np.ndarray) -> np.ndarray:
        g = self._solver.table(S)
        # the neutral node from the coalescent (exact); the solver matches it to ~1e-6
        g[S == 0.0] = self.neutral()
        return g

    def _fit_table(self, S: np.ndarray, refine: bool) -> None:
        g = self._solve(S)
        # intervals already checked, by their left end in u: whether the spline met the
        # tolerance there (a good interval's two halves need no further check)
        good: dict[float, bool] = {}
        while True:
            lr = self._log_ratio_of(S, g)
            u = np.arcsinh(S / U_SCALE)
            spline = CubicSpline(u, lr, axis=0, bc_type="not-a-knot")
            if not refine or S.size >= MAX_NODES:
                break
            todo = np.array([not good.get(round(float(v), 12), False) for v in u[:-1]])
            if not todo.any():
                break
            take = np.flatnonzero(todo)[: MAX_NODES - S.size]
            u_mid = 0.5 * (u[take] + u[take + 1])
            S_mid = U_SCALE * np.sinh(u_mid)
            g_mid = self._solve(S_mid)
            pred = np.exp(spline(u_mid) + self._floor_log_eq(S_mid))
            rel = np.abs(pred / g_mid - 1.0)
            big = g_mid >= SHARE_FLOOR * g_mid.sum(axis=1, keepdims=True)
            bad = np.any(big & (rel > TABLE_TOL), axis=1)
            for lo, mid, b in zip(u[take], u_mid, bad):
                good[round(float(lo), 12)] = good[round(float(mid), 12)] = not b
            S = np.concatenate((S, S_mid))
            g = np.concatenate((g, g_mid))
            order = np.argsort(S)
            S, g = S[order], g[order]
            self.rounds += 1
        self.nodes = S
        self._spline = spline
        self._dspline = spline.derivative()

    def neutral(self) -> np.ndarray:
        r"""Neutral spectrum per unit :math:`\theta L` on the current size, shape (n - 1,)."""
        g = neutral_history_sfs(self.n, self.history)
        return g / self.history.nu_now

    def log_ratio(self, S: ArrayLike) -> np.ndarray:
        """The interpolated log ratio to the current equilibrium, shape
        ``S.shape + (n - 1,)``."""
        S = np.asarray(S, dtype=float)
        if self._spline is None:
            return np.zeros(S.shape + (self.n - 1,))
        u = np.arcsinh(np.clip(S, self.nodes[0], self.nodes[-1]) / U_SCALE)
        return np.asarray(self._spline(u))

    def g(self, S: ArrayLike) -> np.ndarray:
        r"""Expected count per unit :math:`\theta L` in each class, ``i = 1..n-1``.

        Parameters
        ----------
        S : array_like, float
            :math:`4Ns` on the current size, any shape; finite.

        Returns
        -------
        ndarray, shape ``S.shape + (n - 1,)``, float64
        """
        S = np.asarray(S, dtype=float)
        if self._spline is None:
            return self.eq.g(S)
        if not self.beneficial and np.any(S > 0):
            raise ValueError("this table holds no beneficial S: build it with beneficial=True")
        return np.exp(self._floor_log_eq(S) + self.log_ratio(S))

    def dg_beneficial(self, s: float) -> np.ndarray:
        r"""Derivative :math:`\partial g_i/\partial S` at one beneficial ``s > 0``.

        :math:`g\,(\partial_S \ln g^{eq} + \partial_S \ln r)`, with the equilibrium
        derivative of :meth:`SfsKernel.dg_beneficial` (zero on entries under the floor)
        and the spline's own derivative (zero beyond the last node, where the log ratio
        is held).

        Parameters
        ----------
        s : float
            Scaled coefficient, > 0.

        Returns
        -------
        ndarray, shape (n - 1,), float64
        """
        d_eq = self.eq.dg_beneficial(s)
        if self._spline is None:
            return d_eq
        if s >= self.nodes[-1]:
            dlr = np.zeros(self.n - 1)
        else:
            u = math.asinh(s / U_SCALE)
            dlr = np.asarray(self._dspline(u)) / math.sqrt(s * s + U_SCALE * U_SCALE)
        log_eq = self.eq.log_g(s)
        floored = self._floor_log_eq(np.asarray(s)) > log_eq
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            dlog_eq = np.where(floored, 0.0, d_eq / np.exp(log_eq))
        return self.g(s) * (dlog_eq + dlr)

    def __repr__(self) -> str:
        return f"HistoryKernel(n={self.n}, history={self.history!r})"
