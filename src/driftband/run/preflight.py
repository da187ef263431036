"""Preflight checks of a study: will ``driftband run`` succeed, and what will it do?

:func:`check_study` looks at every dataset of a study before any stage runs:

* without reading records (``count=False``; what ``driftband run`` does first): the VCF
  header, the sample table against the VCF's samples (found and missing per population),
  the polarisation source (INFO/AA declared, the outgroup's samples, the ancestral FASTA's
  sequences), the chromosomes of the site classes (or of the reference FASTA) against the
  VCF's, with the ``chr`` prefix hint, and the genotype fields the filters need;
* with a pass over the records (``count=True``; ``driftband check``): the callable sites
  per class, the polarisation coverage, the missing data per population, the segregating
  sites and blocks for candidate sample sizes n with the one the run would take, whether
  the VCF looks variants-only, and what the run would do.

Problems (what would make the run stop) are collected as one-line reasons, not raised, so
that all of them are shown at once.
"""

from __future__ import annotations

import os
import tempfile
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..exceptions import DriftbandError
from .study import Dataset, Study

__all__ = ["CandidateN", "DatasetCheck", "PopulationCheck", "check_dataset", "check_study"]

#: Fractions of the usable records a candidate sample size keeps (besides the default).
_CANDIDATE_KEEP = (1.0, 0.95, 0.8)


@dataclass
class CandidateN:
    """One candidate sample size of a population.

    Attributes
    ----------
    n : int
        Gene copies.
    kept : float
        Share of the usable records called at n or more copies.
    segregating : dict of str to float
        Expected segregating sites per class after projection to n.
    blocks : int
        Blocks holding at least one segregating site (any class).
    """

    n: int
    kept: float
    segregating: dict[str, float]
    blocks: int


@dataclass
class PopulationCheck:
    """Samples and, after a pass over the VCF, the data of one population."""

    name: str
    role: str  # "focal" or "outgroup"
    found: int
    missing: list[str]
    missing_data: float | None = None  # share of gene copies not called (usable records)
    candidates: list[CandidateN] = field(default_factory=list)
    n: int | None = None  # the sample size the run would use


@dataclass
class DatasetCheck:
    """The preflight of one dataset: facts, the run's plan, warnings and problems."""

    name: str
    facts: list[tuple[str, str]] = field(default_factory=list)
    populations: list[PopulationCheck] = field(default_factory=list)
    plan: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        """True when the run would go through this dataset."""
        return not self.problems


def check_study(study: Study, count: bool = True, workers: int | None = 1) -> list[DatasetCheck]:
    """Preflight checks of every dataset of a study (see the module docstring).

    Parameters
    ----------
    study : Study
    count : bool
        Also make a pass over the VCF records (and classify a FASTA + GFF3 in memory).
    workers : int, optional
        Worker processes of the pass over an indexed VCF (None: the cores available).

    Returns
    -------
    list of DatasetCheck
        One per dataset; the run would succeed when every one is ``ok``.
    """
    return [check_dataset(d, study, count, workers) for d in study.datasets]


def check_dataset(
    d: Dataset, study: Study, count: bool = True, workers: int | None = 1
) -> DatasetCheck:
    """Preflight checks of one dataset of ``study`` (see :func:`check_study`)."""
    from ..variants.source import open_variants

    out = DatasetCheck(d.name)
    try:
        src = open_variants(d.vcf)
    except DriftbandError as err:
        out.problems.append(str(err))
        return out
    try:
        _static(d, src, out)
        if count and out.ok:
            _counted(d, study, src, out, workers)
    finally:
        src.close()
    return out


def _chroms_fact(label: str, wanted: list[str], vcf_chroms: list[str], out: DatasetCheck) -> None:
    from ..spectra.plan import chrom_mismatch_hint

    if not vcf_chroms:
        out.facts.append(("contigs", "the VCF names its chromosomes only in its records"))
        return
    have = set(vcf_chroms)
    hit = [c for c in wanted if c in have]
    text = f"{len(hit)} of {len(wanted)} chromosomes of the {label} are in the VCF"
    if not hit:
        out.problems.append(
            f"none of the chromosomes of the {label} ({', '.join(wanted[:3])} ...) is in "
            f"the VCF (it has {', '.join(vcf_chroms[:3])} ...); "
            f"{chrom_mismatch_hint(wanted, vcf_chroms)}"
        )
    elif len(hit) < len(wanted):
        left = [c for c in wanted if c not in have]
        text += f" (left out: {', '.join(left[:5])}{' ...' if len(left) > 5 else ''})"
    out.facts.append(("contigs", text))


