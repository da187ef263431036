"""Fit files (JSON) and the band table (TSV).

The fit file, schema ``driftband-fit`` version 1::

    {"schema": "driftband-fit", "schema_version": 1,
     "options": {...FitOptions...},
     "populations": {
        "lake": {"dataset": "", "best_model": "gamma",
                 "data": {"n": 20, "folded": false, "neutral": [...], "selected": [...],
                          "sites_neutral": ..., "sites_selected": ...,
                          "fixed_neutral": ..., "fixed_selected": ...},
                 "aic_table": [...],
                 "models": {"gamma": {...FitResult.to_dict()...}, ...},
                 "bootstrap": {...}}},
     "provenance": {...}}

``bands.tsv`` has one row per population and band for the AIC-best model, columns
``population, band, nes_low, nes_high, S_low, S_high, share, ci_low, ci_high, model``
(``nes_*`` on |Ne·s|, ``S_*`` on |S| = 4|Ne·s|; ``nes_high`` of the last band is ``inf``;
interval columns are empty without a bootstrap).
"""

from __future__ import annotations

import csv
import json
import os
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._io import atomic_output, json_ready, tsv_cell
from ..exceptions import InputError
from .options import FitOptions
from .results import PopulationFit

__all__ = [
    "BANDS_COLUMNS",
    "FIT_SCHEMA",
    "FitFile",
    "band_label",
    "band_rows",
    "check_fit_schema",
    "fit_document",
    "read_fit_files",
    "read_fit_json",
    "read_fits",
    "write_bands_tsv",
    "write_fit_json",
]

FIT_SCHEMA = "driftband-fit"
FIT_SCHEMA_VERSION = 1
#: Columns of ``bands.tsv``.
BANDS_COLUMNS = [
    "population",
    "band",
    "nes_low",
    "nes_high",
    "S_low",
    "S_high",
    "share",
    "ci_low",
    "ci_high",
    "model",
]


def fit_document(
    fits: list[PopulationFit], options: dict[str, Any], provenance: dict[str, Any]
) -> dict[str, Any]:
    """The JSON document of a list of population fits.

    Parameters
    ----------
    fits : list of PopulationFit
    options : dict
        :meth:`FitOptions.to_dict` and the settings of the stages that made the fits
        (bootstrap, model compared).
    provenance : dict

    Returns
    -------
    dict
        JSON-ready (NaN and inf as null).
    """
    pops = {pf.population: pf.to_dict() for pf in fits}
    return json_ready(
        {
            "schema": FIT_SCHEMA,
            "schema_version": FIT_SCHEMA_VERSION,
            "options": options,
            "populations": pops,
            "provenance": provenance,
        }
    )


def write_fit_json(doc: dict[str, Any], path: str | os.PathLike, force: bool = False) -> None:
    """Write a fit document atomically."""
    with atomic_output(path, force=force) as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")


def read_fit_json(path: str | os.PathLike) -> dict[str, Any]:
    """Read a fit file and check its schema.

    Raises
    ------
    InputError
        Not a fit file or an unsupported version.
    """
    try:
        with open(path, encoding="utf-8") as fh:
            doc = json.load(fh)
    except FileNotFoundError:
        raise InputError("file not found", path) from None
    except (json.JSONDecodeError, UnicodeDecodeError) as err:
        raise InputError(f"not a fit JSON file ({err})", path) from None
    check_fit_schema(doc, path)
    return doc


def check_fit_schema(doc: Any, path: str | os.PathLike | None = None) -> None:
    """Raise InputError unless ``doc`` is a fit document of the supported version."""
    if not isinstance(doc, dict) or doc.get("schema") != FIT_SCHEMA:
        raise InputError(
            f'not a fit file (expected "schema": "{FIT_SCHEMA}"; make one with \'driftband fit\')',
            path,
        )
    if doc.get("schema_version") != FIT_SCHEMA_VERSION:
        raise InputError(
            f"fit schema version {doc.get('schema_version')!r} is not "
            f"supported (this driftband reads {FIT_SCHEMA_VERSION})",
            path,
        )


