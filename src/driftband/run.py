"""The whole job of a study in one output folder: ``driftband run`` and ``driftband demo``.

Stages, in order (each a function of this module over the importable APIs of the other
stages; no subprocesses):

``classify[DATASET]``
    site classes from the reference FASTA + GFF3 (datasets given a sites BED skip it);
``spectra[DATASET]``
    per-population, per-class, per-block spectra from the VCF;
``fit``
    every DFE family fitted to every population of every dataset (AIC choice);
``bootstrap``
    block-bootstrap refits (paired within a dataset) and the band table;
``compare``
    every pair of populations (needs two or more);
``report``
    the HTML report and the Markdown summary.

The stage cache: each stage records, in ``OUT/provenance/stages.json``, a checksum of its
inputs (SHA-256 of every input file) and options, and the checksums of its outputs. A
rerun skips a stage whose key is unchanged and whose outputs are still as written;
``force=True`` redoes every stage. Every file is written through a temporary file renamed
into place (:func:`driftband._io.atomic_output`) and the record of a stage is written
after its outputs, so an interrupted run leaves no half-written file and the next run
resumes at the interrupted stage. ``OUT/run.log`` collects the log of every run.

Output folder (``paths = output_paths(study, out)``)::

    report.html  summary.md  bands.tsv  fit.json  compare.tsv  run.log
    sites.bed / DATASET.sites.bed          (classified site classes)
    spectra.json / DATASET.spectra.json    (one per dataset)
    provenance/  study.json  study.toml  stages.json  fit.point.json  DATASET.classify.tsv

With several datasets, population names become ``DATASET/POP``.
"""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as _dt
import json
import logging
import math
import os
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ._io import atomic_output, file_record, provenance
from ._runcache import StageError, _Cache, _run_log, _Runner
from ._study import (
    STUDY_KEYS,
    BootstrapSettings,
    CompareSettings,
    Dataset,
    FitSettings,
    Study,
    check_files,
    read_study,
    study_from_dict,
)
from ._version import __version__
from .exceptions import InputError, OptionError

__all__ = [
    "STAGES",
    "STUDY_KEYS",
    "BootstrapSettings",
    "CompareSettings",
    "Dataset",
    "FitSettings",
    "RunResult",
    "StageError",
    "Study",
    "check_files",
    "demo_study",
    "demo_study_path",
    "output_paths",
    "read_study",
    "run_study",
    "stage_bootstrap",
    "stage_classify",
    "stage_compare",
    "stage_fit",
    "stage_report",
    "stage_spectra",
    "study_from_dict",
    "study_model",
]

log = logging.getLogger("driftband")

STAGES = ("classify", "spectra", "fit", "bootstrap", "compare", "report")
_STUDY_SCHEMA = "driftband-run-study"


@dataclass
class RunResult:
    """What :func:`run_study` did.

    Attributes
    ----------
    out_dir : Path
    paths : dict of str to Path
        The output layout (see :func:`output_paths`).
    stages : dict of str to str
        Stage → ``"ran"``, ``"skipped"`` or ``"not needed"``, in order.
    seconds : float
        Wall-clock time of the run.
    """

    out_dir: Path
    paths: dict[str, Any]
    stages: dict[str, str] = field(default_factory=dict)
    seconds: float = 0.0

    @property
    def report(self) -> Path:
        """The HTML report."""
        return self.paths["report"]


# ------------------------------------------------------------------------ layout

def output_paths(study: Study, out: str | os.PathLike) -> dict[str, Any]:
    """The output layout of a study in folder ``out``.

    Returns
    -------
    dict
        ``report``, ``summary``, ``fit``, ``bands``, ``compare``, ``log``, ``provenance``,
        ``stages``, ``study``, ``study_toml``, ``point_fits`` (Paths), and ``datasets``:
        name → {``sites`` (the BED used), ``classified`` (bool), ``classify_summary``,
        ``spectra``}.
    """
    out = Path(out)
    prov = out / "provenance"
    paths: dict[str, Any] = {
        "out_dir": out, "report": out / "report.html", "summary": out / "summary.md",
        "fit": out / "fit.json", "bands": out / "bands.tsv", "compare": out / "compare.tsv",
        "log": out / "run.log", "provenance": prov, "stages": prov / "stages.json",
        "study": prov / "study.json", "study_toml": prov / "study.toml",
        "point_fits": prov / "fit.point.json", "datasets": {}}
    for d in study.datasets:
        pre = f"{d.name}." if study.several else ""
        paths["datasets"][d.name] = {
            "sites": out / f"{pre}sites.bed" if d.classify else Path(d.sites),
            "classified": d.classify,
            "classify_summary": prov / f"{d.name}.classify.tsv",
            "spectra": out / f"{pre}spectra.json"}
    return paths


