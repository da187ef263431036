"""Fit files (JSON) and the band table (TSV).

The fit file, schema ``driftband-fit`` version 3::

    {"schema": "driftband-fit", "schema_version": 3,
     "options": {...FitOptions...},
     "populations": {
        "lake": {"dataset": "", "best_model": "gamma",
                 "data": {"n": 20, "folded": false, "neutral": [...], "selected": [...],
                          "sites_neutral": ..., "sites_selected": ...,
                          "fixed_neutral": ..., "fixed_selected": ...},
                 "aic_table": [...],
                 "models": {"gamma": {"params": {"shape": ..., "mean_abs_S": ...},
                                      "misorientation_rate": ..., ...}, ...},
                 "bootstrap": {...}}},
     "provenance": {...}}

``bands.tsv`` has one row per population, band and model (:data:`BANDS_COLUMNS`):
``nes_*`` on |Ne·s| under the convention named in ``effect`` (:mod:`driftband.effect`),
``S_*`` on |S|; ``nes_high`` of the last band is ``inf``; interval columns are empty
without a bootstrap. The fit file's ``band_edges`` are always on the heterozygote
|Ne·s| = |S|/4, with ``options.effect`` naming the convention of the tables.
"""

from __future__ import annotations

import csv
import json
import logging
import os
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._io import atomic_output, json_ready, load_json, tsv_cell
from ..effect import DEFAULT_EFFECT, shown_edges
from ..exceptions import InputError
from .options import FitOptions
from .results import PopulationFit

log = logging.getLogger("driftband")

__all__ = [
    "BANDS_COLUMNS",
    "FIT_SCHEMA",
    "RENAMED_KEYS",
    "FitFile",
    "band_label",
    "band_rows",
    "check_fit_schema",
    "check_fit_values",
    "fit_document",
    "fits_from_doc",
    "read_fit_files",
    "read_fit_json",
    "read_fits",
    "upgrade_fit_doc",
    "write_bands_tsv",
    "write_fit_json",
]

