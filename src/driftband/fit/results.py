"""Result objects of the fit stage: all model fits of a population, and their bootstrap.

Plain dataclasses with symmetric ``to_dict`` / ``from_dict`` (the form they take in a fit
file), so that every stage after the fit works on typed objects and numbers stay numbers.
No I/O here: :mod:`driftband.fit.io` reads and writes the files.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, NamedTuple

import numpy as np

from .adaptive import adaptive_summary
from .likelihood import SpectrumPair
from .mle import FitResult

__all__ = ["BootstrapResult", "ConfidenceInterval", "ModelBootstrap", "PopulationFit"]


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

    Attributes
    ----------
    replicates : int
        Replicates whose refit returned a result.
    failed : int
        Replicates without a result or whose refit did not converge.
    params : dict of str to ndarray, shape (replicates,)
        Parameter values per replicate (DFE parameters, ``eps``, ``fixation_ratio`` and,
        with divergence data, the α estimates).
    shares : ndarray, shape (replicates, bands)
        Band shares per replicate.
    params_ci, shares_ci
        Percentile intervals of the parameters and of the share of each band.
    """

    replicates: int
    failed: int
    params: dict[str, np.ndarray]
    shares: np.ndarray
    params_ci: dict[str, ConfidenceInterval]
    shares_ci: list[ConfidenceInterval]

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        return {
            "replicates": self.replicates,
            "failed": self.failed,
            "params": {p: v.tolist() for p, v in self.params.items()},
            "shares": self.shares.tolist(),
            "params_ci": {p: list(ci) for p, ci in self.params_ci.items()},
            "shares_ci": [list(ci) for ci in self.shares_ci],
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> ModelBootstrap:
        """Back from :meth:`to_dict`."""
        shares_ci = [_interval(v) for v in d["shares_ci"]]
        rows = [_floats(r) for r in d["shares"]]
        shares = np.array(rows) if rows else np.empty((0, len(shares_ci)))
        return cls(
            int(d["replicates"]),
            int(d["failed"]),
            {str(p): _floats(v) for p, v in d["params"].items()},
            shares,
            {str(p): _interval(v) for p, v in d["params_ci"].items()},
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
    """

    replicates: int
    blocks: int
    seed: int
    level: float
    models: dict[str, ModelBootstrap] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        return {
            "replicates": self.replicates,
            "blocks": self.blocks,
            "seed": self.seed,
            "level": self.level,
            "models": {k: m.to_dict() for k, m in self.models.items()},
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> BootstrapResult:
        """Back from :meth:`to_dict`."""
        return cls(
            int(d["replicates"]),
            int(d["blocks"]),
            int(d["seed"]),
            float(d["level"]),
            {str(k): ModelBootstrap.from_dict(v) for k, v in d["models"].items()},
        )


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
    """

    population: str
    data: SpectrumPair
    fits: dict[str, FitResult]
    dataset: str = ""
    bootstrap: BootstrapResult | None = None

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

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready (one population of a fit file)."""
        return {
            "dataset": self.dataset,
            "best_model": self.best.model,
            "data": self.data.to_dict(),
            "aic_table": self.aic_table(),
            "models": {k: f.to_dict() for k, f in self.fits.items()},
            "bootstrap": {} if self.bootstrap is None else self.bootstrap.to_dict(),
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
        )