# ------------------------------------------------------------------------ options

def _fit_options(study: Study):
    """FitOptions of the study (errors name the [fit] key)."""
    from .fit.api import FitOptions, check_edges, parse_misorientation
    from .fit.models import parse_models

    fs = study.fit
    where = study.source

    def fail(key: str, err: Exception) -> InputError:
        msg = str(err).split(": ", 1)[-1]
        if where is None:
            return OptionError(f"--{key}: {msg}")  # type: ignore[return-value]
        return InputError(f"[fit] key {key!r}: {msg}", where)

    try:
        edges = check_edges(tuple(fs.bands))
    except OptionError as err:
        raise fail("bands", err) from None
    try:
        eps = parse_misorientation(fs.misorientation)
    except OptionError as err:
        raise fail("misorientation", err) from None
    try:
        models = tuple(parse_models(",".join(fs.dfe), fs.beneficial, edges))
    except (OptionError, ValueError) as err:
        raise fail("dfe", err) from None
    names = [m.name for m in models]
    if len(set(names)) != len(names):
        raise fail("dfe", OptionError("a model is named twice"))
    return FitOptions(fs.neutral, fs.selected, models, eps, fs.equilibrium, edges)


def _check_settings(study: Study) -> None:
    """Check the options of every stage before any work."""
    _fit_options(study)
    from statsmodels.stats.multitest import multipletests

    try:
        multipletests([0.5, 0.5], method=study.compare.adjust)
    except ValueError:
        msg = (f"adjust {study.compare.adjust!r} is not a method of "
               "statsmodels.stats.multitest (e.g. holm, fdr_bh, bonferroni)")
        if study.source is None:
            raise OptionError(msg) from None
        raise InputError(f"[compare] key {msg}", study.source) from None
    for tok in study.compare.pairs or []:
        a, sep, b = tok.partition(":")
        if not sep or not a or not b:
            msg = f"pairs: write each pair as 'A:B', not {tok!r}"
            raise InputError(f"[compare] {msg}", study.source) if study.source else \
                OptionError(msg)


# ------------------------------------------------------------------------ stages

def stage_classify(dataset: Dataset, out_bed: str | os.PathLike,
                   summary: str | os.PathLike | None = None):
    """Site classes of a dataset from its FASTA + GFF3, written as a BED4.

    Parameters
    ----------
    dataset : Dataset
        With ``fasta`` and ``gff``.
    out_bed : path-like
        The BED4 (class in column 4) to write.
    summary : path-like, optional
        Also write the classify summary (counts per chromosome and class, exclusions).

    Returns
    -------
    ClassifyResult
    """
    from .sites.bed import write_bed4
    from .sites.classify import classify_sites, write_summary

    res = classify_sites(dataset.fasta, dataset.gff, code=dataset.code,
                         transcripts=dataset.transcripts,
                         exclude_softmasked=dataset.exclude_softmasked)
    n = write_bed4(out_bed, res.rows(), force=True)
    if summary is not None:
        write_summary(res, summary, force=True)
    log.info("classify[%s]: %d intervals, %d 0-fold and %d 4-fold sites", dataset.name, n,
             res.total("0fold"), res.total("4fold"))
    return res


