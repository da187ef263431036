"""The stages of ``driftband run``, each a thin layer over the API of its stage.

Every stage takes the study's settings and file paths, calls the one API function of its
stage (the same one the subcommand of that stage calls) and writes its outputs with
``force=True`` (the run's stage cache decides what is redone, see
:mod:`driftband.run.cache`).
"""

from __future__ import annotations

import logging
import math
import os
from typing import Any

from .._io import atomic_output, file_record, provenance
from .._options import COMMAND_LINE, OptionSource
from ..compare.api import study_model
from ..exceptions import InputError
from .study import FILE_KEYS, BootstrapSettings, CompareSettings, Dataset, Study

__all__ = [
    "SpectraFile",
    "fit_options",
    "stage_bootstrap",
    "stage_classify",
    "stage_compare",
    "stage_fit",
    "stage_report",
    "stage_spectra",
    "study_model",
]

log = logging.getLogger("driftband")

#: A spectra file of the run: (dataset name, label of its populations, path).
SpectraFile = tuple[str, str, "str | os.PathLike[str]"]


def _source(study: Study, section: str) -> OptionSource:
    from .study import _key_lines

    if not study.source:
        return COMMAND_LINE
    return OptionSource(section, study.source, _key_lines(study.text) if study.text else {})


def fit_options(study: Study) -> Any:
    """The :class:`~driftband.fit.options.FitOptions` of the study (errors name the key).

    Raises
    ------
    InputError or OptionError
        A bad ``[fit]`` key (or command-line flag).
    """
    from ..effect import check_effect, core_edges
    from ..exceptions import OptionError
    from ..fit.models import parse_models
    from ..fit.options import FitOptions, check_edges, parse_misorientation

    fs = study.fit
    src = _source(study, "fit")

    def fail(key: str, err: Exception) -> Exception:
        return src.error(key, str(err).split(": ", 1)[-1])

    try:
        check_effect(fs.effect)
    except ValueError as err:
        raise fail("effect", err) from None
    try:
        edges = core_edges(check_edges(tuple(fs.bands)), fs.effect)
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
    try:
        return FitOptions(
            fs.neutral, fs.selected, models, eps, fs.demography, edges, fs.headline, fs.effect
        )
    except OptionError as err:
        raise fail("demography" if "--demography" in str(err) else "headline", err) from None


def stage_classify(
    dataset: Dataset, out_bed: str | os.PathLike[str], summary: str | os.PathLike[str] | None = None
) -> Any:
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
    from ..sites.bed import write_bed4
    from ..sites.classify import classify_sites, write_summary

    if dataset.fasta is None or dataset.gff is None:  # the study checks rule it out
        raise ValueError(f"dataset {dataset.name!r}: classifying needs fasta and gff")
    res = classify_sites(
        dataset.fasta,
        dataset.gff,
        code=dataset.code,
        transcripts=dataset.transcripts,
        exclude_softmasked=dataset.exclude_softmasked,
    )
    n = write_bed4(out_bed, res.rows(), force=True)
    if summary is not None:
        write_summary(res, summary, force=True)
    log.info(
        "classify[%s]: %d intervals, %d 0-fold and %d 4-fold sites",
        dataset.name,
        n,
        res.total("0fold"),
        res.total("4fold"),
    )
    return res


def stage_spectra(
    dataset: Dataset,
    sites: str | os.PathLike[str],
    out_json: str | os.PathLike[str],
    workers: int | None = None,
    scheduler: Any = None,
) -> Any:
    """Spectra of a dataset (all populations, both classes, per block), written as JSON.

    Parameters
    ----------
    dataset : Dataset
    sites : path-like
        BED4 of the site classes (given, or made by :func:`stage_classify`).
    out_json : path-like
    workers : int, optional
        Local worker processes for the regions (default: the cores available).
    scheduler : str or distributed.Client, optional
        Count the regions on this dask cluster instead.

    Returns
    -------
    SpectraSet
    """
    from ..spectra import build_spectra, summary_lines
    from ..spectra.io import write_spectra_json

    ss = build_spectra(
        dataset.vcf,
        dataset.samples,
        sites,
        callable_mask=dataset.callable,
        ancestral=dataset.ancestral,
        project=dataset.project,
        block_size=dataset.block_size,
        blocks=dataset.blocks,
        regions=dataset.regions,
        min_gq=dataset.min_gq,
        min_dp=dataset.min_dp,
        pass_only=dataset.pass_only,
        exclude_lowercase_ancestral=dataset.exclude_lowercase_ancestral,
        all_sites_callable=dataset.all_sites_callable,
        workers=workers,
        scheduler=scheduler,
    )
    write_spectra_json(ss, out_json, force=True)
    for line in summary_lines(ss):
        log.info("spectra[%s]: %s", dataset.name, line)
    return ss


