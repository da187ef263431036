"""The fit stage: every DFE model fitted to every population of one or more spectra sets.

:func:`fit_spectra` is the one orchestration of the point fits, used by ``driftband fit``
and by ``driftband run``: it pools the populations of the spectra sets (labelled when
there are several), fits one task per population and model on worker processes or a
dask cluster (:mod:`driftband._parallel`), and returns typed :class:`PopulationFit`
objects in a fixed order whatever ran the tasks.
"""

from __future__ import annotations

import dataclasses
import functools
import logging
import os
import warnings
from dataclasses import dataclass
from typing import Any

from .._options import COMMAND_LINE, OptionSource
from .._parallel import parallel_map
from .._progress import Progress
from ..demography import read_demes_history
from ..exceptions import InputError
from ..prf.dfe import DfeExpectation
from ..prf.history import History
from .likelihood import SpectrumPair
from .mle import FitResult, fit_model
from .options import FitOptions
from .results import PopulationFit
from .size_history import demes_path, prepare_history

__all__ = [
    "LabelledSpectra",
    "block_spectra",
    "covered_bp",
    "check_models_for_data",
    "demes_histories",
    "fit_population",
    "fit_spectra",
    "pool_populations",
]

log = logging.getLogger("driftband")


@dataclass(frozen=True)
class LabelledSpectra:
    """A spectra set and how its populations are named and grouped.

    Attributes
    ----------
    path : str
        The spectra file (for messages and provenance).
    spectra : SpectraSet
    label : str
        Prefix of the population names (``label/pop``); empty for none.
    dataset : str
        The dataset the populations belong to (default: the label, else the path).
        Populations of one dataset share genomic blocks and are resampled together.
    """

    path: str
    spectra: Any
    label: str = ""
    dataset: str = ""

    @property
    def dataset_name(self) -> str:
        """The dataset, the label or the path, in that order."""
        return self.dataset or self.label or os.fspath(self.path)

    def population_name(self, pop: str) -> str:
        """The name of population ``pop`` of this set after labelling."""
        return f"{self.label}/{pop}" if self.label else pop


def covered_bp(spectra_sets: list[LabelledSpectra]) -> dict[str, int]:
    """Base pairs covered by the bootstrap blocks of each population's spectra set.

    Returns
    -------
    dict of str to int
        By population name after labelling; 0 when the set lists no blocks.
    """
    return {
        ls.population_name(n): int(sum(b.end - b.start for b in ls.spectra.blocks))
        for ls in spectra_sets
        for n in ls.spectra.populations
    }


def block_spectra(spectra_sets: list[LabelledSpectra]) -> dict[str, Any]:
    """The per-block spectra of every population, by its name after labelling.

    Returns
    -------
    dict of str to PopulationSpectra
        What :func:`driftband.fit.bootstrap.bootstrap_fits` resamples.
    """
    return {
        ls.population_name(n): pop
        for ls in spectra_sets
        for n, pop in ls.spectra.populations.items()
    }


@functools.lru_cache(maxsize=8)
def _expectation(n: int) -> DfeExpectation:
    """The per-n table of expected spectra, built once per process."""
    return DfeExpectation(n)


def fit_population(
    data: SpectrumPair,
    options: FitOptions,
    population: str = "",
    expectation: DfeExpectation | None = None,
    demes_history: History | None = None,
) -> PopulationFit:
    """Fit every model of ``options`` to one population.

    Parameters
    ----------
    data : SpectrumPair
    options : FitOptions
    population : str
    expectation : DfeExpectation, optional
        Per-n table to reuse (default: one per n and process).
    demes_history : History, optional
        The population's history read from ``demes:FILE``.

    Returns
    -------
    PopulationFit

    Notes
    -----
    With an explicit size history (``options.demography``) the history is fitted to the
    neutral class once, and every model is fitted given it
    (:func:`~driftband.fit.size_history.prepare_history`).
    """
    ex = expectation or _expectation(data.n)
    history = None
    if options.explicit_history:
        history = prepare_history(
            data,
            options.demography,
            options.eps,
            demes_history,
            beneficial=any(m.beneficial for m in options.models),
        )
        log.info(
            "size history of %s: %s %s", population or "population", history.model, history.params
        )
    fits = {}
    for m in options.models:
        log.info("fitting %s to %s (n=%d)", m.name, population, data.n)
        fits[m.name] = fit_model(
            data,
            m,
            population=population,
            eps=options.eps,
            equilibrium=options.equilibrium,
            edges_nes=options.edges_nes,
            expectation=ex,
            history=history,
        )
    if options.demography == "auto":
        fits = _auto_against_nuisance(data, options, population, ex, fits)
    return PopulationFit(population, data, fits, headline_method=options.headline)