def stage_spectra(dataset: Dataset, sites: str | os.PathLike, out_json: str | os.PathLike):
    """Spectra of a dataset (all populations, both classes, per block), written as JSON.

    Parameters
    ----------
    dataset : Dataset
    sites : path-like
        BED4 of the site classes (given, or made by :func:`stage_classify`).
    out_json : path-like

    Returns
    -------
    SpectraSet
    """
    from .spectra import build_spectra, summary_lines
    from .spectra.io import write_spectra_json

    ss = build_spectra(dataset.vcf, dataset.popmap, sites, callable_mask=dataset.callable,
                       ancestral=dataset.ancestral, project=dataset.project,
                       block_size=dataset.block_size, blocks=dataset.blocks,
                       regions=dataset.regions, min_gq=dataset.min_gq,
                       min_dp=dataset.min_dp, pass_only=dataset.pass_only)
    write_spectra_json(ss, out_json, force=True)
    for line in summary_lines(ss):
        log.info("spectra[%s]: %s", dataset.name, line)
    return ss


def _spectra_sets(spectra: list[tuple[str, str, str | os.PathLike]]):
    from .spectra.io import read_spectra

    return [(os.fspath(p), label, read_spectra(p)) for _name, label, p in spectra]


def _fit_task(task: tuple) -> dict:
    """Fit one model to one population (runs in a worker process)."""
    from .fit.api import fit_population

    data, options, name = task
    return fit_population(data, options, name).fits


def stage_fit(spectra: list[tuple[str, str, str | os.PathLike]], options,
              populations: list[str] | None, out_json: str | os.PathLike,
              workers: int | None = None) -> list:
    """Point fits of every model of ``options`` to every population.

    Parameters
    ----------
    spectra : list of (dataset, label, path)
        Spectra files; ``label`` ("" for none) prefixes population names as
        ``label/pop``.
    options : driftband.fit.api.FitOptions
    populations : list of str, optional
        Fit only these (names after labelling).
    out_json : path-like
        The fit file of the point estimates (no bootstrap).
    workers : int, optional
        Worker processes (one task per population and model; default 1).

    Returns
    -------
    list of PopulationFit
    """
    from .fit.api import PopulationFit, pool_populations
    from .fit.io import fit_document, write_fit_json

    sets = _spectra_sets(spectra)
    by_path = {os.fspath(p): name for name, _lab, p in spectra}
    pooled = pool_populations(sets, options, populations)
    # One task per population and model, run on the worker processes (each task builds
    # its own per-n table of expected spectra).
    tasks = [(data, dataclasses.replace(options, models=(m,)), name)
             for name, _ds, data in pooled for m in options.models]
    for name, _ds, data in pooled:
        log.info("fit: %s (n = %d): %s", name, data.n,
                 ", ".join(m.name for m in options.models))
    nw = workers or 1
    if nw > 1 and len(tasks) > 1:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(max_workers=min(nw, len(tasks))) as pool:
            done = list(pool.map(_fit_task, tasks))
    else:
        done = [_fit_task(t) for t in tasks]
    fits = []
    k = 0
    for name, ds_path, data in pooled:
        pf = PopulationFit(name, data, {}, dataset=by_path.get(ds_path, ds_path))
        for _m in options.models:
            pf.fits.update(done[k])
            k += 1
        for f in pf.fits.values():
            if not f.success:
                log.warning("fit: %s, model %s did not converge (%s)", name, f.model,
                            f.message)
        best = pf.best
        log.info("fit: %s: best model %s (AIC %.2f), share with |Ne*s| < %g: %.3f", name,
                 best.model, best.aic, options.edges_nes[1], best.shares[0])
        fits.append(pf)
    prov = provenance(options.to_dict(), {"spectra": [file_record(p) for _n, _l, p in
                                                      spectra]})
    write_fit_json(fit_document(fits, options.to_dict(), prov), out_json, force=True)
    return fits


def _cores() -> int:
    if hasattr(os, "sched_getaffinity"):
        return len(os.sched_getaffinity(0))
    return os.cpu_count() or 1  # pragma: no cover


def _nan(v: Any) -> Any:
    return float("nan") if v is None else v