def _labelled(spectra: list[SpectraFile]) -> list[Any]:
    from ..fit.api import LabelledSpectra
    from ..spectra.io import read_spectra

    return [
        LabelledSpectra(os.fspath(p), read_spectra(p), label, name) for name, label, p in spectra
    ]


def _spectra_records(spectra: list[SpectraFile]) -> list[dict[str, Any] | None]:
    return [file_record(p) for _n, _l, p in spectra]


def stage_fit(
    spectra: list[SpectraFile],
    options: Any,
    populations: list[str] | None,
    out_json: str | os.PathLike[str],
    workers: int | None = None,
    study: Study | None = None,
    scheduler: Any = None,
) -> list[Any]:
    """Point fits of every model of ``options`` to every population.

    Parameters
    ----------
    spectra : list of (dataset, label, path)
        Spectra files; ``label`` ("" for none) prefixes population names as
        ``label/pop``.
    options : driftband.fit.options.FitOptions
    populations : list of str, optional
        Fit only these (names after labelling).
    out_json : path-like
        The fit file of the point estimates (no bootstrap).
    workers : int, optional
        Worker processes (one task per population and model; default 1).
    study : Study, optional
        The study the options came from (messages name its ``[fit]`` keys).
    scheduler : str or distributed.Client, optional
        Fit on this dask cluster instead of local workers.

    Returns
    -------
    list of PopulationFit
    """
    from ..fit.api import fit_spectra
    from ..fit.io import fit_document, write_fit_json

    src = _source(study, "fit") if study is not None else COMMAND_LINE
    fits = fit_spectra(
        _labelled(spectra),
        options,
        populations,
        workers=workers or 1,
        scheduler=scheduler,
        source=src,
    )
    prov = provenance(options.to_dict(), {"spectra": _spectra_records(spectra)})
    write_fit_json(fit_document(fits, options.to_dict(), prov), out_json, force=True)
    return fits