def _static(d: Dataset, src: Any, out: DatasetCheck) -> None:
    """The checks that need no record: header, samples, polarisation source, chromosomes."""
    from ..sites.bed import read_site_classes
    from ..variants.samples import assign_samples, read_sample_table

    h = src.header
    kind = "indexed" if src.indexed else "not indexed (read as one stream)"
    if src.kind == "vcz":
        kind = f"VCF Zarr store, version {getattr(src, 'version', '?')}"
    out.facts.append(("VCF", f"{d.vcf}: {kind}, {len(h.samples)} samples"))
    try:
        pm = read_sample_table(d.samples)
    except DriftbandError as err:
        out.problems.append(str(err))
        return
    anc_kind, _, anc_arg = d.ancestral.partition(":")
    og = anc_arg if anc_kind == "outgroup" else None
    have = set(h.samples)
    for p in pm.populations:
        members = pm.members(p)
        out.populations.append(
            PopulationCheck(
                p,
                "outgroup" if p == og else "focal",
                sum(s in have for s in members),
                [s for s in members if s not in have],
            )
        )
    ignored = [s for s in h.samples if s not in pm.samples]
    if ignored:
        out.facts.append(("samples", f"{len(ignored)} VCF samples not in the sample table"))
    try:
        assign_samples(pm, h.samples, src.path, og)
    except DriftbandError as err:
        out.problems.append(str(err))
    if "GT" not in h.formats:
        out.problems.append(f"{src.path}: no FORMAT/GT declared; spectra need genotypes")
    for key, v in (("min_dp", d.min_dp), ("min_gq", d.min_gq)):
        if v is not None and key[-2:].upper() not in h.formats:
            out.problems.append(f"{key} is given but {src.path} declares no {key[-2:].upper()}")
    vchroms = list(src.chroms)
    _polarisation(d, h, vchroms, out)
    if d.sites is not None:
        try:
            sc = read_site_classes(d.sites)
        except DriftbandError as err:
            out.problems.append(str(err))
            return
        _chroms_fact("site classes", sorted(sc.chroms), vchroms, out)
    elif d.fasta is not None:
        from ..sites.fasta import open_fasta

        try:
            fa = open_fasta(d.fasta)
            names = list(fa.references)
            fa.close()
        except DriftbandError as err:
            out.problems.append(str(err))
            return
        _chroms_fact("reference FASTA", names, vchroms, out)


def _polarisation(d: Dataset, h: Any, vchroms: list[str], out: DatasetCheck) -> None:
    kind, _, arg = d.ancestral.partition(":")
    if kind == "aa":
        if "AA" in h.info:
            out.facts.append(("polarisation", "INFO/AA (declared in the header)"))
        else:
            out.problems.append(
                "ancestral = aa needs INFO/AA, but the VCF header declares no ##INFO=<ID=AA>; "
                "use fold, outgroup:POP or fasta:FILE"
            )
    elif kind == "fold":
        out.facts.append(("polarisation", "none: folded (minor-allele) spectra"))
    elif kind == "outgroup":
        pop = next((p for p in out.populations if p.name == arg), None)
        if pop is not None and pop.found:
            out.facts.append(("polarisation", f"outgroup {arg} ({pop.found} samples)"))
        elif pop is not None:
            out.problems.append(f"the outgroup {arg!r} has no sample in the VCF")
    else:
        from ..sites.fasta import open_fasta

        try:
            fa = open_fasta(arg)
            names = list(fa.references)
            fa.close()
        except DriftbandError as err:
            out.problems.append(str(err))
            return
        hit = [c for c in vchroms if c in set(names)]
        out.facts.append(
            (
                "polarisation",
                f"ancestral FASTA {os.path.basename(arg)} ({len(hit)} of {len(vchroms)} "
                "VCF chromosomes)",
            )
        )
        if vchroms and not hit:
            from ..spectra.plan import chrom_mismatch_hint

            out.problems.append(
                f"{arg}: none of the VCF's chromosomes is in the ancestral FASTA; "
                f"{chrom_mismatch_hint(names, vchroms)}"
            )


