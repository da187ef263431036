"""Fitting every population of one or more spectra sets: the API behind ``driftband fit``."""

from __future__ import annotations

import logging
import os
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..exceptions import InputError, OptionError
from ..prf.dfe import DfeExpectation
from .likelihood import SpectrumPair
from .mle import DEFAULT_EDGES, FitResult, fit_model
from .models import DfeModel

__all__ = ["FitOptions", "PopulationFit", "check_edges", "fit_population",
           "parse_misorientation", "pool_populations"]

log = logging.getLogger("driftband")


def check_edges(edges: tuple[float, ...]) -> tuple[float, ...]:
    """Validate |Ne·s| band edges: start at 0, strictly increasing, finite."""
    e = tuple(float(v) for v in edges)
    if len(e) < 2 or e[0] != 0.0 or any(b <= a for a, b in zip(e, e[1:])) or not all(
            np.isfinite(e)):
        raise OptionError(f"--bands {','.join(f'{v:g}' for v in e)}: edges on |Ne*s| must "
                          "start at 0 and increase strictly, e.g. 0,1,10,100")
    return e


def parse_misorientation(text: str) -> float | None:
    """``free`` → None; ``fixed:E`` → E (checked to lie in [0, 0.5))."""
    if text == "free":
        return None
    if text.startswith("fixed:"):
        try:
            e = float(text.split(":", 1)[1])
        except ValueError:
            e = float("nan")
        if not 0.0 <= e < 0.5:
            raise OptionError(f"--misorientation {text}: the rate must be a number in [0, 0.5)")
        return e
    raise OptionError(f"--misorientation {text!r}: use 'free' or 'fixed:RATE'")


@dataclass(frozen=True)
class FitOptions:
    """Options of a fit (recorded in the fit file).

    Attributes
    ----------
    neutral, selected : str
        Class names.
    models : tuple of DfeModel
    eps : float or None
        Fixed misorientation rate or None (estimated).
    equilibrium : bool
        Fix nuisance factors r_i = 1.
    edges_nes : tuple of float
    """

    neutral: str = "4fold"
    selected: str = "0fold"
    models: tuple[DfeModel, ...] = (DfeModel("gamma"),)
    eps: float | None = None
    equilibrium: bool = False
    edges_nes: tuple[float, ...] = DEFAULT_EDGES

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready."""
        return {"neutral": self.neutral, "selected": self.selected,
                "models": [m.name for m in self.models],
                "misorientation": "free" if self.eps is None else f"fixed:{self.eps:g}",
                "equilibrium": self.equilibrium, "band_edges_nes": list(self.edges_nes)}


@dataclass
class PopulationFit:
    """All model fits of one population and the AIC choice."""

    population: str
    data: SpectrumPair
    fits: dict[str, FitResult]
    dataset: str = ""
    bootstrap: dict[str, Any] = field(default_factory=dict)

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
        return [{"model": f.model, "loglik": f.loglik, "n_params": f.n_params,
                 "aic": f.aic, "delta_aic": f.aic - a0, "weight": float(wk),
                 "converged": f.success} for f, wk in zip(rows, w)]


def fit_population(data: SpectrumPair, options: FitOptions, population: str = "",
                   expectation: DfeExpectation | None = None) -> PopulationFit:
    """Fit every model of ``options`` to one population.

    Parameters
    ----------
    data : SpectrumPair
    options : FitOptions
    population : str
    expectation : DfeExpectation, optional
        Per-n table to reuse.

    Returns
    -------
    PopulationFit
    """
    if options.eps is not None and not 0.0 <= options.eps < 0.5:
        raise OptionError(f"--misorientation fixed:{options.eps:g}: the rate must be in "
                          "[0, 0.5)")
    ex = expectation or DfeExpectation(data.n)
    fits = {}
    for m in options.models:
        log.info("fitting %s to %s (n=%d)", m.name, population, data.n)
        fits[m.name] = fit_model(data, m, population=population, eps=options.eps,
                                 equilibrium=options.equilibrium,
                                 edges_nes=options.edges_nes, expectation=ex)
    return PopulationFit(population, data, fits)


def pool_populations(spectra_sets: list[tuple[str, str, Any]], options: FitOptions,
                     populations: list[str] | None = None,
                     ) -> list[tuple[str, str, SpectrumPair]]:
    """Collect ``(name, dataset, SpectrumPair)`` from several spectra sets.

    ``dataset`` is the file's label, or its path when it has none.

    Parameters
    ----------
    spectra_sets : list of (path, label, SpectraSet)
        ``label`` prefixes population names as ``label/pop`` when given.
    options : FitOptions
    populations : list of str, optional
        Keep only these (names after labelling).

    Raises
    ------
    InputError
        The same population name in two files without labels; an unknown population.
    """
    out: list[tuple[str, str, SpectrumPair]] = []
    seen: dict[str, str] = {}
    for path, label, ss in spectra_sets:
        for name, pop in ss.populations.items():
            full = f"{label}/{name}" if label else name
            if full in seen:
                raise InputError(f"population {full!r} is in both {seen[full]} and {path}; "
                                 f"give the files labels, e.g. --label {path}=NAME", path)
            seen[full] = path
            if populations is not None and full not in populations:
                continue
            out.append((full, label or os.fspath(path), SpectrumPair.from_population(
                pop, options.neutral, options.selected, path=path)))
    if populations is not None:
        missing = [p for p in populations if p not in seen]
        if missing:
            raise InputError(f"population {missing[0]!r} is not in the spectra (they hold "
                             f"{', '.join(sorted(seen))})")
    if not out:
        raise InputError("no population to fit")
    return out