def _auto_against_nuisance(
    data: SpectrumPair,
    options: FitOptions,
    population: str,
    ex: DfeExpectation,
    fits: dict[str, FitResult],
) -> dict[str, FitResult]:
    """``auto``: the fits under the chosen history against those with nuisance factors,
    by the lowest AIC of any family; the winners, with the comparison recorded."""

    # the nuisance-factor fits' warnings are the user's only if those fits are kept
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        nuis = {
            m.name: fit_model(
                data,
                m,
                population=population,
                eps=options.eps,
                equilibrium=False,
                edges_nes=options.edges_nes,
                expectation=ex,
            )
            for m in options.models
        }
    aic_hist = min(f.aic for f in fits.values())
    aic_nuis = min(f.aic for f in nuis.values())
    hist = next(iter(fits.values())).size_history or {}
    record = {
        "aic_nuisance_factors": {k: f.aic for k, f in nuis.items()},
        "aic_history": {k: f.aic for k, f in fits.items()},
    }
    if aic_nuis < aic_hist:
        log.info(
            "size history of %s: nuisance factors kept (AIC %.2f against %.2f for %s)",
            population or "population",
            aic_nuis,
            aic_hist,
            hist.get("model"),
        )
        for w in caught:  # as a plain nuisance-factor fit would have given them
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        note = {"requested": "auto", "model": "nuisance", "rejected_history": hist} | record
        for f in nuis.values():
            f.size_history = note
        return nuis
    for f in fits.values():
        if f.size_history is not None:
            f.size_history = f.size_history | record
    return fits


def demes_histories(
    pooled: list[tuple[str, str, SpectrumPair]], options: FitOptions
) -> dict[str, History]:
    """The history of each population from ``--demography demes:FILE`` (else empty).

    The deme of a population is named as the population (without a ``label/`` prefix).

    Raises
    ------
    InputError
        The file is not a usable demes graph or has no deme of that name.
    """
    path = demes_path(options.demography)
    if path is None:
        return {}
    return {
        name: read_demes_history(path, name.rsplit("/", 1)[-1]).history for name, _ds, _d in pooled
    }


def pool_populations(
    spectra_sets: list[LabelledSpectra],
    options: FitOptions,
    populations: list[str] | None = None,
) -> list[tuple[str, str, SpectrumPair]]:
    """Collect ``(name, dataset, SpectrumPair)`` from several spectra sets.

    Parameters
    ----------
    spectra_sets : list of LabelledSpectra
    options : FitOptions
    populations : list of str, optional
        Keep only these (names after labelling).

    Returns
    -------
    list of (str, str, SpectrumPair)

    Raises
    ------
    InputError
        The same population name in two files without labels; an unknown population.
    """
    out: list[tuple[str, str, SpectrumPair]] = []
    seen: dict[str, str] = {}
    for ls in spectra_sets:
        for name, pop in ls.spectra.populations.items():
            full = ls.population_name(name)
            if full in seen:
                raise InputError(
                    f"population {full!r} is in both {seen[full]} and "
                    f"{ls.path}; give the files labels, e.g. --label "
                    f"{ls.path}=NAME",
                    ls.path,
                )
            seen[full] = ls.path
            if populations is not None and full not in populations:
                continue
            out.append(
                (
                    full,
                    ls.dataset_name,
                    SpectrumPair.from_population(
                        pop, options.neutral, options.selected, path=ls.path
                    ),
                )
            )
    if populations is not None:
        missing = [p for p in populations if p not in seen]
        if missing:
            raise InputError(
                f"population {missing[0]!r} is not in the spectra (they hold "
                f"{', '.join(sorted(seen))})"
            )
    if not out:
        raise InputError("no population to fit")
    return out