def _fit_result(d: dict[str, Any]):
    """A FitResult back from its ``to_dict()`` (point fits of provenance/fit.point.json)."""
    import numpy as np

    from .fit.mle import FitResult

    arrays = {"nuisance": d.get("nuisance"), "shares": d.get("shares"), "x": d.get("x"),
              "observed_neutral": (d.get("observed") or {}).get("neutral"),
              "observed_selected": (d.get("observed") or {}).get("selected"),
              "expected_neutral": (d.get("expected") or {}).get("neutral"),
              "expected_selected": (d.get("expected") or {}).get("selected")}
    kw: dict[str, Any] = {}
    for f in dataclasses.fields(FitResult):
        if f.name in arrays:
            v = arrays[f.name]
            kw[f.name] = None if v is None else np.array([_nan(x) for x in v], dtype=float)
        elif f.name in ("params", "stderr"):
            kw[f.name] = {k: _nan(v) for k, v in (d.get(f.name) or {}).items()}
        elif f.name == "band_edges":
            kw[f.name] = tuple(float(v) for v in d["band_edges"])
        elif f.name == "n_starts":
            kw[f.name] = int((d.get("optimizer") or {}).get("starts", 0))
        elif f.name == "n_eval":
            kw[f.name] = int((d.get("optimizer") or {}).get("evaluations", 0))
        elif f.name in d:
            kw[f.name] = _nan(d[f.name])
        elif f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING:
            raise KeyError(f.name)
    return FitResult(**kw)


def _population_fits(doc: dict[str, Any]) -> list:
    from .fit.api import PopulationFit
    from .fit.io import pair_from_dict

    out = []
    for name, p in doc["populations"].items():
        out.append(PopulationFit(name, pair_from_dict(p["data"]),
                                 {k: _fit_result(v) for k, v in p["models"].items()},
                                 dataset=str(p.get("dataset", ""))))
    return out


def study_model(fits: list, order: list[str] | None = None) -> str:
    """The model compared between populations: lowest AIC summed over all populations.

    Among the models fitted to every population, those that converged everywhere are
    preferred. The sum of AICs of separate fits is the AIC of the joint model.

    Parameters
    ----------
    fits : list of PopulationFit
    order : list of str, optional
        Tie-break order (the study's model order).
    """
    common = [m for m in (order or list(fits[0].fits)) if all(m in pf.fits for pf in fits)]
    if not common:
        raise InputError("no DFE model is fitted to every population")
    ok = [m for m in common if all(pf.fits[m].success for pf in fits)] or common
    return min(ok, key=lambda m: (sum(pf.fits[m].aic for pf in fits), ok.index(m)))


