r"""Size histories fitted to the neutral class (the first step of a two-step fit; no I/O).

The neutral spectrum of a population depends on its size history alone. Following the
two-step approach of Keightley & Eyre-Walker (2007) and Boyko et al. (2008), the history
is fitted to the neutral class first; the distribution of fitness effects is then fitted
to the selected class given that history (not yet in this version). The likelihood is
Poisson over the polymorphic entries,

.. math::

    E[\xi^N_i] = \theta L_N\,[(1-\varepsilon)\, g_i + \varepsilon\, g_{n-i}],

with :math:`g` the neutral spectrum of the history per unit :math:`\theta_{anc} L`
(:func:`driftband.prf.neutral_history.neutral_history_sfs`), :math:`\theta` (per site, on
the ancestral size) profiled out in closed form, and the misorientation rate
:math:`\varepsilon` free or fixed (unfolded spectra; folded spectra sum
:math:`g_j + g_{n-j}` and have no :math:`\varepsilon`). Models (names of our own):

- ``equilibrium``: constant size, no history parameter;
- ``one-change``: :class:`~driftband.prf.history.OneChange` ``(nu, tau)``;
- ``two-change``: :class:`~driftband.prf.history.TwoChanges` ``(nu1, tau1, nu2, tau2)``;
- ``growth``: :class:`~driftband.prf.history.ExponentialChange` ``(nu, tau)``.

Sizes are ratios to the ancestral size and times in units of :math:`2N_{anc}`
generations, as in :mod:`driftband.prf.history` and ``driftband simulate``.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.special import gammaln

from ..exceptions import OptionError
from ..prf.history import (
    NU_RANGE,
    TAU_RANGE,
    ConstantSize,
    ExponentialChange,
    History,
    OneChange,
    TwoChanges,
)
from ..prf.neutral_history import neutral_history_sfs
from .likelihood import SpectrumPair
from .optimize import minimize_multistart

__all__ = ["HISTORY_MODELS", "HistoryFit", "fit_neutral_history", "history_of"]

#: Size-history models and the names of their parameters (ratios nu, times tau).
HISTORY_MODELS: dict[str, tuple[str, ...]] = {
    "equilibrium": (),
    "one-change": ("nu", "tau"),
    "two-change": ("nu1", "tau1", "nu2", "tau2"),
    "growth": ("nu", "tau"),
}
_EPS_MAX = 0.5


def history_of(model: str, values: dict[str, float]) -> History:
    """The history object of a model and its natural-scale parameters."""
    if model == "equilibrium":
        return ConstantSize()
    if model == "one-change":
        return OneChange(values["nu"], values["tau"])
    if model == "growth":
        return ExponentialChange(values["nu"], values["tau"])
    if model == "two-change":
        return TwoChanges(values["nu1"], values["tau1"], values["nu2"], values["tau2"])
    raise OptionError(
        f"unknown size-history model {model!r}; choose from {', '.join(HISTORY_MODELS)}"
    )


@dataclass
class HistoryFit:
    """A size history fitted to the neutral class of one population.

    Attributes
    ----------
    model : str
        A key of :data:`HISTORY_MODELS`.
    params : dict of str to float
        Size ratios and times (units of 2 N_anc generations).
    theta : float
        θ per site on the ancestral size.
    eps : float
        Misorientation rate (0 for folded spectra or when fixed at 0).
    loglik : float
        Poisson log-likelihood of the neutral polymorphic entries (constants included).
    n_params : int
        θ, the history's parameters and ε when free.
    aic : float
    success : bool
    at_bounds : tuple of str
        Parameters whose estimate lies at a bound of the search.
    expected : ndarray
        Expected neutral polymorphic entries at the estimate.
    """

    model: str
    params: dict[str, float]
    theta: float
    eps: float
    loglik: float
    n_params: int
    aic: float
    success: bool
    at_bounds: tuple[str, ...] = ()
    expected: np.ndarray = field(default_factory=lambda: np.zeros(0), repr=False)

    @property
    def history(self) -> History:
        """The fitted history."""
        return history_of(self.model, self.params)


def _expected_shape(g: np.ndarray, n: int, folded: bool, eps: float) -> np.ndarray:
    """Spectrum shape per unit theta L: misoriented (unfolded) or folded."""
    if folded:
        m = n // 2
        out = g[:m].copy()
        out[: n - 1 - m] += g[::-1][: n - 1 - m]
        if n % 2 == 0:
            out[m - 1] = g[m - 1]
        return out
    return (1.0 - eps) * g + eps * g[::-1]


def _profile_loglik(x: np.ndarray, shape: np.ndarray, sites: float) -> tuple[float, float]:
    """Poisson log-likelihood with theta profiled out; returns (loglik, theta)."""
    tot = float(shape.sum())
    if not (tot > 0 and np.all(shape > 0)):
        return -math.inf, math.nan
    theta = float(x.sum()) / (sites * tot)
    lam = theta * sites * shape
    ll = float(np.sum(x * np.log(lam) - lam - gammaln(x + 1.0)))
    return ll, theta


def fit_neutral_history(data: SpectrumPair, model: str, eps: float | None = None) -> HistoryFit:
    """Fit a size history to the neutral class of one population.

    Parameters
    ----------
    data : SpectrumPair
        The population's spectra (only the neutral class is used).
    model : str
        A key of :data:`HISTORY_MODELS`.
    eps : float, optional
        Misorientation rate fixed at this value; None (default) estimates it for
        unfolded spectra.

    Returns
    -------
    HistoryFit

    Raises
    ------
    OptionError
        An unknown model, or a history on too few classes to be identified.

    Examples
    --------
    >>> from driftband.prf.history import OneChange
    >>> n, L = 16, 1e6
    >>> x = 0.01 * L * neutral_history_sfs(n, OneChange(0.3, 0.2))
    >>> z = np.zeros(n - 1)
    >>> d = SpectrumPair(n, False, x, z + 1.0, L, L, None, None)
    >>> f = fit_neutral_history(d, "one-change", eps=0.0)
    >>> round(f.params["nu"], 3), round(f.params["tau"], 3)
    (0.3, 0.2)
    """
    if model not in HISTORY_MODELS:
        raise OptionError(
            f"unknown size-history model {model!r}; choose from {', '.join(HISTORY_MODELS)}"
        )
    names = HISTORY_MODELS[model]
    n, folded = data.n, data.folded
    x = np.asarray(data.neutral, dtype=float)
    free_eps = eps is None and not folded
    k_hist = len(names)
    if x.size < k_hist + 2:
        raise OptionError(
            f"a {model} history has {k_hist} parameters; the neutral spectrum has only "
            f"{x.size} classes (n = {n}): use more gene copies or a simpler model"
        )
    lo_nu, hi_nu = (math.log(v) for v in NU_RANGE)
    lo_tau, hi_tau = (math.log(v) for v in TAU_RANGE)
    bounds = [(lo_nu, hi_nu) if nm.startswith("nu") else (lo_tau, hi_tau) for nm in names]
    if free_eps:
        bounds.append((-12.0, math.log(_EPS_MAX / (1 - _EPS_MAX))))

    def unpack(v: np.ndarray) -> tuple[dict[str, float], float]:
        # exp(log(bound)) may land a rounding error outside the range: clip
        vals = {
            nm: float(np.clip(math.exp(v[j]), *(NU_RANGE if nm.startswith("nu") else TAU_RANGE)))
            for j, nm in enumerate(names)
        }
        e = (1.0 / (1.0 + math.exp(-v[-1]))) if free_eps else float(eps or 0.0)
        return vals, e

    def negll(v: np.ndarray) -> float:
        vals, e = unpack(v)
        g = neutral_history_sfs(n, history_of(model, vals))
        ll, _t = _profile_loglik(x, _expected_shape(g, n, folded, e), data.sites_neutral)
        return -ll if math.isfinite(ll) else 1e300

    grid_nu = (0.1, 1.0, 10.0)
    grid_tau = (0.02, 0.2, 1.0)
    if k_hist == 0:
        starts: list[np.ndarray] = [np.zeros(0)]
    elif k_hist == 2:
        starts = [np.log([a, b]) for a, b in itertools.product(grid_nu, grid_tau)]
    else:
        starts = [
            np.log([a, b, c, d])
            for a, b, c, d in itertools.product(grid_nu, (0.05, 0.5), grid_nu, (0.05, 0.5))
        ]
    if free_eps:
        starts = [np.concatenate([s, [math.log(0.01 / 0.99)]]) for s in starts]
    if not bounds:  # equilibrium with eps fixed or folded: nothing to search
        v = np.zeros(0)
        ok = True
    else:
        opt = minimize_multistart(negll, starts, bounds, screen=4)
        v, ok = opt.x, opt.success
    vals, e = unpack(v) if bounds else ({}, float(eps or 0.0))
    g = neutral_history_sfs(n, history_of(model, vals))
    shape = _expected_shape(g, n, folded, e)
    ll, theta = _profile_loglik(x, shape, data.sites_neutral)
    k = 1 + k_hist + (1 if free_eps else 0)
    at = tuple(
        nm
        for j, nm in enumerate(names + (("misorientation_rate",) if free_eps else ()))
        if min(abs(v[j] - bounds[j][0]), abs(v[j] - bounds[j][1]))
        < 1e-6 * (bounds[j][1] - bounds[j][0])
    )
    return HistoryFit(
        model,
        vals,
        theta,
        e,
        ll,
        k,
        2 * k - 2 * ll,
        bool(ok) and math.isfinite(ll),
        at,
        theta * data.sites_neutral * shape,
    )


def compare_histories(data: SpectrumPair, models: Any = None) -> list[HistoryFit]:
    """Fit several history models and sort them by AIC (lowest first)."""
    fits = [fit_neutral_history(data, m) for m in (models or HISTORY_MODELS)]
    return sorted(fits, key=lambda f: f.aic)
