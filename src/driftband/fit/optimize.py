"""The optimiser set-up shared by every maximum-likelihood fit (no I/O).

Multi-start L-BFGS-B on the unconstrained scale (bounded), optionally after screening a
grid of starting points by one evaluation each, then a Nelder–Mead polish from the best
point (robust to flat or kinked directions of a profile likelihood), bounded as well: the
returned point lies within the bounds and the returned value is the objective there. The fits of one
population (:func:`driftband.fit.mle.fit_model`) and the joint fits of a pair of
populations (:mod:`driftband.compare`) both go through :func:`minimize_multistart`, so that
they share one set of tolerances and one convergence rule.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
from scipy import optimize

__all__ = ["LBFGSB_OPTIONS", "NELDER_MEAD_OPTIONS", "Optimum", "minimize_multistart"]

#: Options of the L-BFGS-B runs from each start.
LBFGSB_OPTIONS = {"maxiter": 500, "ftol": 1e-13, "gtol": 1e-8}
#: Options of the Nelder–Mead polish.
NELDER_MEAD_OPTIONS = {"xatol": 1e-7, "fatol": 1e-9, "maxiter": 4000}
#: Refined starts within this much of the best objective count as agreeing.
AGREE_TOL = 1e-3


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

    Returns
    -------
    Optimum
    """
    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    pts = [np.clip(np.asarray(s, dtype=float), lo, hi) for s in starts]
    if screen is not None and len(pts) > screen:
        vals = np.array([f(s) for s in pts])
        pts = [pts[j] for j in np.argsort(vals, kind="stable")[:screen]]
    runs = [
        optimize.minimize(f, s, method="L-BFGS-B", bounds=bounds, options=LBFGSB_OPTIONS)
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