@dataclass
class FitFile:
    """A fit file read back as typed objects.

    Attributes
    ----------
    path : str
    options : FitOptions
    populations : list of PopulationFit
        In the order of the file.
    settings : dict
        The whole ``options`` entry (besides the fit options: the bootstrap settings and,
        from ``driftband run``, the model compared).
    provenance : dict
    """

    path: str
    options: FitOptions
    populations: list[PopulationFit]
    settings: dict[str, Any] = field(default_factory=dict)
    provenance: dict[str, Any] = field(default_factory=dict)


def read_fits(path: str | os.PathLike) -> FitFile:
    """Read a fit file into typed population fits (the one reader of population fits).

    Raises
    ------
    InputError
        Not a fit file, or an entry that cannot be read back (named).
    """
    doc = read_fit_json(path)
    try:
        options = FitOptions.from_dict(doc.get("options") or {})
        pops = [PopulationFit.from_dict(name, p) for name, p in doc["populations"].items()]
    except (KeyError, TypeError, ValueError, AttributeError) as err:
        what = f"missing entry {err}" if isinstance(err, KeyError) else str(err)
        raise InputError(
            f"the fit file cannot be read back ({what}); remake it with 'driftband fit'", path
        ) from None
    return FitFile(
        os.fspath(path),
        options,
        pops,
        dict(doc.get("options") or {}),
        dict(doc.get("provenance") or {}),
    )


def read_fit_files(paths: list[str]) -> tuple[FitOptions, list[PopulationFit]]:
    """The populations of several fit files (names must be unique) and the first's options.

    Raises
    ------
    InputError
        A population in two files (refit with labels), or a file that is not a fit file.
    """
    files = [read_fits(p) for p in paths]
    where: dict[str, str] = {}
    fits: list[PopulationFit] = []
    for ff in files:
        for pf in ff.populations:
            if pf.population in where:
                raise InputError(
                    f"population {pf.population!r} is in both "
                    f"{where[pf.population]} and {ff.path}; refit with --label "
                    "FILE=NAME to tell them apart",
                    ff.path,
                )
            where[pf.population] = ff.path
            fits.append(pf)
    return files[0].options, fits


def band_label(lo: float, hi: float) -> str:
    """Readable band name on |Ne·s|, e.g. ``0-1`` or ``>=100``."""
    if not np.isfinite(hi):
        return f">={lo:g}"
    return f"{lo:g}-{hi:g}"


def band_rows(fits: list[PopulationFit]) -> list[dict[str, Any]]:
    """Rows of ``bands.tsv`` (AIC-best model of each population; columns
    :data:`BANDS_COLUMNS`)."""
    rows = []
    for pf in fits:
        f = pf.best
        edges = list(f.band_edges) + [float("inf")]
        mb = pf.model_bootstrap(f.model)
        for k, share in enumerate(f.shares):
            lo, hi = edges[k], edges[k + 1]
            rows.append(
                {
                    "population": pf.population,
                    "band": band_label(lo, hi),
                    "nes_low": lo,
                    "nes_high": hi,
                    "S_low": 4 * lo,
                    "S_high": 4 * hi,
                    "share": float(share),
                    "ci_low": None if mb is None else mb.shares_ci[k].low,
                    "ci_high": None if mb is None else mb.shares_ci[k].high,
                    "model": f.model,
                }
            )
    return rows


def write_bands_tsv(
    fits: list[PopulationFit], path: str | os.PathLike, force: bool = False
) -> None:
    """Write ``bands.tsv`` atomically."""
    with atomic_output(path, force=force, newline="") as fh:
        w = csv.writer(fh, delimiter="\t", lineterminator="\n")
        w.writerow(BANDS_COLUMNS)
        for r in band_rows(fits):
            w.writerow([tsv_cell(r[c]) for c in BANDS_COLUMNS])
