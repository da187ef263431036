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
import os
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .._io import atomic_output
from .._parallel import available_cores, connect, resolve_workers, scheduler_address
from .._version import __version__
from ..exceptions import InputError, OptionError
from ..fit.size_history import demes_path
from .cache import StageCache, StageRunner, run_log
from .stages import (
    fit_options,
    stage_bootstrap,
    stage_classify,
    stage_compare,
    stage_fit,
    stage_report,
    stage_spectra,
)
from .study import Study, check_files, read_study, restate_option_error

__all__ = [
    "DEMO_STUDY",
    "STAGES",
    "RunResult",
    "demo_study",
    "demo_study_path",
    "output_paths",
    "run_study",
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
        "out_dir": out,
        "report": out / "report.html",
        "summary": out / "summary.md",
        "fit": out / "fit.json",
        "bands": out / "bands.tsv",
        "compare": out / "compare.tsv",
        "log": out / "run.log",
        "provenance": prov,
        "stages": prov / "stages.json",
        "study": prov / "study.json",
        "study_toml": prov / "study.toml",
        "point_fits": prov / "fit.point.json",
        "datasets": {},
    }
    for d in study.datasets:
        pre = f"{d.name}." if study.several else ""
        paths["datasets"][d.name] = {
            "sites": out / f"{pre}sites.bed" if d.sites is None else Path(d.sites),
            "classified": d.classify,
            "classify_summary": prov / f"{d.name}.classify.tsv",
            "spectra": out / f"{pre}spectra.json",
        }
    return paths


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
                files = ", ".join(
                    v for d in ident.get("datasets", []) for k, v in d.items() if k == "vcf"
                )
                what = f"another study ({ident.get('name')!r}, from {files or '?'})"
            raise OptionError(
                f"{out} holds the results of {what}; choose another output "
                "folder, or use --force to replace them"
            )
    elif out.is_dir() and any(out.iterdir()) and not force:
        raise OptionError(
            f"{out} is not empty and holds no driftband run (no "
            "provenance/study.json); choose a new or empty output folder, or "
            "use --force to write into it"
        )


def _remove_stale_temporaries(paths: dict[str, Any]) -> None:
    """Remove temporary files of our outputs left by a run that was killed mid-write."""
    outs = [
        p for k, p in paths.items() if isinstance(p, Path) and k not in ("out_dir", "provenance")
    ]
    for d in paths["datasets"].values():
        outs += [d["spectra"], d["classify_summary"]] + ([d["sites"]] if d["classified"] else [])
    for p in outs:
        for tmp in p.parent.glob(f".{p.name}.*.tmp"):
            with contextlib.suppress(OSError):
                tmp.unlink()
                log.info("removed %s, left by an interrupted run", tmp)


def _apply(
    study: Study, replicates: int | None, workers: int | None, seed: int | None, level: float | None
) -> Study:
    """The study with the bootstrap settings given on the command line."""
    from ..fit.bootstrap import check_bootstrap_settings

    b = study.bootstrap
    if workers is not None:
        resolve_workers(workers)
    changes: dict[str, Any] = {
        k: v
        for k, v in (
            ("replicates", replicates),
            ("workers", workers),
            ("seed", seed),
            ("level", level),
        )
        if v is not None
    }
    if not changes:
        return study
    nb = dataclasses.replace(b, **changes)
    check_bootstrap_settings(nb.replicates, nb.level)
    return dataclasses.replace(study, bootstrap=nb)


