"""Maximum-likelihood fits of DFE models to one population (no I/O).

Multi-start L-BFGS-B on the unconstrained scale, polished by Nelder–Mead from the best
point; convergence is judged by the optimiser's own flag *and* by agreement of the best
starts, and is reported, never hidden (a :class:`~driftband.exceptions.ConvergenceWarning`
is issued for a fit that did not converge). Standard errors come from a central-difference
Hessian of the profile log-likelihood, mapped to the natural scale by the delta method.

Parameters whose estimate lies at a bound of the optimiser's box (within
:data:`~driftband.fit.models.AT_BOUND_TOL` of the bound interval on the unconstrained
scale; a discrete band mass below :data:`~driftband.fit.models.MASS_TOL`) are listed in
``FitResult.at_bounds`` and get no standard error: the Wald approximation needs an interior
maximum (Self & Liang 1987). A :class:`~driftband.exceptions.BoundWarning` names them.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from ..defaults import DEFAULT_EDGES_NES
from ..exceptions import BoundWarning, ConvergenceWarning, OptionError
from ..prf.dfe import DfeExpectation, mean_fixation_ratio
from ..prf.expected import fixation_ratio as kimura_u
from ..prf.families import band_shares
from .likelihood import Objective, SpectrumPair
from .models import DfeModel, at_bound
from .optimize import central_hessian, minimize_multistart

if TYPE_CHECKING:
    from .size_history import FittedHistory

__all__ = ["FitResult", "fit_model", "make_objective", "params_at_bounds"]


@dataclass
class FitResult:
    """A fitted DFE model for one population (scipy-style result object).

    Attributes
    ----------
    population, model : str
    params : dict of str to float
        DFE parameters on the natural scale (``shape``, ``mean_abs_S`` = mean of −S, ...).
    stderr : dict of str to float
        Asymptotic standard errors (NaN where the Hessian is not usable, for a parameter
        at a bound, and for ``beneficial_S`` when ``beneficial_fraction`` is at its bound).
    eps : float
        Ancestral misidentification rate (estimated or fixed).
    theta : float
        θ per site (θ·r_1 with r_1 = 1) from the profile.
    nuisance : ndarray
        r_i per polymorphic class (all ones under equilibrium).
    loglik : float
        Poisson log-likelihood at the estimate (full, including constants).
    n_params : int
        Free parameters: DFE, θ, the r_i (i ≥ 2) and ε when estimated.
    aic : float
    success : bool
    message : str
    band_edges : tuple of float
        Edges on |Ne·s|.
    shares : ndarray
        Share of new selected-class mutations in each |Ne·s| band.
    fixation_ratio : float
        :math:`\bar r`, the mean substitution rate of new selected-class mutations relative
        to neutral over the whole DFE (beneficial class included).
    fixation_ratio_deleterious : float
        :math:`\bar r_{del}`, the same over the deleterious part alone (equal to
        ``fixation_ratio`` without a beneficial class).
    at_bounds : tuple of str
        Natural-scale names of the parameters (DFE parameters and ``eps``) whose estimate
        lies at a bound of the fit (see :func:`params_at_bounds`); they have no standard
        error.
    size_history : dict or None
        The explicit size history the DFE was fitted under
        (:meth:`~driftband.fit.size_history.FittedHistory.summary`); None with nuisance
        factors or at equilibrium. ``S`` and ``theta`` are then on the current size.
    """

    population: str
    model: str
    params: dict[str, float]
    stderr: dict[str, float]
    eps: float
    eps_free: bool
    theta: float
    nuisance: np.ndarray
    loglik: float
    n_params: int
    aic: float
    success: bool
    message: str
    band_edges: tuple[float, ...]
    shares: np.ndarray
    fixation_ratio: float
    observed_neutral: np.ndarray
    observed_selected: np.ndarray
    expected_neutral: np.ndarray
    expected_selected: np.ndarray
    x: np.ndarray | None = field(repr=False, default=None)
    n_starts: int = 0
    n_eval: int = 0
    equilibrium: bool = False
    fixation_ratio_deleterious: float = float("nan")
    at_bounds: tuple[str, ...] = ()
    size_history: dict[str, Any] | None = None

    def residuals(self) -> dict[str, np.ndarray]:
        """Pearson residuals (obs − exp)/√exp of both classes."""

        def r(o, e):
            with np.errstate(divide="ignore", invalid="ignore"):
                return np.where(e > 0, (o - e) / np.sqrt(e), 0.0)

        return {
            "neutral": r(self.observed_neutral, self.expected_neutral),
            "selected": r(self.observed_selected, self.expected_selected),
        }

    def neutral_share(self) -> float:
        """Share of new selected-class mutations with |Ne·s| below the first inner edge."""
        return float(self.shares[0])

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dictionary."""
        res = self.residuals()
        return {
            "population": self.population,
            "model": self.model,
            "params": self.params,
            "stderr": self.stderr,
            "misorientation_rate": self.eps,
            "misorientation_free": self.eps_free,
            "theta": self.theta,
            "nuisance_factors": self.nuisance.tolist(),
            "equilibrium": self.equilibrium,
            "size_history": self.size_history,
            "loglik": self.loglik,
            "n_params": self.n_params,
            "aic": self.aic,
            "success": self.success,
            "message": self.message,
            "band_edges": list(self.band_edges),
            "shares": self.shares.tolist(),
            "at_bounds": list(self.at_bounds),
            "fixation_ratio": self.fixation_ratio,
            "fixation_ratio_deleterious": self.fixation_ratio_deleterious,
            "observed": {
                "neutral": self.observed_neutral.tolist(),
                "selected": self.observed_selected.tolist(),
            },
            "expected": {
                "neutral": self.expected_neutral.tolist(),
                "selected": self.expected_selected.tolist(),
            },
            "pearson_residuals": {k: v.tolist() for k, v in res.items()},
            "unconstrained_params": None if self.x is None else np.asarray(self.x).tolist(),
            "optimizer": {"starts": self.n_starts, "evaluations": self.n_eval},
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> FitResult:
        """The result back from :meth:`to_dict` (``None`` read as NaN).

        Parameters
        ----------
        d : dict
            As written by :meth:`to_dict` (e.g. read from a fit file).

        Returns
        -------
        FitResult

        Raises
        ------
        KeyError, TypeError, ValueError
            A required field is missing or of the wrong type.
        """

        def arr(v: Any) -> np.ndarray:
            return np.array([_nan(x) for x in v], dtype=float)

        obs, exp = d.get("observed") or {}, d.get("expected") or {}
        opt = d.get("optimizer") or {}
        return cls(
            population=str(d["population"]),
            model=str(d["model"]),
            params={str(k): _nan(v) for k, v in (d.get("params") or {}).items()},
            stderr={str(k): _nan(v) for k, v in (d.get("stderr") or {}).items()},
            eps=_nan(d["misorientation_rate"]),
            eps_free=bool(d["misorientation_free"]),
            theta=_nan(d["theta"]),
            nuisance=arr(d["nuisance_factors"]),
            loglik=_nan(d["loglik"]),
            n_params=int(d["n_params"]),
            aic=_nan(d["aic"]),
            success=bool(d["success"]),
            message=str(d["message"]),
            band_edges=tuple(float(v) for v in d["band_edges"]),
            shares=arr(d["shares"]),
            fixation_ratio=_nan(d["fixation_ratio"]),
            observed_neutral=arr(obs["neutral"]),
            observed_selected=arr(obs["selected"]),
            expected_neutral=arr(exp["neutral"]),
            expected_selected=arr(exp["selected"]),
            x=None if d.get("unconstrained_params") is None else arr(d["unconstrained_params"]),
            n_starts=int(opt.get("starts", 0)),
            n_eval=int(opt.get("evaluations", 0)),
            equilibrium=bool(d.get("equilibrium", False)),
            fixation_ratio_deleterious=_deleterious_ratio(d),
            # files written before the key existed list nothing
            at_bounds=tuple(str(v) for v in d.get("at_bounds") or ()),
            size_history=d.get("size_history"),
        )

    def beneficial(self) -> tuple[float, float]:
        """(p_b, S_b) of the beneficial class; (0, NaN) without one."""
        return self.params.get("beneficial_fraction", 0.0), self.params.get(
            "beneficial_S", float("nan")
        )


def _nan(v: Any) -> float:
    """A number of a fit file: ``None`` (how JSON stores NaN and inf here) as NaN."""
    return float("nan") if v is None else float(v)


def _deleterious_ratio(d: dict[str, Any]) -> float:
    """r̄_del of a fit-file model entry; files written before it was stored give it from
    r̄ = (1 − p_b) r̄_del + p_b u(S_b)."""
    if "fixation_ratio_deleterious" in d:
        return _nan(d["fixation_ratio_deleterious"])
    r, params = _nan(d["fixation_ratio"]), d.get("params") or {}
    if "beneficial_fraction" not in params:
        return r
    p_b, s_b = _nan(params["beneficial_fraction"]), _nan(params["beneficial_S"])
    return (r - p_b * float(kimura_u(s_b))) / (1.0 - p_b)


def _natural_vector(obj: Objective, x: np.ndarray) -> np.ndarray:
    xd, eps = obj.split(x)
    vals = list(obj.model.natural(xd).values())
    if obj.free_eps:
        vals.append(eps)
    return np.array(vals)


def _stderr(obj: Objective, x: np.ndarray) -> dict[str, float]:
    names = list(obj.model.param_names) + (["misorientation_rate"] if obj.free_eps else [])
    nan = {k: float("nan") for k in names}
    try:
        H = central_hessian(obj, x)
        if not np.all(np.isfinite(H)):
            return nan
        cov = np.linalg.inv(H)
        if np.any(np.diag(cov) < 0):
            return nan
        # Delta method: Jacobian of the natural parameters wrt the unconstrained vector.
        J = np.empty((len(names), x.size))
        for j in range(x.size):
            d = np.zeros(x.size)
            d[j] = 1e-6
            J[:, j] = (_natural_vector(obj, x + d) - _natural_vector(obj, x - d)) / 2e-6
        var = np.einsum("ij,jk,ik->i", J, cov, J)
        return {k: float(np.sqrt(v)) if v >= 0 else float("nan") for k, v in zip(names, var)}
    except np.linalg.LinAlgError:
        return nan


def params_at_bounds(obj: Objective, x: np.ndarray) -> list[tuple[str, str, float]]:
    """The parameters of an estimate that lie at a bound of ``obj.bounds()``.

    Parameters
    ----------
    obj : Objective
    x : ndarray
        Unconstrained vector (DFE parameters, then logit ε when free).

    Returns
    -------
    list of (str, str, float)
        Natural-scale name (``shape``, ``sd_log_abs_S``, ``beneficial_fraction``,
        ``mass_2``, ``misorientation_rate``, ...), ``"lower"`` or ``"upper"``, and the
        bound on the natural scale.
    """
    xd, _e = obj.split(x)
    out = obj.model.at_bounds(xd)
    if obj.free_eps:
        b = obj.bounds()[-1]
        side = at_bound(float(x[-1]), b)
        if side is not None:
            v = b[0] if side == "lower" else b[1]
            out.append(("misorientation_rate", side, float(1.0 / (1.0 + np.exp(-v)))))
    return out


def _bound_message(label: str, found: list[tuple[str, str, float]]) -> str:
    """The warning about parameters at a bound, in plain words."""
    what = "; ".join(f"{n} is at its {side} bound ({v:.4g})" for n, side, v in found)
    names = [n for n, _s, _v in found]
    text = (
        f"{label}: {what}. The data do not place "
        f"{'it' if len(names) == 1 else 'them'} inside the range the fit allows, so no "
        "standard error is reported (a Wald s.e. is not valid at a bound)"
    )
    if "beneficial_fraction" in names:
        text += "; with beneficial_fraction at its bound beneficial_S is not identified either"
    return text


def make_objective(
    data: SpectrumPair,
    model: DfeModel,
    eps: float | None,
    equilibrium: bool,
    expectation: DfeExpectation | None,
    history: FittedHistory | None = None,
) -> Objective:
    """The objective :func:`fit_model` maximises: under a size history its table, its
    neutral spectrum and all r_i = 1 (``equilibrium`` and ``expectation`` then unused).

    Parameters
    ----------
    data : SpectrumPair
    model : DfeModel
    eps : float or None
        Fixed misorientation rate, or None to estimate it.
    equilibrium : bool
        Fix all nuisance factors r_i = 1 (without a history).
    expectation : DfeExpectation or None
        Per-n table (without a history).
    history : FittedHistory, optional

    Returns
    -------
    Objective
    """
    if history is not None:
        return Objective(
            data,
            model,
            eps=eps,
            equilibrium=True,
            expectation=history.expectation,
            neutral_g=history.neutral_g,
        )
    return Objective(data, model, eps=eps, equilibrium=equilibrium, expectation=expectation)


def fit_model(
    data: SpectrumPair,
    model: DfeModel,
    *,
    population: str = "",
    eps: float | None = 0.0,
    equilibrium: bool = False,
    edges_nes: tuple[float, ...] = DEFAULT_EDGES_NES,
    expectation: DfeExpectation | None = None,
    starts: list[np.ndarray] | None = None,
    stderr: bool = True,
    n_local: int = 3,
    grid_starts: int = 0,
    history: FittedHistory | None = None,
) -> FitResult:
    """Fit one DFE model to one population by maximum likelihood.

    Parameters
    ----------
    data : SpectrumPair
        Neutral and selected spectra.
    model : DfeModel
    population : str
        Label carried into the result.
    eps : float or None
        Fixed ancestral misidentification rate, or None to estimate it (unfolded only).
    equilibrium : bool
        Fix all nuisance factors r_i = 1.
    edges_nes : tuple of float
        Band edges on |Ne·s| for the reported shares.
    expectation : DfeExpectation, optional
        Reuse a per-n table.
    starts : list of ndarray, optional
        Starting points (unconstrained); default: the model's grid (a bootstrap passes
        the point estimate to warm-start).
    stderr : bool
        Compute standard errors (skip in bootstrap replicates).
    n_local : int
        Starting points refined by L-BFGS-B: the best ``n_local`` of the grid, each
        screened by one evaluation.
    grid_starts : int
        With ``starts`` given: also refine the best ``grid_starts`` points of the model's
        grid on these data (each refit then has at least two dispersed starts).

    Returns
    -------
    FitResult
    """
    if data.folded and model.beneficial:
        raise OptionError(
            f"model {model.name}: a beneficial class cannot be fitted to folded spectra "
            "(folding removes the sign of S); drop '+beneficial' or use unfolded spectra"
        )
    obj = make_objective(data, model, eps, equilibrium, expectation, history)
    equilibrium = obj.equilibrium
    grid = model.starts()
    if obj.free_eps:
        grid = [np.append(s, e) for s in grid for e in (np.log(0.01 / 0.99),)]
    if starts is None:
        starts = grid
    elif grid_starts > 0:
        # Given starts (a warm start) plus the best points of the grid, screened here: a
        # refit then explores beyond the basin of the given start.
        vals = np.array([obj(g) for g in grid])
        starts = list(starts) + [grid[j] for j in np.argsort(vals, kind="stable")[:grid_starts]]
    opt = minimize_multistart(
        obj,
        starts,
        obj.bounds(),
        screen=None if grid_starts > 0 else n_local,
        value_and_grad=obj.value_and_grad if obj.analytic_gradient else None,
    )
    xbest, fbest = opt.x, opt.fun
    success = bool(np.isfinite(fbest) and fbest < 1e299 and opt.success)
    msg = opt.message
    ll, c, ln, ls, _gbar = obj.evaluate(xbest)
    xd, e = obj.split(xbest)
    dfe = model.to_dfe(xd)
    nuis = c / c[0] if c[0] > 0 else np.full_like(c, np.nan)
    k_nuis = 1 if equilibrium else data.m
    k_hist = 0 if history is None else history.n_params
    n_params = model.n_free + k_nuis + k_hist + (1 if obj.free_eps else 0)
    se = _stderr(obj, xbest) if stderr else {}
    bound = params_at_bounds(obj, xbest)
    names = tuple(n for n, _s, _v in bound)
    unset = names + (
        ("beneficial_S",) if "beneficial_fraction" in names and "beneficial_S" not in names else ()
    )
    se = {k: float("nan") if k in unset else v for k, v in se.items()}
    if bound and stderr:
        # once per point fit; bootstrap refits (stderr=False) stay quiet
        warnings.warn(
            _bound_message(f"{population or 'population'} / {model.name}", bound),
            BoundWarning,
            stacklevel=2,
        )
    if not success:
        warnings.warn(
            f"{population or 'population'} / {model.name}: the fit did not converge ({msg})",
            ConvergenceWarning,
            stacklevel=2,
        )
    return FitResult(
        population=population,
        model=model.name,
        params=model.natural(xd),
        stderr=se,
        eps=float(e),
        eps_free=obj.free_eps,
        theta=float(c[0]),
        nuisance=nuis,
        loglik=float(ll),
        n_params=n_params,
        aic=float(2 * n_params - 2 * ll),
        success=success,
        message=msg,
        band_edges=tuple(edges_nes),
        shares=band_shares(dfe, edges_nes),
        fixation_ratio=float(mean_fixation_ratio(dfe)),
        fixation_ratio_deleterious=float(mean_fixation_ratio(dfe, "deleterious")),
        observed_neutral=data.neutral.copy(),
        observed_selected=data.selected.copy(),
        expected_neutral=ln,
        expected_selected=ls,
        x=xbest,
        n_starts=len(opt.runs),
        n_eval=obj.n_eval,
        equilibrium=equilibrium,
        at_bounds=names,
        size_history=None if history is None else history.summary(),
    )
