"""Result objects of the fit stage: all model fits of a population, and their bootstrap.

Plain dataclasses with symmetric ``to_dict`` / ``from_dict`` (the form they take in a fit
file), so that every stage after the fit works on typed objects and numbers stay numbers.
No I/O here: :mod:`driftband.fit.io` reads and writes the files.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, NamedTuple

import numpy as np

from ..defaults import DEFAULT_REPLICATES, MIN_BLOCKS
from .adaptive import adaptive_summary
from .likelihood import SpectrumPair
from .mle import FitResult

__all__ = [
    "AveragedBootstrap",
    "BootstrapResult",
    "ConfidenceInterval",
    "Headline",
    "ModelBootstrap",
    "PopulationFit",
    "akaike_weights",
]


class ConfidenceInterval(NamedTuple):
    """Lower and upper end of an interval (NaN when it could not be computed)."""

    low: float
    high: float


def _floats(values: Any) -> np.ndarray:
    """A float array from JSON values (``None``, how the files store NaN, read as NaN)."""
    return np.array([np.nan if v is None else v for v in values], dtype=float)


def _interval(v: Any) -> ConfidenceInterval:
    lo, hi = (np.nan if x is None else float(x) for x in v)
    return ConfidenceInterval(lo, hi)


@dataclass
class ModelBootstrap:
    """Bootstrap replicates of one model of one population.

    Every replicate keeps its place (index ``r`` is the ``r``-th block draw, the same draw
    for every population of a dataset), so that two populations' replicates pair up by
    index; a replicate whose refit failed holds NaN, one that did not converge is marked.

    Attributes
    ----------
    replicates : int
        Replicates whose refit converged (those the intervals are made from).
    failed : int
        Replicates without a result or whose refit did not converge.
    params : dict of str to ndarray, shape (B,)
        Parameter values per replicate (DFE parameters, ``eps``, ``fixation_ratio`` and,
        with divergence data, the α estimates); NaN where the refit failed.
    shares : ndarray, shape (B, bands)
        Band shares per replicate (NaN rows where the refit failed).
    params_ci, shares_ci
        Percentile intervals of the parameters and of the share of each band, from the
        converged replicates.
    converged : ndarray of bool, shape (B,)
        Whether each replicate's refit converged.
    loglik : ndarray, shape (B,)
        Log-likelihood of each refit (for the Akaike weights of each replicate).
    score : ndarray, shape (B, dim), or None
        Gradient of each replicate's negative profile log-likelihood at the point
        estimate, on the optimiser's scale (DFE vector, then logit ε when free); NaN
        rows where the replicate has no data.
    """

    replicates: int
    failed: int
    params: dict[str, np.ndarray]
    shares: np.ndarray
    params_ci: dict[str, ConfidenceInterval]
    shares_ci: list[ConfidenceInterval]
    converged: np.ndarray | None = None
    loglik: np.ndarray | None = None
    score: np.ndarray | None = None

    @property
    def ok(self) -> np.ndarray:
        """Mask of the replicates that count (converged, with finite shares)."""
        fin = np.all(np.isfinite(self.shares), axis=1) if self.shares.size else np.zeros(0, bool)
        return fin if self.converged is None else fin & self.converged

    def share_draws(self, band: int = 0) -> np.ndarray:
        """The share of one band per replicate, NaN where the replicate does not count."""
        if not self.shares.size:
            return np.empty(0)
        return np.where(self.ok, self.shares[:, band], np.nan)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        out: dict[str, Any] = {
            "replicates": self.replicates,
            "failed": self.failed,
            "params": {p: v.tolist() for p, v in self.params.items()},
            "shares": self.shares.tolist(),
            "params_ci": {p: list(ci) for p, ci in self.params_ci.items()},
            "shares_ci": [list(ci) for ci in self.shares_ci],
        }
        if self.converged is not None:
            out["converged"] = [bool(v) for v in self.converged]
        if self.loglik is not None:
            out["loglik"] = self.loglik.tolist()
        if self.score is not None:
            out["score"] = self.score.tolist()
        return out

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> ModelBootstrap:
        """Back from :meth:`to_dict` (files of schema version 1 have no placeholders)."""
        shares_ci = [_interval(v) for v in d["shares_ci"]]
        rows = [_floats([np.nan] * len(shares_ci) if r is None else r) for r in d["shares"]]
        shares = np.array(rows) if rows else np.empty((0, len(shares_ci)))
        conv = d.get("converged")
        ll = d.get("loglik")
        sc = d.get("score")
        return cls(
            int(d["replicates"]),
            int(d["failed"]),
            {str(p): _floats(v) for p, v in d["params"].items()},
            shares,
            {str(p): _interval(v) for p, v in d["params_ci"].items()},
            shares_ci,
            None if conv is None else np.array([bool(v) for v in conv]),
            None if ll is None else _floats(ll),
            None if sc is None else np.array([_floats(r) for r in sc]),
        )


@dataclass
class AveragedBootstrap:
    """Model-averaged band shares per bootstrap replicate.

    In every replicate the Akaike weights are recomputed from that replicate's refits of
    every family (Burnham & Anderson 2002, ch. 4, on model-averaged estimates). The
    intervals are those of the weighted mixture of the families' replicates
    (:func:`driftband.fit.bootstrap.mixture_interval`, after Turek & Fletcher 2012), so
    that they carry the disagreement between the families as well as sampling error.

    Attributes
    ----------
    shares : ndarray, shape (B, bands)
        NaN rows where no family's refit converged.
    weights : dict of str to ndarray, shape (B,)
        The Akaike weight of each family in each replicate.
    shares_ci : list of ConfidenceInterval
    """

    shares: np.ndarray
    weights: dict[str, np.ndarray]
    shares_ci: list[ConfidenceInterval]

    @property
    def replicates(self) -> int:
        """Replicates with an averaged share."""
        return int(np.sum(np.all(np.isfinite(self.shares), axis=1))) if self.shares.size else 0

    def share_draws(self, band: int = 0) -> np.ndarray:
        """The averaged share of one band per replicate (NaN where there is none)."""
        return self.shares[:, band] if self.shares.size else np.empty(0)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        return {
            "shares": self.shares.tolist(),
            "weights": {k: v.tolist() for k, v in self.weights.items()},
            "shares_ci": [list(ci) for ci in self.shares_ci],
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> AveragedBootstrap:
        """Back from :meth:`to_dict`."""
        shares_ci = [_interval(v) for v in d["shares_ci"]]
        rows = [_floats(r) for r in d["shares"]]
        return cls(
            np.array(rows) if rows else np.empty((0, len(shares_ci))),
            {str(k): _floats(v) for k, v in d["weights"].items()},
            shares_ci,
        )


@dataclass
class BootstrapResult:
    """The block bootstrap of one population.

    Attributes
    ----------
    replicates : int
        Replicates asked for.
    blocks : int
        Genomic blocks resampled.
    seed : int
    level : float
        Confidence level of the intervals.
    models : dict of str to ModelBootstrap
        The models refitted in every replicate.
    averaged : AveragedBootstrap or None
        Model-averaged shares per replicate (when every family was refitted).
    distinct : int or None
        Distinct block draws among the replicates.
    neutral_pi : ndarray, shape (B,), or None
        π per site of the neutral class in each replicate (NaN where the replicate has no
        data), for tests whose Ne ratio comes from neutral diversity.
    """

    replicates: int
    blocks: int
    seed: int
    level: float
    models: dict[str, ModelBootstrap] = field(default_factory=dict)
    averaged: AveragedBootstrap | None = None
    distinct: int | None = None
    neutral_pi: np.ndarray | None = None

    @property
    def few_blocks(self) -> bool:
        """Fewer genomic blocks than :data:`~driftband.defaults.MIN_BLOCKS`."""
        return self.blocks < MIN_BLOCKS

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        out: dict[str, Any] = {
            "replicates": self.replicates,
            "blocks": self.blocks,
            "seed": self.seed,
            "level": self.level,
            "models": {k: m.to_dict() for k, m in self.models.items()},
        }
        if self.distinct is not None:
            out["distinct_replicates"] = self.distinct
        if self.averaged is not None:
            out["averaged"] = self.averaged.to_dict()
        if self.neutral_pi is not None:
            out["neutral_pi"] = self.neutral_pi.tolist()
        return out

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> BootstrapResult:
        """Back from :meth:`to_dict`."""
        av = d.get("averaged")
        dist = d.get("distinct_replicates")
        npi = d.get("neutral_pi")
        return cls(
            int(d["replicates"]),
            int(d["blocks"]),
            int(d["seed"]),
            float(d["level"]),
            {str(k): ModelBootstrap.from_dict(v) for k, v in d["models"].items()},
            None if av is None else AveragedBootstrap.from_dict(av),
            None if dist is None else int(dist),
            None if npi is None else _floats(npi),
        )


def akaike_weights(aic: dict[str, float]) -> dict[str, float]:
    """Akaike weights w_k ∝ exp(−ΔAIC_k / 2) (Burnham & Anderson 2002, sec. 2.9).

    Parameters
    ----------
    aic : dict of str to float
        AIC of each model; non-finite values get weight 0.

    Returns
    -------
    dict of str to float
        Summing to 1 (all NaN when no AIC is finite).

    Examples
    --------
    >>> w = akaike_weights({"a": 100.0, "b": 102.0})
    >>> round(w["a"], 4), round(w["b"], 4)
    (0.7311, 0.2689)
    """
    v = np.array([aic[k] for k in aic], dtype=float)
    fin = np.isfinite(v)
    if not fin.any():
        return {k: float("nan") for k in aic}
    w = np.where(fin, np.exp(-0.5 * (np.where(fin, v, 0.0) - v[fin].min())), 0.0)
    w /= w.sum()
    return {k: float(x) for k, x in zip(aic, w)}


@dataclass
class Headline:
    """The headline band shares of one population, with their interval and caveats.

    Attributes
    ----------
    method : {"averaged", "best"}
    model : str
        ``averaged`` or the AIC-best model's name.
    shares : ndarray, shape (bands,)
    shares_ci : list of ConfidenceInterval or None
        None without a bootstrap.
    weights : dict of str to float
        Akaike weight of each family (point fits); the best model has 1 under "best".
    interval_reliable : bool
        False when the bootstrap had fewer than 20 blocks or no usable replicate.
    notes : list of str
        Caveats in plain words (few blocks, families that disagree, ...).
    """

    method: str
    model: str
    shares: np.ndarray
    shares_ci: list[ConfidenceInterval] | None
    weights: dict[str, float]
    interval_reliable: bool
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        return {
            "method": self.method,
            "model": self.model,
            "shares": self.shares.tolist(),
            "shares_ci": None if self.shares_ci is None else [list(c) for c in self.shares_ci],
            "weights": self.weights,
            "interval_reliable": self.interval_reliable,
            "notes": list(self.notes),
        }


@dataclass
class PopulationFit:
    """All model fits of one population, the AIC choice and the bootstrap.

    Attributes
    ----------
    population : str
    data : SpectrumPair
    fits : dict of str to FitResult
        By model name, in the order fitted.
    dataset : str
        The dataset (label or spectra file) the population comes from; populations of
        one dataset share genomic blocks and are resampled together.
    bootstrap : BootstrapResult or None
    headline_method : {"averaged", "best"}
        How :meth:`headline` makes the headline shares.
    """

    population: str
    data: SpectrumPair
    fits: dict[str, FitResult]
    dataset: str = ""
    bootstrap: BootstrapResult | None = None
    headline_method: str = "averaged"

    @property
    def best(self) -> FitResult:
        """The model with the lowest AIC among those that converged (else overall)."""
        ok = [f for f in self.fits.values() if f.success] or list(self.fits.values())
        return min(ok, key=lambda f: f.aic)

    def aic_table(self) -> list[dict[str, Any]]:
        """Models sorted by AIC with ΔAIC and Akaike weights."""
        rows = sorted(self.fits.values(), key=lambda f: f.aic)
        a0 = rows[0].aic
        w = np.exp(-0.5 * (np.array([f.aic for f in rows]) - a0))
        w /= w.sum()
        return [
            {
                "model": f.model,
                "loglik": f.loglik,
                "n_params": f.n_params,
                "aic": f.aic,
                "delta_aic": f.aic - a0,
                "weight": float(wk),
                "converged": f.success,
            }
            for f, wk in zip(rows, w)
        ]

    def model_bootstrap(self, model: str) -> ModelBootstrap | None:
        """The bootstrap of one model, if it was refitted."""
        return None if self.bootstrap is None else self.bootstrap.models.get(model)

    def weights(self) -> dict[str, float]:
        """Akaike weights of the families that converged (0 for the others)."""
        ok = {k: f.aic for k, f in self.fits.items() if f.success}
        if not ok:  # nothing converged: weigh them all, the flags say so
            ok = {k: f.aic for k, f in self.fits.items()}
        w = akaike_weights(ok)
        return {k: w.get(k, 0.0) for k in self.fits}

    def headline(self, method: str | None = None) -> Headline:
        """The headline band shares: Akaike-weighted over the families, or the best one.

        Parameters
        ----------
        method : {"averaged", "best"}, optional
            Default :attr:`headline_method`.

        Returns
        -------
        Headline
        """
        method = method or self.headline_method
        boot = self.bootstrap
        notes: list[str] = []
        weights = self.weights()
        ci: list[ConfidenceInterval] | None = None
        if method == "best" or len(self.fits) == 1:
            best = self.best
            model, shares = best.model, np.asarray(best.shares, dtype=float)
            weights = {k: float(k == best.model) for k in self.fits}
            mb = self.model_bootstrap(best.model)
            ci = None if mb is None else list(mb.shares_ci)
        else:
            model = "averaged"
            shares = np.sum(
                [w * np.asarray(self.fits[k].shares) for k, w in weights.items() if w > 0], axis=0
            )
            if boot is not None and boot.averaged is not None:
                ci = list(boot.averaged.shares_ci)
            elif boot is not None:
                notes.append(
                    "no interval for the averaged shares: not every family was "
                    "bootstrapped (bootstrap every model to get one)"
                )
        reliable = ci is not None and all(np.isfinite([c.low for c in ci] + [c.high for c in ci]))
        if boot is not None and boot.few_blocks:
            reliable = False
            notes.append(
                f"only {boot.blocks} genomic blocks: intervals from fewer than "
                f"{MIN_BLOCKS} blocks are unreliable"
            )
        if boot is not None and boot.replicates < DEFAULT_REPLICATES:
            notes.append(
                f"{boot.replicates} bootstrap replicates: percentile intervals from "
                f"fewer than {DEFAULT_REPLICATES} are short (about 91.6 % coverage at B = 50 "
                "and 93.3 % at B = 100 for a nominal 95 %)"
            )
        for k, mb in (boot.models if boot is not None else {}).items():
            if (
                weights.get(k, 0.0) > 0.05
                and mb.shares.shape[0]
                and mb.failed > mb.shares.shape[0] / 2
            ):
                notes.append(
                    f"the {k} family (Akaike weight {weights[k]:.2f}) failed or did not "
                    f"converge in {mb.failed} of {mb.shares.shape[0]} bootstrap replicates; "
                    "the interval leaves it out of those replicates"
                )
        ok_aic = {k: f.aic for k, f in self.fits.items() if f.success}
        close = [k for k, a in ok_aic.items() if a - min(ok_aic.values()) < 2]
        if len(close) > 1 and ci is not None and reliable:
            vals = [float(self.fits[k].shares[0]) for k in close]
            width = ci[0].high - ci[0].low
            if max(vals) - min(vals) > width:
                notes.append(
                    "families within 2 AIC units of the best disagree on the "
                    f"effectively neutral share ({min(vals):.3f} to {max(vals):.3f}) "
                    f"by more than the interval's width ({width:.3f})"
                )
        return Headline(method, model, shares, ci, weights, reliable, notes)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready (one population of a fit file)."""
        return {
            "dataset": self.dataset,
            "best_model": self.best.model,
            "data": self.data.to_dict(),
            "aic_table": self.aic_table(),
            "models": {k: f.to_dict() for k, f in self.fits.items()},
            "bootstrap": {} if self.bootstrap is None else self.bootstrap.to_dict(),
            "headline": self.headline().to_dict(),
            "adaptive": {k: adaptive_summary(self.data, f) for k, f in self.fits.items()},
        }

    @classmethod
    def from_dict(cls, population: str, d: dict[str, Any]) -> PopulationFit:
        """Back from :meth:`to_dict` (derived entries such as the AIC table are recomputed).

        Raises
        ------
        KeyError, TypeError, ValueError
            A missing or malformed entry.
        """
        boot = d.get("bootstrap") or None
        return cls(
            population,
            SpectrumPair.from_dict(d["data"]),
            {str(k): FitResult.from_dict(v) for k, v in d["models"].items()},
            dataset=str(d.get("dataset", "")),
            bootstrap=None if boot is None else BootstrapResult.from_dict(boot),
            headline_method=str((d.get("headline") or {}).get("method", "best")),
        )