def run_study(
    study: Study,
    out_dir: str | os.PathLike | None = None,
    *,
    force: bool = False,
    replicates: int | None = None,
    workers: int | None = None,
    seed: int | None = None,
    level: float | None = None,
    scheduler: Any = None,
) -> RunResult:
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
    scheduler : str or distributed.Client, optional
        Run every stage's tasks (spectra regions, fits, bootstrap refits, tests) on this
        dask cluster instead of local worker processes; the results are the same. An
        address is connected to before any work (an unreachable one fails at once).

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
        raise OptionError(
            "no output folder: give --out-dir DIR (or out_dir in the study file's [study] section)"
        )
    out = Path(target).expanduser().absolute()
    study = _apply(study, replicates, workers, seed, level)
    check_files(study)
    options = fit_options(study)
    _preflight(study)
    # connect before any output is written: an unreachable scheduler fails at once
    client = connect(scheduler) if isinstance(scheduler, str) else scheduler
    try:
        paths = output_paths(study, out)
        _check_out_dir(out, study, paths["study"], force)
        paths["provenance"].mkdir(parents=True, exist_ok=True)
        result = RunResult(out, paths)
        with run_log(paths["log"]) as col:
            log.info(
                "driftband %s: run of study %r (%s) into %s%s",
                __version__,
                study.name,
                study.source or "command-line flags",
                out,
                " (--force)" if force else "",
            )
            _remove_stale_temporaries(paths)
            with atomic_output(paths["study"], force=True) as fh:
                json.dump(
                    {
                        "schema": _STUDY_SCHEMA,
                        "schema_version": 1,
                        "identity": study.identity(),
                        "study": study.to_dict(),
                        "driftband": __version__,
                        "updated": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
                    },
                    fh,
                    indent=1,
                )
                fh.write("\n")
            if study.text is not None:
                with atomic_output(paths["study_toml"], force=True) as fh:
                    fh.write(study.text)
            cache = StageCache(paths["stages"], force)
            nw = workers or study.bootstrap.workers or available_cores()
            where = (
                f"dask scheduler {scheduler_address(client)}"
                if client is not None
                else f"{nw} local worker process{'es' if nw != 1 else ''}"
            )
            runner = StageRunner(cache, col, result.stages, where)
            _run_stages(study, options, paths, runner, cache, workers, client)
            result.seconds = time.monotonic() - t0
            log.info("run finished in %.1f s: %s", result.seconds, paths["report"])
    finally:
        if client is not None and client is not scheduler:
            client.close()
    return result


def _preflight(study: Study) -> None:
    """The checks of ``driftband check`` that need no pass over the records, before any
    work: every problem of every dataset in one message."""
    from .preflight import check_study

    index = {d.name: i for i, d in enumerate(study.datasets)}
    problems = [
        f"dataset {c.name!r}: {p}" if study.several else p
        for c in check_study(study, count=False)
        for p in (
            str(restate_option_error(study, index.get(c.name, 0), OptionError(q)))
            for q in c.problems
        )
    ]
    if len(problems) == 1:
        raise InputError(f"preflight: {problems[0]}")
    if problems:
        raise InputError(f"preflight, {len(problems)} problems: " + "; ".join(problems))


def _keys_of(study: Study, index: int, fn: Callable[..., Any], *args: Any) -> Callable[[], Any]:
    """``fn(*args)``, its errors naming the study file's keys rather than flags."""

    def run() -> Any:
        try:
            return fn(*args)
        except OptionError as err:
            raise restate_option_error(study, index, err) from None

    return run