def _counted(d: Dataset, study: Study, src: Any, out: DatasetCheck, workers: int | None) -> None:
    """The pass over the records: counts, candidate n, callable sites, the run's plan."""
    from ..spectra.build import SpectraOptions, count_prepared, prepare_counting
    from ..spectra.callable import (
        CALLABLE_SOURCES,
        callable_status,
        sites_with_records,
        sparse_message,
        variants_only_message,
    )
    from ..spectra.projection import DEFAULT_KEEP_FRACTION, spectra_from_counts

    opts = SpectraOptions(
        ancestral=d.ancestral,
        project=d.project,
        block_size=d.block_size,
        blocks=d.blocks,
        regions=None if d.regions is None else tuple(d.regions),
        min_gq=d.min_gq,
        min_dp=d.min_dp,
        pass_only=d.pass_only,
        region_size=5_000_000,
        keep=DEFAULT_KEEP_FRACTION,
        checksums=False,
        workers=workers,
        exclude_lowercase_ancestral=d.exclude_lowercase_ancestral,
        all_sites_callable=d.all_sites_callable,
    )
    with tempfile.TemporaryDirectory(prefix="driftband-check-") as tmp:
        try:
            sites = d.sites if d.sites is not None else _classify(d, tmp)
            prep = prepare_counting(src, d.samples, sites, d.callable, opts)
            total, plan = count_prepared(src, prep, opts)
            ss = spectra_from_counts(total, prep.design, plan.blocks, d.project)
        except DriftbandError as err:
            out.problems.append(str(err))
            return
    per = plan.sites()
    out.facts.append(("callable sites", ", ".join(f"{c} {n:,}" for c, n in per.items())))
    for reason, by in prep.dropped.items():
        out.facts.append((reason, ", ".join(f"{c} {n:,}" for c, n in by.items())))
    sk = total.skipped
    if prep.design.ancestral != "fold":
        usable = int(next(iter(total.rows.values()))[:, 4].sum()) if total.rows else 0
        unpol = sk.get("unpolarisable", 0)
        share = usable / (usable + unpol) if usable + unpol else float("nan")
        out.facts.append(
            ("polarised", f"{share:.1%} of the records at class sites ({unpol:,} unpolarisable)")
        )
    status = callable_status(total, d.callable is not None, d.all_sites_callable, sum(per.values()))
    looks = "yes" if status["variants_only"] else "no"
    out.facts.append(
        (
            "variants-only",
            f"{looks} ({status['monomorphic_records']:,} monomorphic records; records at "
            f"{status.get('record_coverage', 0.0):.1%} of the callable class sites)",
        )
    )
    out.facts.append(("callable from", CALLABLE_SOURCES[status["source"]]))
    if status["warn"]:
        out.warnings.append(variants_only_message(src.path))
    elif status.get("sparse") and not d.all_sites_callable:
        absent = max(sum(per.values()) - sites_with_records(total), 0)
        out.warnings.append(sparse_message(src.path, status["record_coverage"], absent))
    for pop in out.populations:
        rows = total.rows.get(pop.name)
        if pop.role != "focal" or rows is None or not rows.size:
            continue
        m, w = rows[:, 2], rows[:, 4]
        pop.missing_data = 1.0 - float((m * w).sum()) / float(w.sum() * max(int(m.max()), 1))
        pop.n = ss.populations[pop.name].n
        for n in _candidates(m, w, pop.n):
            pop.candidates.append(_candidate(total, prep.design, plan.blocks, pop.name, n, m, w))
    _plan_lines(d, study, ss, plan, out)


def _classify(d: Dataset, tmp: str) -> str:
    """Site classes of a FASTA + GFF3 dataset, classified into a temporary BED."""
    from .stages import stage_classify

    bed = os.path.join(tmp, "sites.bed")
    stage_classify(d, bed)
    return bed


def _candidates(m: np.ndarray, w: np.ndarray, chosen: int) -> list[int]:
    from ..spectra.projection import choose_sample_size

    ns = {int(m.max()), chosen}
    ns |= {choose_sample_size(m, w, k) for k in _CANDIDATE_KEEP}
    return sorted((n for n in ns if n >= 2), reverse=True)


def _candidate(
    total: Any, design: Any, blocks: list[Any], pop: str, n: int, m: np.ndarray, w: np.ndarray
) -> CandidateN:
    from dataclasses import replace

    from ..spectra.projection import spectra_from_counts

    one = replace(design, populations=(pop,), columns=design.columns[:1])
    ps = spectra_from_counts(total, one, blocks, n).populations[pop]
    seg = {c: float(ps.stats.get(c, {}).get("segregating", 0.0)) for c in ps.classes}
    last = -1 if not ps.folded else None
    poly = sum(cs.block_sfs[:, 1:last].sum(axis=1) for cs in ps.classes.values())
    return CandidateN(n, float(w[m >= n].sum() / w.sum()), seg, int((np.asarray(poly) > 0).sum()))


def _plan_lines(d: Dataset, study: Study, ss: Any, plan: Any, out: DatasetCheck) -> None:
    from ..defaults import MIN_BLOCKS

    out.plan.append(
        "classify the sites of the reference FASTA + GFF3"
        if d.classify
        else f"use the site classes of {os.path.basename(d.sites or '')}"
    )
    sizes = ", ".join(f"{p} to n = {v.n}" for p, v in ss.populations.items())
    folded = next(iter(ss.populations.values())).folded
    how = f"{d.block_size:,} bp windows" if d.blocks is None else os.path.basename(d.blocks)
    out.plan.append(
        f"count {'folded' if folded else 'unfolded'} spectra ({sizes}) in "
        f"{len(plan.blocks)} blocks ({how})"
    )
    if len(plan.blocks) < MIN_BLOCKS:
        out.warnings.append(
            f"only {len(plan.blocks)} blocks: bootstrap intervals from fewer than "
            f"{MIN_BLOCKS} are unreliable; use a smaller block_size"
        )
    b = study.bootstrap
    out.plan.append(
        f"fit {', '.join(study.fit.dfe)} to every population; "
        f"{b.replicates} bootstrap replicates; "
        + ("compare every pair" if len(ss.populations) > 1 else "no comparison (one population)")
    )
