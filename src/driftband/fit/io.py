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
from typing import Any

import numpy as np

from .._io import atomic_output
from ..exceptions import InputError
from ..spectra.io import _clean
from .adaptive import adaptive_summary
from .api import PopulationFit
from .likelihood import SpectrumPair

__all__ = ["FIT_SCHEMA", "band_rows", "check_fit_schema", "read_fit_json", "write_bands_tsv",
           "write_fit_json"]

FIT_SCHEMA = "driftband-fit"
FIT_SCHEMA_VERSION = 1


def _data_dict(d: SpectrumPair) -> dict[str, Any]:
    return {"n": d.n, "folded": d.folded, "neutral": d.neutral.tolist(),
            "selected": d.selected.tolist(), "sites_neutral": d.sites_neutral,
            "sites_selected": d.sites_selected, "fixed_neutral": d.fixed_neutral,
            "fixed_selected": d.fixed_selected}


def fit_document(fits: list[PopulationFit], options: dict[str, Any],
                 provenance: dict[str, Any]) -> dict[str, Any]:
    """The JSON document of a list of population fits."""
    pops = {}
    for pf in fits:
        pops[pf.population] = {
            "dataset": pf.dataset,
            "best_model": pf.best.model,
            "data": _data_dict(pf.data),
            "aic_table": pf.aic_table(),
            "models": {k: f.to_dict() for k, f in pf.fits.items()},
            "bootstrap": pf.bootstrap,
            "adaptive": {k: adaptive_summary(pf.data, f.fixation_ratio)
                         for k, f in pf.fits.items()},
        }
    return _clean({"schema": FIT_SCHEMA, "schema_version": FIT_SCHEMA_VERSION,
                   "options": options, "populations": pops, "provenance": provenance})


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
        raise InputError(f"not a fit file (expected \"schema\": \"{FIT_SCHEMA}\"; "
                         "make one with 'driftband fit')", path)
    if doc.get("schema_version") != FIT_SCHEMA_VERSION:
        raise InputError(f"fit schema version {doc.get('schema_version')!r} is not "
                         f"supported (this driftband reads {FIT_SCHEMA_VERSION})", path)


def pair_from_dict(d: dict[str, Any]) -> SpectrumPair:
    """Rebuild the :class:`SpectrumPair` stored in a fit file."""
    return SpectrumPair(int(d["n"]), bool(d["folded"]), np.asarray(d["neutral"], float),
                        np.asarray(d["selected"], float), float(d["sites_neutral"]),
                        float(d["sites_selected"]), d.get("fixed_neutral"),
                        d.get("fixed_selected"))


def band_label(lo: float, hi: float) -> str:
    """Readable band name on |Ne·s|, e.g. ``0-1`` or ``>=100``."""
    if not np.isfinite(hi):
        return f">={lo:g}"
    return f"{lo:g}-{hi:g}"


def band_rows(doc: dict[str, Any]) -> list[dict[str, Any]]:
    """Rows of ``bands.tsv`` (AIC-best model of each population)."""
    rows = []
    for pop, p in doc["populations"].items():
        best = p["best_model"]
        f = p["models"][best]
        edges = list(f["band_edges"]) + [float("inf")]
        ci = (p.get("bootstrap") or {}).get("models", {}).get(best, {}).get("shares_ci")
        for k, share in enumerate(f["shares"]):
            lo, hi = edges[k], edges[k + 1]
            rows.append({
                "population": pop, "band": band_label(lo, hi), "nes_low": lo, "nes_high": hi,
                "S_low": 4 * lo, "S_high": 4 * hi, "share": share,
                "ci_low": None if ci is None else ci[k][0],
                "ci_high": None if ci is None else ci[k][1],
                "model": best,
            })
    return rows


def _fmt(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        return "inf" if v == float("inf") else f"{v:.6g}"
    return str(v)


def write_bands_tsv(doc: dict[str, Any], path: str | os.PathLike, force: bool = False) -> None:
    """Write ``bands.tsv`` atomically."""
    cols = ["population", "band", "nes_low", "nes_high", "S_low", "S_high", "share",
            "ci_low", "ci_high", "model"]
    with atomic_output(path, force=force, newline="") as fh:
        w = csv.writer(fh, delimiter="\t", lineterminator="\n")
        w.writerow(cols)
        for r in band_rows(doc):
            w.writerow([_fmt(r[c]) for c in cols])