def check_models_for_data(
    pooled: list[tuple[str, str, SpectrumPair]],
    options: FitOptions,
    source: OptionSource = COMMAND_LINE,
) -> None:
    """Refuse a beneficial class on folded spectra, naming the option and the population.

    Folding removes the polarity of S (a derived allele at frequency x and one at 1 − x
    fall in one class), so a beneficial mass and a deleterious one are not identifiable.

    Raises
    ------
    OptionError or InputError
        A model with a beneficial class and a population with folded spectra (an
        InputError naming the study file when the models came from one).
    """
    ben = [m.name for m in options.models if m.beneficial]
    folded = [name for name, _ds, data in pooled if data.folded]
    if ben and folded:
        raise source.error(
            "dfe",
            f"(or {source.name('beneficial')}) asks for {ben[0]}, but population "
            f"{folded[0]!r} has folded spectra: folding removes the sign of S, so a "
            "beneficial class is not identifiable; drop the beneficial class or use "
            "unfolded spectra (with an outgroup)",
        )


def _fit_task(
    task: tuple[SpectrumPair, FitOptions, str, History | None],
) -> dict[str, FitResult]:
    """Fit the models of ``options`` to one population (runs in a worker process)."""
    data, options, name, fixed = task
    return fit_population(data, options, name, demes_history=fixed).fits


def fit_spectra(
    spectra_sets: list[LabelledSpectra],
    options: FitOptions,
    populations: list[str] | None = None,
    *,
    workers: int | None = 1,
    scheduler: Any = None,
    source: OptionSource = COMMAND_LINE,
) -> list[PopulationFit]:
    """Point fits of every model of ``options`` to every population of the spectra sets.

    Parameters
    ----------
    spectra_sets : list of LabelledSpectra
    options : FitOptions
    populations : list of str, optional
        Fit only these (names after labelling).
    workers : int, optional
        Local worker processes, one task per population and model (default 1: in this
        process; None: the cores available). The results do not depend on it.
    scheduler : str or distributed.Client, optional
        Run the tasks on a dask cluster instead.
    source : OptionSource
        Where the options came from (for messages).

    Returns
    -------
    list of PopulationFit
        In the order of the spectra sets and their populations.

    Raises
    ------
    InputError or OptionError
        See :func:`pool_populations` and :func:`check_models_for_data`.
    """
    pooled = pool_populations(spectra_sets, options, populations)
    check_models_for_data(pooled, options, source)
    fixed = demes_histories(pooled, options)
    # with an explicit history, one task per population: its history is fitted once
    groups = [options.models] if options.explicit_history else [(m,) for m in options.models]
    tasks = [
        (data, dataclasses.replace(options, models=g), name, fixed.get(name))
        for name, _ds, data in pooled
        for g in groups
    ]
    for name, _ds, data in pooled:
        log.info("fit: %s (n = %d): %s", name, data.n, ", ".join(m.name for m in options.models))
    if scheduler is None and len(tasks) <= 1:
        workers = 1
    with Progress("fit", len(tasks), "models fitted") as prog:
        results = parallel_map(
            _fit_task,
            tasks,
            workers=workers,
            scheduler=scheduler,
            name="fit",
            on_result=lambda _i, _r: prog.advance(),
        )
    done = iter(results)
    fits = []
    for name, dataset, data in pooled:
        pf = PopulationFit(name, data, {}, dataset=dataset, headline_method=options.headline)
        for _g in groups:
            pf.fits.update(next(done))
        for f in pf.fits.values():
            if not f.success:
                log.warning("fit: %s, model %s did not converge (%s)", name, f.model, f.message)
        best = pf.best
        log.info(
            "fit: %s: best model %s (AIC %.2f), share with |Ne*s| < %g: %.3f",
            name,
            best.model,
            best.aic,
            options.shown_edges[1],
            best.shares[0],
        )
        fits.append(pf)
    return fits