def _run_stages(
    study: Study,
    options: Any,
    paths: dict[str, Any],
    runner: StageRunner,
    cache: StageCache,
    workers: int | None,
    client: Any = None,
) -> None:
    spectra = []
    for i, d in enumerate(study.datasets):
        dp = paths["datasets"][d.name]
        if d.classify:
            runner.run(
                f"classify[{d.name}]",
                {"fasta": d.fasta, "gff": d.gff},
                d.classify_options(),
                [dp["sites"], dp["classify_summary"]],
                _keys_of(study, i, stage_classify, d, dp["sites"], dp["classify_summary"]),
            )
        inputs = {
            "vcf": d.vcf,
            "samples": d.samples,
            "sites": dp["sites"],
            "callable": d.callable,
            "blocks": d.blocks,
            "ancestral": d.ancestral_fasta,
        }
        for k, r in enumerate(d.regions or []):
            if os.path.isfile(r):
                inputs[f"regions{k}"] = r
        runner.run(
            f"spectra[{d.name}]",
            inputs,
            d.spectra_options(),
            [dp["spectra"]],
            _keys_of(study, i, stage_spectra, d, dp["sites"], dp["spectra"], workers, client),
        )
        spectra.append((d.name, d.name if study.several else "", dp["spectra"]))
    nworkers = workers or study.bootstrap.workers or available_cores()
    sp_inputs: dict[str, Path | str | None] = {f"spectra {n}": p for n, _l, p in spectra}
    demes = demes_path(study.fit.demography)
    if demes and os.path.isfile(demes):  # an edited demes file refits (a missing one: the
        sp_inputs["demes"] = demes  # fit stage names it)
    labels = {n: lab for n, lab, _p in spectra}
    fit_opts = options.to_dict() | {"labels": labels, "populations": study.fit.populations}
    runner.run(
        "fit",
        sp_inputs,
        fit_opts,
        [paths["point_fits"]],
        lambda: stage_fit(
            spectra, options, study.fit.populations, paths["point_fits"], nworkers, study, client
        ),
    )
    b = study.bootstrap
    boot_opts = fit_opts | {
        "replicates": b.replicates,
        "level": b.level,
        "seed": b.seed,
        "models": b.models,
        "compare_model": study.compare.model,
    }
    runner.run(
        "bootstrap",
        {"point_fits": paths["point_fits"], **sp_inputs},
        boot_opts,
        [paths["fit"], paths["bands"]],
        lambda: stage_bootstrap(
            paths["point_fits"],
            spectra,
            options,
            b,
            study.compare.model,
            paths["fit"],
            paths["bands"],
            workers,
            client,
        ),
    )
    npop = len(json.loads(paths["fit"].read_text(encoding="utf-8"))["populations"])
    compare = None
    if npop >= 2 and study.compare.tests:
        c = study.compare
        runner.run(
            "compare",
            {"fit": paths["fit"]},
            {
                "model": c.model,
                "tests": list(c.tests),
                "adjust": c.adjust,
                "pairs": c.pairs,
                "relative_mutation_rate": c.relative_mutation_rate,
            },
            [paths["compare"]],
            lambda: stage_compare(paths["fit"], c, paths["compare"], nworkers, study, client),
        )
        compare = paths["compare"]
    else:
        why = "one population" if npop < 2 else "[compare] tests is empty"
        log.info("stage compare: not run (%s)", why)
        runner.stages["compare"] = "not needed"
        if "compare" in cache.records:  # an earlier run's table no longer applies
            with contextlib.suppress(FileNotFoundError):
                paths["compare"].unlink()
            cache.drop("compare")
    runner.run(
        "report",
        {"fit": paths["fit"], "compare": compare, **sp_inputs},
        {"study": study.name, "description": study.description, "identity": study.identity()},
        [paths["report"], paths["summary"]],
        lambda: stage_report(
            study,
            paths["fit"],
            compare,
            spectra,
            paths["report"],
            paths["summary"],
            {k: v for k, v in cache.ran_on().items() if k in runner.stages},
        ),
    )


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

    res = resources.files("driftband") / "data" / "demo" / DEMO_STUDY
    # a package on disk gives a pathlib.Path; one inside a zip file has no file to read
    p = Path(os.fspath(res)) if isinstance(res, os.PathLike) else None
    if p is None or not p.is_file():
        raise InputError(
            "the demo data is not installed with this driftband (expected "
            "driftband/data/demo/); reinstall with 'pip install .' from a "
            "clone of the repository",
            p,
        )
    return p


def demo_study() -> Study:
    """The demo study (an invented snail with a lake and a spring population)."""
    return read_study(demo_study_path())