def stage_bootstrap(point_json: str | os.PathLike,
                    spectra: list[tuple[str, str, str | os.PathLike]], options,
                    settings: BootstrapSettings, compare_model: str,
                    out_json: str | os.PathLike, out_bands: str | os.PathLike,
                    workers: int | None = None) -> dict[str, Any]:
    """Block bootstrap of the point fits; writes the fit file and the band table.

    Parameters
    ----------
    point_json : path-like
        Point fits from :func:`stage_fit`.
    spectra : list of (dataset, label, path)
        The spectra files the fits were made from (their per-block spectra).
    options : FitOptions
    settings : BootstrapSettings
        ``models="best"``: each population's AIC-best model and the compared model;
        ``"all"``: every model.
    compare_model : str
        ``"auto"`` (:func:`study_model`) or a model name.
    out_json, out_bands : path-like
        ``fit.json`` and ``bands.tsv``.
    workers : int, optional
        Worker processes (default ``settings.workers``, else the cores available); the
        results do not depend on it.

    Returns
    -------
    dict
        The fit document written.
    """
    from .fit.bootstrap import bootstrap_fits
    from .fit.io import fit_document, read_fit_json, write_bands_tsv, write_fit_json

    doc = read_fit_json(point_json)
    try:
        fits = _population_fits(doc)
    except (KeyError, TypeError, ValueError) as err:
        raise InputError(f"the point fits cannot be read back ({type(err).__name__}: {err}); "
                         "rerun with --force", point_json) from None
    order = [m.name for m in options.models]
    chosen = study_model(fits, order) if compare_model == "auto" else compare_model
    if chosen not in order:
        raise InputError(f"[compare] model {chosen!r} is not among the fitted models "
                         f"({', '.join(order)})")
    reps = settings.replicates
    booted: dict[str, list[str]] = {}
    if reps > 0:
        labels = {os.fspath(p): lab for _n, lab, p in spectra}
        pops = {(f"{labels[p]}/{n}" if labels[p] else n): pop
                for p, _lab, ss in _spectra_sets(spectra) for n, pop in ss.populations.items()}
        groups: dict[tuple[str, ...], list] = {}
        for pf in fits:
            want = set(order) if settings.models == "all" else {pf.best.model, chosen}
            names = tuple(m for m in order if m in want)
            groups.setdefault(names, []).append(pf)
            booted[pf.population] = list(names)
        nw = workers or settings.workers or _cores()
        batch = max(1, min(10, math.ceil(reps / (4 * max(1, nw)))))
        for names, members in groups.items():
            by_name = {m.name: m for m in options.models}
            opts = dataclasses.replace(options, models=tuple(by_name[n] for n in names))
            log.info("bootstrap: %d replicates of %s for %s", reps, ", ".join(names),
                     ", ".join(pf.population for pf in members))
            bootstrap_fits(members, pops, opts, reps, seed=settings.seed, level=settings.level,
                           workers=nw, batch=batch)
        for pf in fits:  # keep only the models that were refitted
            models = pf.bootstrap.get("models", {})
            pf.bootstrap["models"] = {k: v for k, v in models.items()
                                      if k in booted[pf.population]}
    opts = options.to_dict() | {"bootstrap": reps, "seed": settings.seed,
                                "level": settings.level, "bootstrap_models": settings.models,
                                "bootstrapped": booted, "compare_model": chosen}
    prov = provenance(opts, {"spectra": [file_record(p) for _n, _l, p in spectra],
                             "point_fits": file_record(point_json)})
    prov["seed"] = settings.seed
    out = fit_document(fits, opts, prov)
    write_fit_json(out, out_json, force=True)
    write_bands_tsv(out, out_bands, force=True)
    for pf in fits:
        ci = (pf.bootstrap.get("models", {}).get(pf.best.model) or {}).get("shares_ci")
        iv = f" ({ci[0][0]:.3f}-{ci[0][1]:.3f})" if ci and ci[0][0] is not None and \
            math.isfinite(ci[0][0]) else ""
        log.info("bootstrap: %s: %s, share with |Ne*s| < %g: %.3f%s", pf.population,
                 pf.best.model, options.edges_nes[1], pf.best.shares[0], iv)
    return out



def _compare_task(task: tuple) -> list:
    """One test of one pair (runs in a worker process)."""
    from .compare import compare_pair

    return compare_pair(*task)


def stage_compare(fit_json: str | os.PathLike, settings: CompareSettings,
                  out_tsv: str | os.PathLike, workers: int | None = None) -> list:
    """Tests between pairs of populations (every pair unless ``settings.pairs``).

    Parameters
    ----------
    fit_json : path-like
        ``fit.json`` from :func:`stage_bootstrap`.
    settings : CompareSettings
        ``model="auto"`` takes the model recorded by the bootstrap stage.
    out_tsv : path-like
        ``compare.tsv`` (the columns of ``driftband compare``).
    workers : int, optional
        Worker processes for the tests (one task per pair and test; default 1).

    Returns
    -------
    list of driftband.compare.ComparisonRow
    """
    from .compare import TESTS, adjust_pvalues, compare_pair, resolve_pairs, write_compare_tsv
    from .fit.io import read_fit_json
    from .fit.models import DfeModel

    doc = read_fit_json(fit_json)
    pops, options = doc["populations"], doc["options"]
    name = options.get("compare_model") if settings.model == "auto" else settings.model
    fam, _, extra = str(name).partition("+")
    model = DfeModel(fam, extra == "beneficial", tuple(options.get("band_edges_nes",
                                                                   (0, 1, 10, 100))))
    for p, v in settings.relative_mutation_rate.items():
        if p not in pops:
            raise InputError(f"[compare] relative_mutation_rate: no population {p!r} (the "
                             f"study has {', '.join(pops)})")
        if not v > 0:
            raise InputError(f"[compare] relative_mutation_rate {p} = {v}: must be > 0")
    pairs = resolve_pairs(settings.pairs, list(pops), "[compare] pairs", "the study has",
                          InputError)
    tests = [t for t in TESTS if t in settings.tests]
    tasks = [(a, b, pops[a], pops[b], model, options, settings.relative_mutation_rate, (t,))
             for a, b in pairs for t in tests]
    for a, b in pairs:
        log.info("compare: %s and %s (%s model; %s)", a, b, model.name, ", ".join(tests))
    nw = workers or 1
    if nw > 1 and len(tasks) > 1:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(max_workers=min(nw, len(tasks))) as pool:
            parts = list(pool.map(_compare_task, tasks))
    else:
        cache: dict = {}
        parts = [compare_pair(*t, cache) for t in tasks]
    rows = [r for part in parts for r in part]
    adjust_pvalues(rows, settings.adjust)
    write_compare_tsv(rows, out_tsv, force=True)
    return rows