FIT_SCHEMA = "driftband-fit"
#: Version 2 keeps every bootstrap replicate in its place (failed ones as null, with a
#: ``converged`` mask), adds the model-averaged shares and the ``headline``. Version 3
#: names the parameters and counts in words (:data:`RENAMED_KEYS`). Version 4 fits the
#: discrete family on the report bands with the first band split
#: (:func:`~driftband.prf.families.discrete_family_edges`): one more mass. Versions 1 to
#: 3 are still read, their keys translated; their discrete fits are shown as written, but
#: a comparison that refits them needs them refitted (it says so).
FIT_SCHEMA_VERSION = 4
FIT_SCHEMA_VERSIONS_READ = (1, 2, 3, 4)
#: Keys (and parameter names in ``at_bounds``) of fit files before version 3 -> now.
RENAMED_KEYS = {
    "eps": "misorientation_rate",
    "eps_free": "misorientation_free",
    "p_b": "beneficial_fraction",
    "S_b": "beneficial_S",
    "mean_S": "mean_abs_S",
    "log_mean": "mean_log_abs_S",
    "log_sd": "sd_log_abs_S",
    "nuisance": "nuisance_factors",
    "x": "unconstrained_params",
    "P_N": "polymorphic_selected",
    "P_S": "polymorphic_neutral",
    "D_N": "divergent_selected",
    "D_S": "divergent_neutral",
}
#: Columns of ``bands.tsv``.
BANDS_COLUMNS = [
    "population",
    "band",
    "nes_low",
    "nes_high",
    "effect",
    "S_low",
    "S_high",
    "share",
    "ci_low",
    "ci_high",
    "model",
    "role",
    "weight",
    "interval",
    "note",
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
    doc = load_json(path, "fit JSON file")
    check_fit_schema(doc, path)
    return upgrade_fit_doc(doc, path)


def upgrade_fit_doc(doc: dict[str, Any], path: str | os.PathLike | None = None) -> dict[str, Any]:
    """A fit document of an older schema version with its keys translated to this one.

    Keys of :data:`RENAMED_KEYS` are renamed wherever they occur (the provenance
    excepted), and so are the parameter names listed under ``at_bounds``; a warning says
    that the file was translated. Documents of the current version are returned as they
    are.

    Parameters
    ----------
    doc : dict
        A parsed fit file whose schema has been checked (:func:`check_fit_schema`).
    path : path-like, optional
        Its file, named in the warning.

    Returns
    -------
    dict
    """
    version = doc.get("schema_version")
    if version == FIT_SCHEMA_VERSION:
        return doc

    def walk(o: Any, key: str = "") -> Any:
        if isinstance(o, dict):
            return {
                RENAMED_KEYS.get(k, k): (v if k == "provenance" else walk(v, k))
                for k, v in o.items()
            }
        if isinstance(o, list):
            if key == "at_bounds":
                return [RENAMED_KEYS.get(v, v) if isinstance(v, str) else v for v in o]
            return [walk(v) for v in o]
        return o

    out = walk(doc) if isinstance(version, int) and version < 3 else dict(doc)
    out["schema_version"] = FIT_SCHEMA_VERSION
    pops = out.get("populations")
    discrete = isinstance(pops, dict) and any(
        str(m).startswith("discrete")
        for p in pops.values()
        if isinstance(p, dict) and isinstance(p.get("models"), dict)
        for m in p["models"]
    )
    log.warning(
        "%s: fit file of schema version %s (an older driftband), read as version %d%s%s; "
        "rerun 'driftband fit' to write the current version",
        os.fspath(path) if path is not None else "fit document",
        version,
        FIT_SCHEMA_VERSION,
        " with its keys translated (e.g. eps -> misorientation_rate, p_b -> beneficial_fraction)"
        if isinstance(version, int) and version < 3
        else "",
        "; its discrete fits have one band mass fewer than this version's discrete family "
        "(whose first band is split), so a comparison of them needs a refit"
        if discrete
        else "",
    )
    return out


def check_fit_schema(doc: Any, path: str | os.PathLike | None = None) -> None:
    """Raise InputError unless ``doc`` is a fit document of the supported version."""
    if not isinstance(doc, dict) or doc.get("schema") != FIT_SCHEMA:
        raise InputError(
            f'not a fit file (expected "schema": "{FIT_SCHEMA}"; make one with \'driftband fit\')',
            path,
        )
    if doc.get("schema_version") not in FIT_SCHEMA_VERSIONS_READ:
        raise InputError(
            f"fit schema version {doc.get('schema_version')!r} is not "
            f"supported (this driftband reads {', '.join(map(str, FIT_SCHEMA_VERSIONS_READ))})",
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


def fits_from_doc(
    doc: dict[str, Any], path: str | os.PathLike
) -> tuple[FitOptions, list[PopulationFit]]:
    """The fit options and typed population fits of a parsed fit file, values checked.

    Parameters
    ----------
    doc : dict
        From :func:`read_fit_json`.
    path : path-like
        The file, named in messages.

    Returns
    -------
    options : FitOptions
    populations : list of PopulationFit
        In the order of the file.

    Raises
    ------
    InputError
        An entry that cannot be read back, or an impossible value (see
        :func:`check_fit_values`).
    """
    pops_doc = doc.get("populations")
    if not isinstance(pops_doc, dict) or not pops_doc:
        raise InputError(
            "\"populations\": the fit file holds no populations; remake it with 'driftband fit'",
            path,
        )
    where = '"options"'
    try:
        options = FitOptions.from_dict(doc.get("options") or {})
        pops = []
        for name, p in pops_doc.items():
            where = f"population {name!r}"
            pops.append(PopulationFit.from_dict(name, p))
    except (KeyError, TypeError, ValueError, AttributeError, OverflowError) as err:
        what = f"missing entry {err}" if isinstance(err, KeyError) else str(err)
        raise InputError(
            f"{where}: cannot be read back ({what}); remake the file with 'driftband fit'", path
        ) from None
    for pf in pops:
        check_fit_values(pf, path)
    return options, pops


def read_fits(path: str | os.PathLike) -> FitFile:
    """Read a fit file into typed population fits (the one reader of population fits).

    Raises
    ------
    InputError
        Not a fit file, or an entry that cannot be read back (named).
    """
    doc = read_fit_json(path)
    options, pops = fits_from_doc(doc, path)
    return FitFile(
        os.fspath(path),
        options,
        pops,
        dict(doc.get("options") or {}),
        dict(doc.get("provenance") or {}),
    )


def _share_problem(v: np.ndarray) -> str | None:
    """Why an array of band shares is impossible (NaN allowed: not estimated), or None."""
    v = np.asarray(v, dtype=float)
    bad = np.isfinite(v) & ((v < -1e-9) | (v > 1 + 1e-9))
    if np.any(bad) or np.any(np.isinf(v)):
        x = v[bad | np.isinf(v)][0]
        return f"a share of {x:g} (a share lies in [0, 1])"
    return None


def check_fit_values(pf: PopulationFit, path: str | os.PathLike) -> None:
    """Refuse impossible values in a population fit read back from a file.

    A converged model needs a finite log-likelihood and AIC; every band share (of the
    models, the bootstrap replicates and their intervals) lies in [0, 1]; ε in [0, 1];
    the spectra are finite and non-negative.

    Parameters
    ----------
    pf : PopulationFit
        As read by :meth:`PopulationFit.from_dict`.
    path : path-like
        The fit file, named in the message.

    Raises
    ------
    InputError
        Naming the population, the model and the value.
    """
    where = f"population {pf.population!r}"
    d = pf.data
    for key, arr in (("neutral", d.neutral), ("selected", d.selected)):
        a = np.asarray(arr, dtype=float)
        if not np.all(np.isfinite(a)) or np.any(a < 0):
            raise InputError(f'{where} "data" "{key}": counts must be finite and >= 0', path)
    for key in ("sites_neutral", "sites_selected"):
        total = float(getattr(d, key))
        if not np.isfinite(total) or total <= 0:
            raise InputError(
                f'{where} "data" "{key}": {total:g} is not a number of sites > 0', path
            )
    for name, fr in pf.fits.items():
        wm = f"{where} model {name!r}"
        if fr.success and not (np.isfinite(fr.loglik) and np.isfinite(fr.aic)):
            raise InputError(
                f'{wm}: a converged fit needs a finite "loglik" and "aic" (got '
                f"{fr.loglik:g}, {fr.aic:g}); remake the file with 'driftband fit'",
                path,
            )
        if np.isinf(fr.loglik) or np.isinf(fr.aic):
            raise InputError(f'{wm}: "loglik" and "aic" must be finite or null', path)
        if why := _share_problem(fr.shares):
            raise InputError(f'{wm} "shares": {why}', path)
        if fr.success and not np.all(np.isfinite(fr.shares)):
            raise InputError(f'{wm} "shares": a converged fit needs every share (no null)', path)
        if np.isfinite(fr.eps) and not 0 <= fr.eps <= 1:
            raise InputError(f'{wm} "misorientation_rate": {fr.eps:g} is not in [0, 1]', path)
    b = pf.bootstrap
    if b is not None:
        for name, mb in b.models.items():
            vals = [np.asarray(mb.shares, float).ravel()]
            vals += [np.array([ci.low, ci.high], float) for ci in mb.shares_ci]
            for arr in vals:
                if why := _share_problem(arr):
                    raise InputError(f'{where} bootstrap of {name!r} "shares": {why}', path)
        if b.averaged is not None:
            vals = [np.asarray(b.averaged.shares, float).ravel()]
            vals += [np.array([ci.low, ci.high], float) for ci in b.averaged.shares_ci]
            for arr in vals:
                if why := _share_problem(arr):
                    raise InputError(f'{where} bootstrap (averaged) "shares": {why}', path)


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


def _interval_word(ci: Any, reliable: bool) -> str:
    """``interval`` column: empty without one, else ``reliable`` or ``unreliable``."""
    if ci is None:
        return ""
    return "reliable" if reliable else "unreliable"


def band_rows(fits: list[PopulationFit], effect: str = DEFAULT_EFFECT) -> list[dict[str, Any]]:
    """Rows of ``bands.tsv`` (columns :data:`BANDS_COLUMNS`).

    ``nes_low``/``nes_high`` are on |Ne·s| under the convention ``effect`` (the column
    ``effect`` names it; :mod:`driftband.effect`), ``S_low``/``S_high`` on |S|.

    For each population: the headline rows (``role`` = ``headline``; ``model`` =
    ``averaged``, or the AIC-best family under ``--headline best``), then one row per band
    of every fitted family (``role`` = ``family``) with its Akaike weight. ``note`` carries
    the headline's caveats (few blocks, families that disagree, few replicates).
    """
    rows = []
    for pf in fits:
        h = pf.headline()
        core = list(pf.best.band_edges) + [float("inf")]
        edges = list(shown_edges(core, effect))
        note = "; ".join(h.notes)
        entries: list[tuple[str, str, Any, Any, Any]] = [
            ("headline", h.model, h.shares, h.shares_ci, None)
        ]
        weights = pf.weights()
        few = pf.bootstrap is not None and pf.bootstrap.few_blocks
        for name, f in pf.fits.items():
            mb = pf.model_bootstrap(name)
            entries.append(
                ("family", name, f.shares, None if mb is None else mb.shares_ci, weights.get(name))
            )
        for role, model, shares, ci, w in entries:
            for k, share in enumerate(shares):
                lo, hi = edges[k], edges[k + 1]
                rows.append(
                    {
                        "population": pf.population,
                        "band": band_label(lo, hi),
                        "nes_low": lo,
                        "nes_high": hi,
                        "effect": effect,
                        "S_low": 4 * core[k],
                        "S_high": 4 * core[k + 1],
                        "share": float(share),
                        "ci_low": None if ci is None else ci[k].low,
                        "ci_high": None if ci is None else ci[k].high,
                        "model": model,
                        "role": role,
                        "weight": w,
                        "interval": _interval_word(
                            ci, h.interval_reliable if role == "headline" else not few
                        ),
                        "note": note if role == "headline" else "",
                    }
                )
    return rows


def write_bands_tsv(
    fits: list[PopulationFit],
    path: str | os.PathLike,
    effect: str = DEFAULT_EFFECT,
    force: bool = False,
) -> None:
    """Write ``bands.tsv`` atomically (edges on |Ne·s| under the convention ``effect``)."""
    with atomic_output(path, force=force, newline="") as fh:
        w = csv.writer(fh, delimiter="\t", lineterminator="\n")
        w.writerow(BANDS_COLUMNS)
        for r in band_rows(fits, effect):
            w.writerow([tsv_cell(r[c]) for c in BANDS_COLUMNS])
