"""The optimiser set-up shared by every maximum-likelihood fit (no I/O).

Multi-start L-BFGS-B on the unconstrained scale (bounded; with the objective's analytic
gradient where the caller has one), optionally after screening a
grid of starting points by one evaluation each, then a Nelder–Mead polish from the best
point (robust to flat or kinked directions of a profile likelihood), bounded as well: the
returned point lies within the bounds and the returned value is the objective there. The fits of one
population (:func:`driftband.fit.mle.fit_model`) and the joint fits of a pair of
populations (:mod:`driftband.compare`) both go through :func:`minimize_multistart`, so that
they share one set of tolerances and one convergence rule.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
from scipy import optimize
from threadpoolctl import ThreadpoolController

__all__ = [
    "LBFGSB_OPTIONS",
    "NELDER_MEAD_OPTIONS",
    "Optimum",
    "central_gradient",
    "central_hessian",
    "minimize_multistart",
]

#: Options of the L-BFGS-B runs from each start.
LBFGSB_OPTIONS = {"maxiter": 500, "ftol": 1e-13, "gtol": 1e-8}
#: Options of the Nelder–Mead polish.
NELDER_MEAD_OPTIONS = {"xatol": 1e-7, "fatol": 1e-9, "maxiter": 4000}
#: Refined starts within this much of the best objective count as agreeing.
AGREE_TOL = 1e-3


@functools.lru_cache(maxsize=1)
def _blas() -> ThreadpoolController:
    """The BLAS libraries loaded (looked up once; limiting them is then cheap)."""
    return ThreadpoolController()


@dataclass
class Optimum:
    """The best point of a multi-start minimisation.

    Attributes
    ----------
    x : ndarray, shape (k,)
        Minimiser (inside the bounds).
    fun : float
        Objective at ``x`` (evaluated there).
    success : bool
        The optimiser's own convergence flag at the final point (the polish's when it ran).
    message : str
        How many refined starts reached the best value, and the optimiser's message.
    runs : list of scipy.optimize.OptimizeResult
        The L-BFGS-B runs, best first.
    agree : int
        Refined starts within ``AGREE_TOL`` of the best objective.
    """

    x: np.ndarray
    fun: float
    success: bool
    message: str
    runs: list[Any] = field(repr=False, default_factory=list)
    agree: int = 0


def minimize_multistart(
    f: Callable[[np.ndarray], float],
    starts: Sequence[np.ndarray],
    bounds: Sequence[tuple[float, float]],
    *,
    screen: int | None = None,
    polish: Literal["if_failed", "always"] = "if_failed",
    value_and_grad: Callable[[np.ndarray], tuple[float, np.ndarray]] | None = None,
) -> Optimum:
    """Minimise ``f`` from several starting points within ``bounds``.

    Parameters
    ----------
    f : callable
        Objective of an unconstrained vector (finite; large values mark infeasible points).
    starts : sequence of ndarray
        Starting points; each is clipped into the bounds.
    bounds : sequence of (float, float)
        Bounds of every coordinate.
    screen : int, optional
        When more starts are given, evaluate each once and refine only the best
        ``screen`` of them (ties keep their order).
    polish : {"if_failed", "always"}
        Run the (bounded) Nelder–Mead polish only when the best L-BFGS-B run did not
        converge, or always (the polished point is kept when it is no worse).
    value_and_grad : callable, optional
        ``f`` and its gradient at a point, in one call: L-BFGS-B then uses this gradient
        instead of its own finite differences (1 + k evaluations of ``f`` per gradient).

    Returns
    -------
    Optimum

    Notes
    -----
    The minimisation runs with one BLAS thread (as in the worker processes): its vectors
    are a few entries long, and on a busy machine the threaded BLAS calls inside L-BFGS-B
    made fits in the calling process three to six times slower.
    """
    with _blas().limit(limits=1):
        return _minimize(f, starts, bounds, screen, polish, value_and_grad)


def _minimize(
    f: Callable[[np.ndarray], float],
    starts: Sequence[np.ndarray],
    bounds: Sequence[tuple[float, float]],
    screen: int | None,
    polish: Literal["if_failed", "always"],
    value_and_grad: Callable[[np.ndarray], tuple[float, np.ndarray]] | None,
) -> Optimum:
    """:func:`minimize_multistart` without the thread limit."""
    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    pts = [np.clip(np.asarray(s, dtype=float), lo, hi) for s in starts]
    if screen is not None and len(pts) > screen:
        vals = np.array([f(s) for s in pts])
        pts = [pts[j] for j in np.argsort(vals, kind="stable")[:screen]]
    if value_and_grad is None:
        runs = [
            optimize.minimize(f, s, method="L-BFGS-B", bounds=bounds, options=LBFGSB_OPTIONS)
            for s in pts
        ]
    else:
        runs = [
            optimize.minimize(
                value_and_grad,
                s,
                jac=True,
                method="L-BFGS-B",
                bounds=bounds,
                options=LBFGSB_OPTIONS,
            )
            for s in pts
        ]
    runs.sort(key=lambda r: r.fun)
    best = runs[0]
    xbest, fbest, converged = best.x, float(best.fun), bool(best.success)
    if polish == "always" or not converged:
        pol = optimize.minimize(
            f, best.x, method="Nelder-Mead", bounds=bounds, options=NELDER_MEAD_OPTIONS
        )
        # scipy keeps the simplex inside the bounds; the clip only guards against
        # rounding, and the objective is taken at the very point returned
        xpol = np.clip(pol.x, lo, hi)
        fpol = float(f(xpol))
        if fpol <= fbest:
            xbest, fbest = xpol, fpol
        converged = bool(pol.success) or (polish == "always" and converged)
    agree = sum(1 for r in runs if r.fun - fbest < AGREE_TOL)
    msg = (
        f"{agree} of {len(runs)} refined starts reached the best log-likelihood; "
        f"optimiser: {best.message!s}"
    )
    return Optimum(xbest, fbest, converged, msg, runs, agree)


def central_hessian(f: Callable[[np.ndarray], float], x: np.ndarray, h: float = 1e-4) -> np.ndarray:
    """Central-difference Hessian of ``f`` at ``x`` (step ``h`` on every coordinate).

    Parameters
    ----------
    f : callable
        Scalar function of a vector.
    x : ndarray, shape (k,)
    h : float
        Step.

    Returns
    -------
    ndarray, shape (k, k)

    Examples
    --------
    >>> H = central_hessian(lambda v: v[0] ** 2 + 3 * v[0] * v[1], np.array([1.0, 2.0]))
    >>> np.round(H, 6).tolist()
    [[2.0, 3.0], [3.0, 0.0]]
    """
    x = np.asarray(x, dtype=float)
    k = x.size
    H = np.empty((k, k))
    f0 = f(x)
    e = np.eye(k) * h
    for a in range(k):
        for b in range(a, k):
            if a == b:
                v = (f(x + e[a]) - 2 * f0 + f(x - e[a])) / h**2
            else:
                v = (
                    f(x + e[a] + e[b])
                    - f(x + e[a] - e[b])
                    - f(x - e[a] + e[b])
                    + f(x - e[a] - e[b])
                ) / (4 * h * h)
            H[a, b] = H[b, a] = v
    return H


def central_gradient(
    f: Callable[[np.ndarray], float], x: np.ndarray, h: float = 1e-5
) -> np.ndarray:
    """Central-difference gradient of ``f`` at ``x`` (NaN where ``f`` is infeasible).

    Parameters
    ----------
    f : callable
        Scalar function of a vector; values of 1e299 or more mark infeasible points.
    x : ndarray, shape (k,)
    h : float
        Step.

    Returns
    -------
    ndarray, shape (k,)

    Examples
    --------
    >>> np.round(central_gradient(lambda v: v[0] ** 2 + 3 * v[1], np.array([1.0, 2.0])), 6)
    array([2., 3.])
    """
    x = np.asarray(x, dtype=float)
    g = np.empty(x.size)
    for j in range(x.size):
        e = np.zeros(x.size)
        e[j] = h
        hi, lo = f(x + e), f(x - e)
        g[j] = np.nan if max(hi, lo) >= 1e299 else (hi - lo) / (2 * h)
    return g