def stage_report(study: Study, fit_json: str | os.PathLike,
                 compare_tsv: str | os.PathLike | None,
                 spectra: list[tuple[str, str, str | os.PathLike]],
                 out_html: str | os.PathLike, out_md: str | os.PathLike) -> None:
    """The HTML report and the Markdown summary of a study.

    Parameters
    ----------
    study : Study
        For the provenance (name, study file, input files with checksums).
    fit_json : path-like
    compare_tsv : path-like or None
    spectra : list of (dataset, label, path)
    out_html, out_md : path-like
    """
    import matplotlib

    from .report import (
        build_report,
        build_summary_md,
        read_compare_tsv,
        read_fit_doc,
        read_spectra_doc,
    )

    fit_doc = read_fit_doc(fit_json)
    rows = read_compare_tsv(compare_tsv) if compare_tsv is not None else None
    docs = {name: read_spectra_doc(p) for name, _lab, p in spectra}
    inputs: dict[str, Any] = {"fit": file_record(fit_json)}
    if compare_tsv is not None:
        inputs["compare"] = file_record(compare_tsv)
    inputs["spectra"] = [file_record(p) | {"label": name} for name, _l, p in spectra]
    if study.source:
        inputs["study file"] = file_record(study.source)
    for d in study.datasets:
        for key in ("vcf", "popmap", "sites", "fasta", "gff", "callable", "blocks"):
            if getattr(d, key) is not None:
                inputs[f"{d.name} {key}"] = file_record(getattr(d, key))
    opts = {"study": study.name}
    if study.description:
        opts["description"] = study.description
    prov = provenance(opts, inputs)
    prov["environment"]["matplotlib"] = matplotlib.__version__
    prov["seed"] = (fit_doc.get("options") or {}).get("seed", study.bootstrap.seed)
    html = build_report(fit_doc, rows, docs, prov)
    md = build_summary_md(fit_doc, rows, docs, prov)
    with atomic_output(out_html, force=True) as fh:
        fh.write(html)
    with atomic_output(out_md, force=True) as fh:
        fh.write(md)


# ------------------------------------------------------------------------ the run

def _check_out_dir(out: Path, study: Study, rec_path: Path, force: bool) -> None:
    if out.exists() and not out.is_dir():
        raise OptionError(f"--out-dir {out}: exists and is not a folder")
    if rec_path.is_file():
        try:
            old = json.loads(rec_path.read_text(encoding="utf-8"))
            ident = old.get("identity") if old.get("schema") == _STUDY_SCHEMA else None
        except (OSError, ValueError, AttributeError):
            ident = None
        if ident != study.identity() and not force:
            what = "another study"
            if isinstance(ident, dict):
                files = ", ".join(v for d in ident.get("datasets", []) for k, v in d.items()
                                  if k == "vcf")
                what = f"another study ({ident.get('name')!r}, from {files or '?'})"
            raise OptionError(f"{out} holds the results of {what}; choose another output "
                              "folder, or use --force to replace them")
    elif out.is_dir() and any(out.iterdir()) and not force:
        raise OptionError(f"{out} is not empty and holds no driftband run (no "
                          "provenance/study.json); choose a new or empty output folder, or "
                          "use --force to write into it")