def stage_bootstrap(
    point_json: str | os.PathLike[str],
    spectra: list[SpectraFile],
    options: Any,
    settings: BootstrapSettings,
    compare_model: str,
    out_json: str | os.PathLike[str],
    out_bands: str | os.PathLike[str],
    workers: int | None = None,
    scheduler: Any = None,
) -> dict[str, Any]:
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
    scheduler : str or distributed.Client, optional
        Run the refits on this dask cluster instead (same results).

    Returns
    -------
    dict
        The fit document written.
    """
    from ..fit.api import block_spectra, covered_bp
    from ..fit.bootstrap import bootstrap_fits
    from ..fit.io import fit_document, read_fits, write_bands_tsv, write_fit_json

    fits = read_fits(point_json).populations
    order = [m.name for m in options.models]
    chosen = study_model(fits, order) if compare_model == "auto" else compare_model
    if chosen not in order:
        raise InputError(
            f"[compare] model {chosen!r} is not among the fitted models ({', '.join(order)})"
        )
    reps = settings.replicates
    booted: dict[str, list[str]] = {}
    if reps > 0:
        for pf in fits:
            want = set(order) if settings.models == "all" else {pf.best.model, chosen}
            booted[pf.population] = [m for m in order if m in want]
        log.info(
            "bootstrap: %d replicates of %s",
            reps,
            "; ".join(f"{p}: {', '.join(ms)}" for p, ms in booted.items()),
        )
        sets = _labelled(spectra)
        bootstrap_fits(
            fits,
            block_spectra(sets),
            options,
            reps,
            covered=covered_bp(sets),
            seed=settings.seed,
            level=settings.level,
            workers=workers or settings.workers,
            scheduler=scheduler,
            models=booted,
        )
    opts = options.to_dict() | {
        "bootstrap": reps,
        "seed": settings.seed,
        "level": settings.level,
        "bootstrap_models": settings.models,
        "bootstrapped": booted,
        "compare_model": chosen,
    }
    prov = provenance(
        opts, {"spectra": _spectra_records(spectra), "point_fits": file_record(point_json)}
    )
    prov["seed"] = settings.seed
    out = fit_document(fits, opts, prov)
    write_fit_json(out, out_json, force=True)
    write_bands_tsv(fits, out_bands, options.effect, force=True)
    for pf in fits:
        mb = pf.model_bootstrap(pf.best.model)
        ci = mb.shares_ci[0] if mb is not None else None
        iv = f" ({ci.low:.3f}-{ci.high:.3f})" if ci is not None and math.isfinite(ci.low) else ""
        log.info(
            "bootstrap: %s: %s, share with |Ne*s| < %g: %.3f%s",
            pf.population,
            pf.best.model,
            options.shown_edges[1],
            pf.best.shares[0],
            iv,
        )
    return out


def stage_compare(
    fit_json: str | os.PathLike[str],
    settings: CompareSettings,
    out_tsv: str | os.PathLike[str],
    workers: int | None = None,
    study: Study | None = None,
    scheduler: Any = None,
) -> list[Any]:
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
    study : Study, optional
        For messages naming the study file's keys.
    scheduler : str or distributed.Client, optional
        Run the tests on this dask cluster instead of local workers.

    Returns
    -------
    list of driftband.compare.ComparisonRow
    """
    from ..compare import compare_fits, write_compare_tsv
    from ..fit.io import read_fits

    ff = read_fits(fit_json)
    name = ff.settings.get("compare_model") if settings.model == "auto" else settings.model
    source = _source(study, "compare") if study is not None else OptionSource("compare")
    rows = compare_fits(
        ff.populations,
        ff.options,
        str(name),
        pairs=settings.pairs,
        tests=settings.tests,
        relative_mu=settings.relative_mutation_rate,
        adjust=settings.adjust,
        source=source,
        holder="the study has",
        workers=workers,
        scheduler=scheduler,
    )
    write_compare_tsv(rows, out_tsv, force=True)
    return rows


def stage_report(
    study: Study,
    fit_json: str | os.PathLike[str],
    compare_tsv: str | os.PathLike[str] | None,
    spectra: list[SpectraFile],
    out_html: str | os.PathLike[str],
    out_md: str | os.PathLike[str],
    ran_on: dict[str, str] | None = None,
) -> None:
    """The HTML report and the Markdown summary of a study.

    Parameters
    ----------
    study : Study
        For the provenance (name, study file, input files with checksums).
    fit_json : path-like
    compare_tsv : path-like or None
    spectra : list of (dataset, label, path)
    out_html, out_md : path-like
    ran_on : dict of str to str, optional
        Where each stage ran (stage id -> e.g. ``2 local worker processes``), shown in
        the report's provenance.
    """
    import matplotlib

    from ..report import (
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
    inputs["spectra"] = [(file_record(p) or {}) | {"label": name} for name, _l, p in spectra]
    if study.source:
        inputs["study file"] = file_record(study.source)
    for d in study.datasets:
        for key in FILE_KEYS:
            if getattr(d, key) is not None:
                inputs[f"{d.name} {key}"] = file_record(getattr(d, key))
    opts: dict[str, Any] = {"study": study.name}
    if study.description:
        opts["description"] = study.description
    if ran_on:
        opts["stages ran on"] = "; ".join(f"{k}: {v}" for k, v in ran_on.items() if v)
    prov = provenance(opts, inputs)
    prov["environment"]["matplotlib"] = matplotlib.__version__
    prov["seed"] = (fit_doc.get("options") or {}).get("seed", study.bootstrap.seed)
    html = build_report(fit_doc, rows, docs, prov)
    md = build_summary_md(fit_doc, rows, docs, prov)
    with atomic_output(out_html, force=True) as fh:
        fh.write(html)
    with atomic_output(out_md, force=True) as fh:
        fh.write(md)
