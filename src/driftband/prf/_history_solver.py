r"""Method-of-lines solver behind :mod:`driftband.prf.history` (private; no I/O).

The forward diffusion for the density of derived-allele frequencies, written for
:math:`G(y, t) = x(1-x) f(x, t)` in the logit variable :math:`y = \ln(x/(1-x))` and in
units of :math:`2N_{anc}` generations, is

.. math::

    \partial_t G = \frac{1}{\nu(t)} \partial_y\!\left[D(y)\, \partial_y G\right]
                   - \frac{S_{anc}}{2}\, \partial_y G, \qquad D(y) = 1 + \cosh y
                   = \frac{1}{2x(1-x)},

with :math:`G \to \theta_{anc}\,\nu(t)` as :math:`y \to -\infty` (mutation input) and
:math:`G \to 0` as :math:`y \to \infty` (fixation). Selection is a transport at the constant
speed :math:`S_{anc}/2` in ``y`` (the logistic trajectory is a translation in the logit), and
drift a diffusion whose coefficient grows like :math:`e^{|y|}/2` towards the boundaries.

Each epoch evolves the departure :math:`d = G - G^{eq}` from the equilibrium profile of the
epoch, :math:`G^{eq} = \theta_{anc}\,\nu\, w_{\nu S_{anc}}(x)` with
:math:`w_S(x) = (1 - e^{-S(1-x)})/(1 - e^{-S})` (Sawyer & Hartl 1992), so ``d`` obeys the
homogeneous equation with ``d = 0`` at both ends and a constant history is exact.

Discretisation: fourth-order central differences on a uniform ``y`` grid (second order on
the two rows next to the ends, where ``d`` is below 1e-12 of its scale), giving one
pentadiagonal matrix per selection coefficient; all coefficients of a table are solved at
once as a block-banded system by LAPACK ``gbtrf``/``gbtrs``. Time: implicit Euler
extrapolated over the harmonic sequence 1, 2, ..., 6 of sub-steps (the default) (Aitken--Neville;
Deuflhard 1985, Hairer & Wanner 1996 sec. IV.9), which is stiffly accurate for the huge
diffusion coefficients near the ends, on a mesh graded geometrically from the start of the
epoch (the new mutation level enters from :math:`y = -\infty` as a front at
:math:`y \approx \ln t`) and capped while the selective transport crosses the grid.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from scipy.linalg import lapack

#: Fourth-order central stencils for the second and first derivative (offsets -2..2).
_C2 = np.array([-1.0, 16.0, -30.0, 16.0, -1.0]) / 12.0
_C1 = np.array([1.0, -8.0, 0.0, 8.0, -1.0]) / 12.0
_KL = _KU = 2


def w_eq(sig: np.ndarray, x: np.ndarray, omx: np.ndarray) -> np.ndarray:
    r"""Equilibrium profile :math:`w_\sigma(x)`; ``sig`` shape (B, 1), ``x`` shape (J,).

    Returns shape (B, J), in [0, 1], without overflow for any finite ``sig``.
    """
    sig = np.asarray(sig, dtype=float)
    out = np.empty(np.broadcast_shapes(sig.shape, x.shape))
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        pos = -np.expm1(-sig * omx) / -np.expm1(-sig)
        neg = np.exp(sig * x) * np.expm1(sig * omx) / np.expm1(sig)
    out[...] = np.where(sig > 0, pos, neg)
    tiny = np.abs(sig) < 1e-150
    if np.any(tiny):
        out[...] = np.where(tiny, omx + 0.0 * sig, out)
    return out


class Grid:
    """Uniform logit grid, interior nodes only (``d = 0`` on the two end nodes).

    Parameters
    ----------
    h : float
        Grid step in ``y``.
    y_lo, y_hi : float
        End nodes.
    """

    def __init__(self, h: float, y_lo: float, y_hi: float) -> None:
        m = int(round((y_hi - y_lo) / h)) + 1
        y = y_lo + h * np.arange(m)
        self.h = h
        self.y = y[1:-1]
        self.y_lo, self.y_hi = float(y[0]), float(y[-1])
        mi = self.y.size
        self.mi = mi
        self.log_x = -np.logaddexp(0.0, -self.y)
        self.log_1mx = -np.logaddexp(0.0, self.y)
        self.x = np.exp(self.log_x)
        self.omx = np.exp(self.log_1mx)
        dcoef = 1.0 + np.cosh(self.y)
        dprime = np.sinh(self.y)
        # Row-oriented bands: P[k, j] multiplies d[j + k - 2] (diffusion part, times 1/nu),
        # Q[k, j] the same for the first derivative (transport part, times -S_anc/2).
        P = dcoef[None, :] * _C2[:, None] / h**2 + dprime[None, :] * _C1[:, None] / h
        Q = np.repeat(_C1[:, None] / h, mi, axis=1)
        for j in (0, mi - 1):
            P[:, j] = 0.0
            Q[:, j] = 0.0
            P[1, j] = dcoef[j] / h**2 - dprime[j] / (2 * h)
            P[2, j] = -2.0 * dcoef[j] / h**2
            P[3, j] = dcoef[j] / h**2 + dprime[j] / (2 * h)
            Q[1, j] = -1.0 / (2 * h)
            Q[3, j] = 1.0 / (2 * h)
        for k in range(5):
            idx = np.arange(mi) + (k - 2)
            out = (idx < 0) | (idx >= mi)
            P[k, out] = 0.0
            Q[k, out] = 0.0
        self.P = P
        self.Q = Q

    def system(self, dt: np.ndarray, a: float, b: np.ndarray) -> np.ndarray:
        """LAPACK band storage of ``I - dt_b (a P - b_b Q)`` for each block ``b``."""
        B = dt.size
        mi = self.mi
        R = (-a * dt)[None, :, None] * self.P[:, None, :]
        R += (dt * b)[None, :, None] * self.Q[:, None, :]
        R[2] += 1.0
        R = R.reshape(5, B * mi)
        N = B * mi
        ab = np.zeros((2 * _KL + _KU + 1, N))
        for k in range(5):
            o = k - 2
            r = _KL + _KU - o
            if o >= 0:
                ab[r, o:] = R[k, : N - o]
            else:
                ab[r, : N + o] = R[k, -o:]
        return ab


def _solve_steps(
    grid: Grid,
    v: np.ndarray,
    dt: np.ndarray,
    a: float,
    b: np.ndarray,
    n_sub: int,
    src: np.ndarray | None,
) -> np.ndarray:
    """``n_sub`` implicit Euler sub-steps of length ``dt / n_sub`` (per block)."""
    h = dt / n_sub
    lu, piv, info = lapack.dgbtrf(grid.system(h, a, b), _KL, _KU)
    if info != 0:  # pragma: no cover - the matrix is an M-matrix plus a small part
        raise FloatingPointError(f"banded LU failed (info={info})")
    u = v
    for _ in range(n_sub):
        rhs = u if src is None else u - (h[:, None] * src).reshape(-1)  # d' = A d - G_eq'
        u, info = lapack.dgbtrs(lu, _KL, _KU, rhs[:, None], piv)
        u = u[:, 0]
    return u


def step_mesh(
    T: float, a_max: float, b_max: float, grid: Grid, rho: float, cap_adv: float, cap_nu: float
) -> np.ndarray:
    """Macro steps over ``[0, T]``, shape (K,), shared by every block of a batch.

    Graded geometrically (ratio ``1 + rho``) from ``t0``, when the front of new mutations
    enters the grid, capped at ``cap_adv / b_max`` while the transport at the largest speed
    ``b_max`` crosses the grid, and at ``cap_nu`` throughout (for a changing size).
    """
    t0 = min(T, math.exp(grid.y_lo + 3.0) / a_max)
    t_adv = 1.5 * (grid.y_hi - grid.y_lo) / b_max if b_max > 0 else 0.0
    ts = [0.0, t0]
    t = t0
    while t < T * (1.0 - 1e-13):
        dt = min(rho * t, cap_nu)
        if t < t_adv:
            dt = min(dt, cap_adv / b_max)
        t = min(t + dt, T)
        ts.append(t)
    return np.diff(ts)


def evolve(
    grid: Grid,
    d: np.ndarray,
    T: float,
    a_of_t: Callable[[float], float],
    b: np.ndarray,
    src_of_t: Callable[[float], np.ndarray] | None = None,
    levels: int = 5,
    rho: float = 0.3,
    cap_adv: float = 0.5,
    cap_nu: float = math.inf,
    a_max: float | None = None,
    b_mesh: float = 0.0,
) -> tuple[np.ndarray, int]:
    """Advance departures ``d`` (shape (B, mi)) over an epoch of length ``T``.

    ``a_of_t(t)`` is ``1/nu(t)`` (a float; ``t`` from the start of the epoch) and
    ``src_of_t(t)`` the rate of change of the equilibrium profile, ``dG_eq/dt`` (shape
    (B, mi)), or ``None`` for a constant size. Returns the departures at ``T`` and the
    number of macro steps. ``b_mesh`` raises the transport speed the time mesh is built
    for to at least this value (the same mesh for every batch of a table: the
    discretisation error then varies smoothly with ``S``).
    """
    if T <= 0:
        return d, 0
    B = d.shape[0]
    a_max = a_of_t(0.0) if a_max is None else a_max
    H = step_mesh(T, a_max, max(float(np.max(np.abs(b))), b_mesh), grid, rho, cap_adv, cap_nu)
    v = d.reshape(-1).copy()
    t = 0.0
    seq = list(range(1, levels + 1))
    for Hk in H:
        tab = []
        for n_sub in seq:
            h = np.full(B, Hk / n_sub)
            if src_of_t is None:
                u = _solve_steps(grid, v, h * n_sub, a_of_t(0.0), b, n_sub, None)
            else:
                u = v
                for s in range(1, n_sub + 1):
                    t_end = t + s * Hk / n_sub
                    u = _solve_steps(grid, u, h, a_of_t(t_end), b, 1, src_of_t(t_end))
            tab.append(u)
        for lev in range(1, levels):
            for k in range(levels - 1, lev - 1, -1):
                tab[k] = tab[k] + (tab[k] - tab[k - 1]) / (seq[k] / seq[k - lev] - 1.0)
        v = tab[-1]
        t += Hk
    return v.reshape(B, grid.mi), H.size


def lagrange_matrix(y_src: np.ndarray, y_dst: np.ndarray, order: int = 8) -> np.ndarray:
    """Dense matrix of local Lagrange interpolation (``order`` points) from a uniform grid."""
    h = y_src[1] - y_src[0]
    m = y_src.size
    out = np.zeros((y_dst.size, m))
    half = order // 2
    for r, yv in enumerate(y_dst):
        j0 = int(math.floor((yv - y_src[0]) / h)) - half + 1
        j0 = min(max(j0, 0), m - order)
        nodes = y_src[j0 : j0 + order]
        for q in range(order):
            others = np.delete(nodes, q)
            out[r, j0 + q] = np.prod((yv - others) / (nodes[q] - others))
    return out