def _remove_stale_temporaries(paths: dict[str, Any]) -> None:
    """Remove temporary files of our outputs left by a run that was killed mid-write."""
    outs = [p for k, p in paths.items() if isinstance(p, Path) and k not in (
        "out_dir", "provenance")]
    for d in paths["datasets"].values():
        outs += [d["spectra"], d["classify_summary"]] + ([d["sites"]] if d["classified"]
                                                          else [])
    for p in outs:
        for tmp in p.parent.glob(f".{p.name}.*.tmp"):
            with contextlib.suppress(OSError):
                tmp.unlink()
                log.info("removed %s, left by an interrupted run", tmp)


def _apply(study: Study, replicates: int | None, workers: int | None,
           seed: int | None, level: float | None) -> Study:
    b = study.bootstrap
    changes: dict[str, Any] = {}
    if replicates is not None:
        if replicates < 0:
            raise OptionError("--bootstrap must be >= 0")
        changes["replicates"] = replicates
    if workers is not None:
        if workers < 1:
            raise OptionError("--workers must be >= 1")
        changes["workers"] = workers
    if seed is not None:
        changes["seed"] = seed
    if level is not None:
        if not 0.5 < level < 1.0:
            raise OptionError("--level must lie between 0.5 and 1, e.g. 0.95")
        changes["level"] = level
    return dataclasses.replace(study, bootstrap=dataclasses.replace(b, **changes)) \
        if changes else study


def run_study(study: Study, out_dir: str | os.PathLike | None = None, *, force: bool = False,
              replicates: int | None = None, workers: int | None = None,
              seed: int | None = None, level: float | None = None) -> RunResult:
    """Run every stage of a study into one output folder (see the module docstring).

    Parameters
    ----------
    study : Study
        From :func:`read_study` or :func:`study_from_dict`.
    out_dir : path-like, optional
        Output folder (default: the study file's ``out_dir``).
    force : bool
        Redo every stage, and write into a folder that holds another study.
    replicates, workers, seed, level : optional
        Override the study's bootstrap settings.

    Returns
    -------
    RunResult

    Raises
    ------
    InputError, OptionError
        Before any work: a missing input file, bad options, an output folder that holds
        another study (without ``force``).
    StageError
        A stage failed on bad input; its message names the stage and the problem.
    """
    t0 = time.monotonic()
    target = out_dir if out_dir is not None else study.out_dir
    if target is None:
        raise OptionError("no output folder: give --out-dir DIR (or out_dir in the study "
                          "file's [study] section)")
    out = Path(target).expanduser().absolute()
    study = _apply(study, replicates, workers, seed, level)
    check_files(study)
    options = _fit_options(study)
    _check_settings(study)
    paths = output_paths(study, out)
    _check_out_dir(out, study, paths["study"], force)
    paths["provenance"].mkdir(parents=True, exist_ok=True)
    result = RunResult(out, paths)
    with _run_log(paths["log"]) as col:
        log.info("driftband %s: run of study %r (%s) into %s%s", __version__, study.name,
                 study.source or "command-line flags", out, " (--force)" if force else "")
        _remove_stale_temporaries(paths)
        with atomic_output(paths["study"], force=True) as fh:
            json.dump({"schema": _STUDY_SCHEMA, "schema_version": 1,
                       "identity": study.identity(), "study": study.to_dict(),
                       "driftband": __version__,
                       "updated": _dt.datetime.now(_dt.timezone.utc).isoformat(
                           timespec="seconds")}, fh, indent=1)
            fh.write("\n")
        if study.text is not None:
            with atomic_output(paths["study_toml"], force=True) as fh:
                fh.write(study.text)
        cache = _Cache(paths["stages"], force)
        runner = _Runner(cache, col, result.stages)
        _run_stages(study, options, paths, runner, cache, workers)
        result.seconds = time.monotonic() - t0
        log.info("run finished in %.1f s: %s", result.seconds, paths["report"])
    return result


