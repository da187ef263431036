"""Likelihood-ratio machinery of the tests between two populations (no I/O).

The joint fit of a pair under a null (one DFE shared, or shared up to a scale), its
starting points, the scaling of a DFE by an Ne ratio, and the reference distribution of
the statistic: χ², or the χ̄² mixture of Self & Liang (1987) where the null fit puts a
DFE parameter on the boundary of its space (a beneficial mass p_b at its lower bound, the
stand-in for 0, or a band mass of the discrete family at 0): for one such parameter
0.5·χ²(df − 1) + 0.5·χ²(df) (:func:`chibar2_sf`). With the shared value at 0 a
difference between the populations can only lie on one side of it, which is what the
mixture accounts for.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from ..exceptions import OptionError
from ..fit.likelihood import Objective
from ..fit.mle import FitResult
from ..fit.models import DfeModel
from ..fit.optimize import minimize_multistart

__all__ = [
    "LOG_RATIO_BOUNDS",
    "boundary_parameters",
    "chibar2_sf",
    "joint_fit",
    "joint_starts",
    "lrt_pvalue",
    "scale_shift",
]

#: Bounds of a fitted log Ne ratio (ρ from 1e-4 to 1e4).
LOG_RATIO_BOUNDS = (math.log(1e-4), math.log(1e4))


def scale_shift(model: DfeModel, log_rho: float) -> np.ndarray:
    """Shift of the unconstrained DFE vector that multiplies every S by ρ = e^log_rho.

    Only families with a scale parameter can be scaled: gamma (mean S̄), lognormal (μ);
    a beneficial S_b is scaled too, p_b is kept.
    """
    if model.family == "gamma":
        d = [0.0, log_rho]
    elif model.family == "lognormal":
        d = [log_rho, 0.0]
    else:
        raise OptionError(
            "the 'only Ne differs' test needs a DFE family with a scale "
            "parameter (gamma or lognormal), not 'discrete'"
        )
    if model.beneficial:
        d += [0.0, log_rho]
    return np.array(d)


def boundary_parameters(model: DfeModel, x: np.ndarray) -> list[str]:
    """DFE parameters of ``x`` on the boundary of their space (not only of the box).

    ``p_b`` at its lower bound (which stands in for 0) and discrete band masses at 0;
    the other bounds of :meth:`DfeModel.bounds` keep the optimiser in a sane region and
    are not boundaries of the parameter space.

    Parameters
    ----------
    model : DfeModel
    x : ndarray
        Unconstrained DFE vector (of the null fit).

    Returns
    -------
    list of str
    """
    return [
        n
        for n, side, _v in model.at_bounds(x)
        if side == "lower" and (n == "beneficial_fraction" or n.startswith("mass_"))
    ]


def chibar2_sf(stat: float, df: int, k: int) -> float:
    r"""p-value P(T ≥ t) of the χ̄² mixture for ``k`` parameters on the boundary.

    .. math::

        P(T \ge t) = \sum_{j=0}^{k} \binom{k}{j} 2^{-k}\, P(\chi^2_{df-k+j} > t),

    with χ²₀ a point mass at 0 (Self & Liang 1987). For ``k = 1`` this is the 50:50
    mixture of χ²(df − 1) and χ²(df); for ``k > 1`` the binomial weights hold for
    asymptotically independent boundary parameters. ``k = 0`` is the plain χ²(df).

    Parameters
    ----------
    stat : float
        The likelihood-ratio statistic (≥ 0).
    df : int
        Degrees of freedom of the test without the boundary.
    k : int
        Parameters on the boundary (at most ``df``).

    Returns
    -------
    float

    Examples
    --------
    >>> round(chibar2_sf(2.706, 1, 1), 3)  # half of the chi2(1) tail
    0.05
    """
    k = max(0, min(int(k), int(df)))
    total = 0.0
    for j in range(k + 1):
        d = df - k + j
        tail = (1.0 if stat <= 0 else 0.0) if d == 0 else float(stats.chi2.sf(stat, d))
        total += math.comb(k, j) / 2.0**k * tail
    return total


def lrt_pvalue(stat: float, df: int, model: DfeModel, x_null: np.ndarray) -> tuple[float, str]:
    """p-value of an LRT (χ², or χ̄² where the null is on a boundary) and a note."""
    at = boundary_parameters(model, x_null)
    if not at:
        return float(stats.chi2.sf(stat, df)), ""
    k = min(len(at), df)
    mix = " + ".join(
        f"{math.comb(k, j) / 2.0**k:g}\u00b7\u03c7\u00b2({df - k + j})" for j in range(k + 1)
    )
    note = (
        f"; p from the \u03c7\u0304\u00b2 mixture {mix} (Self & Liang 1987): the null fit puts "
        f"{', '.join(at)} on the boundary of its space"
        + (" (weights for independent boundary parameters)" if k > 1 else "")
    )
    return chibar2_sf(stat, df, k), note


def joint_fit(
    objs: list[Objective],
    model: DfeModel,
    shifts: list[np.ndarray],
    starts: list[np.ndarray],
    free: np.ndarray | None = None,
) -> tuple[float, np.ndarray, bool]:
    """Maximise Σ log L_k(x + shift_k, ε_k) over a shared DFE vector x and per-pop ε.

    Parameters
    ----------
    objs : list of Objective
        The two populations' objectives (negative log-likelihoods).
    model : DfeModel
    shifts : list of ndarray
        Fixed shift of the shared vector for each population.
    starts : list of ndarray
        Starting points of the joint vector: x, then t when ``free`` is given, then the
        free misorientation rates in population order.
    free : ndarray, optional
        A direction along which the second population's vector moves by a fitted amount
        t (``x + shift_1 + t·free``; for :func:`scale_shift` directions t is the log Ne
        ratio, within :data:`LOG_RATIO_BOUNDS`).

    Returns
    -------
    loglik : float
        The maximum (the objective at the maximiser, which lies within the bounds).
    z : ndarray
        The maximiser.
    converged : bool
        The optimiser's convergence flag.
    """
    k = model.n_free
    n_free = 0 if free is None else 1
    n_eps = [1 if o.free_eps else 0 for o in objs]
    bounds = list(model.bounds()) + [LOG_RATIO_BOUNDS] * n_free
    for o, ne in zip(objs, n_eps):
        bounds += o.bounds()[k : k + ne]
    extra = [np.zeros(k)] * (len(objs) - 1) + ([free] if free is not None else [np.zeros(k)])

    def f(z: np.ndarray) -> float:
        x = z[:k]
        t = z[k] if n_free else 0.0
        tot, j = 0.0, k + n_free
        for o, sh, ex, ne in zip(objs, shifts, extra, n_eps):
            v = np.concatenate([x + sh + t * ex, z[j : j + ne]])
            j += ne
            tot += o(v)
            if tot >= 1e299:
                return 1e300
        return tot

    def f_and_grad(z: np.ndarray) -> tuple[float, np.ndarray]:
        # the chain rule through v_k = (x + shift_k + t·extra_k, ε_k)
        x = z[:k]
        t = z[k] if n_free else 0.0
        tot, grad, j = 0.0, np.zeros(z.size), k + n_free
        for o, sh, ex, ne in zip(objs, shifts, extra, n_eps):
            v = np.concatenate([x + sh + t * ex, z[j : j + ne]])
            fv, gv = o.value_and_grad(v)
            if fv >= 1e299:
                return 1e300, np.zeros(z.size)
            tot += fv
            grad[:k] += gv[:k]
            if n_free:
                grad[k] += gv[:k] @ ex
            grad[j : j + ne] = gv[k:]
            j += ne
        return tot, grad

    analytic = all(o.analytic_gradient for o in objs)
    opt = minimize_multistart(
        f, starts, bounds, polish="always", value_and_grad=f_and_grad if analytic else None
    )
    return -opt.fun, opt.x, opt.success


def joint_starts(
    model: DfeModel,
    fa: FitResult,
    fb: FitResult,
    objs: list[Objective],
    shifts: list[np.ndarray],
    free: np.ndarray | None = None,
    ratios: tuple[float, ...] = (),
) -> list[np.ndarray]:
    """Joint starts: each population's own estimate (shifted back) and the model grid.

    With a ``free`` direction, every start is made for each log ratio in ``ratios`` and
    for the one that moves the first population's estimate closest to the second's.
    """
    k = model.n_free
    xa, xb = (np.asarray(f.x, dtype=float) for f in (fa, fb))
    eps_part = [x[k:] for x, o in zip((xa, xb), objs) if o.free_eps]
    eps_vec = np.concatenate(eps_part) if eps_part else np.empty(0)
    if free is None:
        base = [xa[:k] - shifts[0], xb[:k] - shifts[1]]
        base += [s for s in model.starts()[::3]]
        return [np.concatenate([b, eps_vec]) for b in base]
    lo, hi = LOG_RATIO_BOUNDS
    t_fit = float((xb[:k] - xa[:k] - shifts[1]) @ free / (free @ free))
    out = []
    for t in dict.fromkeys(float(np.clip(v, lo, hi)) for v in (t_fit, *ratios)):
        base = [xa[:k] - shifts[0], xb[:k] - shifts[1] - t * free]
        base += [s for s in model.starts()[::3]]
        out += [np.concatenate([b, [t], eps_vec]) for b in base]
    return out