def _run_stages(study: Study, options, paths: dict[str, Any], runner: _Runner, cache: _Cache,
                workers: int | None) -> None:
    spectra = []
    for d in study.datasets:
        dp = paths["datasets"][d.name]
        if d.classify:
            runner.run(f"classify[{d.name}]", {"fasta": d.fasta, "gff": d.gff},
                       d.classify_options(), [dp["sites"], dp["classify_summary"]],
                       lambda d=d, dp=dp: stage_classify(d, dp["sites"],
                                                         dp["classify_summary"]))
        inputs = {"vcf": d.vcf, "popmap": d.popmap, "sites": dp["sites"],
                  "callable": d.callable, "blocks": d.blocks}
        for k, r in enumerate(d.regions or []):
            if os.path.isfile(r):
                inputs[f"regions{k}"] = r
        runner.run(f"spectra[{d.name}]", inputs, d.spectra_options(), [dp["spectra"]],
                   lambda d=d, dp=dp: stage_spectra(d, dp["sites"], dp["spectra"]))
        spectra.append((d.name, d.name if study.several else "", dp["spectra"]))
    nworkers = workers or study.bootstrap.workers or _cores()
    sp_inputs = {f"spectra {n}": p for n, _l, p in spectra}
    labels = {n: lab for n, lab, _p in spectra}
    fit_opts = options.to_dict() | {"labels": labels, "populations": study.fit.populations}
    runner.run("fit", sp_inputs, fit_opts, [paths["point_fits"]],
               lambda: stage_fit(spectra, options, study.fit.populations, paths["point_fits"],
                                 nworkers))
    b = study.bootstrap
    boot_opts = fit_opts | {"replicates": b.replicates, "level": b.level, "seed": b.seed,
                            "models": b.models, "compare_model": study.compare.model}
    runner.run("bootstrap", {"point_fits": paths["point_fits"], **sp_inputs}, boot_opts,
               [paths["fit"], paths["bands"]],
               lambda: stage_bootstrap(paths["point_fits"], spectra, options, b,
                                       study.compare.model, paths["fit"], paths["bands"],
                                       workers))
    npop = len(json.loads(paths["fit"].read_text(encoding="utf-8"))["populations"])
    compare = None
    if npop >= 2 and study.compare.tests:
        c = study.compare
        runner.run("compare", {"fit": paths["fit"]},
                   {"model": c.model, "tests": list(c.tests), "adjust": c.adjust,
                    "pairs": c.pairs, "relative_mutation_rate": c.relative_mutation_rate},
                   [paths["compare"]],
                   lambda: stage_compare(paths["fit"], c, paths["compare"], nworkers))
        compare = paths["compare"]
    else:
        why = "one population" if npop < 2 else "[compare] tests is empty"
        log.info("stage compare: not run (%s)", why)
        runner.stages["compare"] = "not needed"
        if "compare" in cache.records:  # an earlier run's table no longer applies
            with contextlib.suppress(FileNotFoundError):
                paths["compare"].unlink()
            cache.drop("compare")
    runner.run("report", {"fit": paths["fit"], "compare": compare, **sp_inputs},
               {"study": study.name, "description": study.description,
                "identity": study.identity()},
               [paths["report"], paths["summary"]],
               lambda: stage_report(study, paths["fit"], compare, spectra, paths["report"],
                                    paths["summary"]))


# ------------------------------------------------------------------------ demo

DEMO_STUDY = "snail.study.toml"


def demo_study_path() -> Path:
    """The demo study file shipped with the package (``driftband/data/demo``).

    Raises
    ------
    InputError
        When the package data is missing (a broken installation).
    """
    from importlib import resources

    p = Path(os.fspath(resources.files("driftband") / "data" / "demo" / DEMO_STUDY))
    if not p.is_file():
        raise InputError("the demo data is not installed with this driftband (expected "
                         "driftband/data/demo/); reinstall with 'pip install .' from a "
                         "clone of the repository", p)
    return p


def demo_study() -> Study:
    """The demo study (an invented snail with a lake and a spring population)."""
    return read_study(demo_study_path())
