"""Site frequency spectra from a VCF: the driver of ``driftband spectra``.

The work is split so that it scales:

1. :func:`~driftband.spectra.counting.make_design` and
   :func:`~driftband.spectra.plan.make_plan` fix, from the sample_table, the options and the
   BED files alone, who is counted and where the callable sites are.
2. :func:`~driftband.spectra.counting.count_region` counts one region of an indexed VCF
   into summable :class:`~driftband.spectra.counting.RegionCounts`; the region tasks run
   here, on local worker processes or on a Dask cluster
   (:func:`~driftband.spectra.parallel.count_regions`). A file without an index is read
   as one stream (:func:`~driftband.spectra.counting.count_stream`).
3. :func:`~driftband.spectra.projection.spectra_from_counts` turns the summed counts into
   spectra (sample size, projection, entry 0, folding).

:func:`build_spectra` does all of it and records the provenance; the rules for skipped
records and the default sample size are in the docstrings of
:mod:`driftband.spectra.counting` and :mod:`driftband.spectra.projection`.
"""

from __future__ import annotations

import logging
import os
import threading
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._io import file_record, provenance
from .._progress import Progress
from ..exceptions import InputError, OptionError
from ..sites.bed import IntervalSet, SiteClasses, read_mask, read_site_classes
from ..variants.samples import SampleAssignment, SampleTable, assign_samples, read_sample_table
from ..variants.source import VariantSource, VcfSource, open_variants
from ._types import Block, SpectraSet
from .callable import (
    callable_status,
    sites_with_records,
    sparse_message,
    variants_only_message,
)
from .counting import CountDesign, RegionCounts, count_stream, make_design
from .plan import (
    DEFAULT_REGION_SIZE,
    SitePlan,
    chrom_mismatch_hint,
    make_plan,
    parse_regions,
    read_blocks,
)
from .projection import DEFAULT_KEEP_FRACTION, spectra_from_counts

__all__ = [
    "Prepared",
    "SpectraOptions",
    "build_spectra",
    "count_prepared",
    "prepare_counting",
]

log = logging.getLogger("driftband")


@dataclass(frozen=True)
class SpectraOptions:
    """How :func:`build_spectra` counts and assembles: its options besides the inputs and
    the run-time hooks (``progress``, ``scheduler``).

    The attributes are the keyword arguments of :func:`build_spectra` of the same names,
    ``regions`` as a tuple.
    """

    ancestral: str
    project: int | Mapping[str, int] | None
    block_size: int
    blocks: str | os.PathLike | None
    regions: tuple[str, ...] | None
    min_gq: int | None
    min_dp: int | None
    pass_only: bool
    region_size: int
    keep: float
    checksums: bool
    workers: int | None
    exclude_lowercase_ancestral: bool = False
    all_sites_callable: bool = False

    def provenance_options(self) -> dict[str, Any]:
        """The options as recorded in the provenance of the spectra file."""
        project = self.project
        return {
            "ancestral": self.ancestral,
            "project": project if not isinstance(project, Mapping) else dict(project),
            "block_size": None if self.blocks else self.block_size,
            "blocks": None if self.blocks is None else os.fspath(self.blocks),
            "regions": list(self.regions) if self.regions else None,
            "min_gq": self.min_gq,
            "min_dp": self.min_dp,
            "pass_only": self.pass_only,
            "exclude_lowercase_ancestral": self.exclude_lowercase_ancestral,
            "all_sites_callable": self.all_sites_callable,
            "keep_fraction": self.keep,
            "projection_rule": (
                f"largest n such that >= {self.keep:.0%} of usable "
                "records have n or more called gene copies"
            ),
        }


def build_spectra(
    vcf: str | os.PathLike,
    sample_table: SampleTable | str | os.PathLike,
    sites: SiteClasses | str | os.PathLike,
    *,
    callable_mask: IntervalSet | str | os.PathLike | None = None,
    ancestral: str = "aa",
    project: int | Mapping[str, int] | None = None,
    block_size: int = 100_000,
    blocks: str | os.PathLike | None = None,
    regions: Sequence[str] | None = None,
    min_gq: int | None = None,
    min_dp: int | None = None,
    pass_only: bool = False,
    region_size: int = DEFAULT_REGION_SIZE,
    keep: float = DEFAULT_KEEP_FRACTION,
    progress: Callable[[int, int, int], None] | None = None,
    checksums: bool = True,
    workers: int | None = 1,
    scheduler: Any = None,
    exclude_lowercase_ancestral: bool = False,
    all_sites_callable: bool = False,
) -> SpectraSet:
    """Per-population, per-class, per-block site frequency spectra from a VCF/BCF.

    Parameters
    ----------
    vcf : path-like
        VCF (bgzipped + indexed, bgzipped, gzipped or plain), BCF, or ``-`` for stdin.
    sample_table : SampleTable or path-like
        ``sample<TAB>population``.
    sites : SiteClasses or path-like
        BED4 of site classes (e.g. ``0fold``, ``4fold``).
    callable_mask : IntervalSet or path-like, optional
        BED of callable sites; classes are intersected with it.
    ancestral : str
        ``"aa"`` (INFO/AA), ``"fold"``, ``"outgroup:POP"`` or ``"fasta:FILE"`` (an
        ancestral sequence aligned to the reference, see
        :mod:`driftband.spectra.ancestral`).
    project : int or mapping, optional
        Sample size (gene copies) for all or some populations; default rule otherwise.
    block_size : int
        Default block length (bp).
    blocks : path-like, optional
        BED of blocks (e.g. genes) instead of windows.
    regions : sequence of str, optional
        ``CHROM``, ``CHROM:START-END`` (1-based, inclusive) or BED files.
    min_gq, min_dp : int, optional
        Genotype filters.
    pass_only : bool
        Keep only records with FILTER PASS or ``.``.
    region_size : int
        Length of a counting task (bp); a worker holds one task's records at a time.
    keep : float
        Fraction of sites kept by the default projection rule.
    progress : callable, optional
        Called as ``progress(done, total, records)`` (``total`` 0 when unknown).
    checksums : bool
        Record SHA-256 checksums of the inputs in the provenance.
    workers : int, optional
        Worker processes counting regions of an indexed file (default 1: in this process;
        None: the cores available). The spectra do not depend on it.
    scheduler : str or distributed.Client, optional
        Count on this dask.distributed cluster instead (address ``tcp://HOST:8786``);
        every worker must see the VCF at the same path.
    exclude_lowercase_ancestral : bool
        With ``fasta:FILE``: drop sites whose ancestral base is lower case (low confidence).
    all_sites_callable : bool
        The user states that every class site (after the mask and regions) was callable,
        so that sites absent from the VCF are monomorphic: no warning when the VCF holds
        no monomorphic record (variants-only). Recorded in the provenance.

    Returns
    -------
    SpectraSet
    """
    # imported here: the parallel layer loads only when spectra are counted
    from .._parallel import connect, resolve_workers, scheduler_address
    from .parallel import check_region_size

    check_region_size(region_size)
    resolve_workers(workers)
    opts = SpectraOptions(
        ancestral=ancestral,
        project=project,
        block_size=block_size,
        blocks=blocks,
        regions=None if regions is None else tuple(regions),
        min_gq=min_gq,
        min_dp=min_dp,
        pass_only=pass_only,
        region_size=region_size,
        keep=keep,
        checksums=checksums,
        workers=workers,
        exclude_lowercase_ancestral=exclude_lowercase_ancestral,
        all_sites_callable=all_sites_callable,
    )
    client = connect(scheduler) if isinstance(scheduler, str) else scheduler  # fail fast
    src = None
    try:
        src = open_variants(vcf)
        ss = _build(src, vcf, sample_table, sites, callable_mask, opts, progress, client)
    finally:
        if src is not None:
            src.close()
        if client is not None and client is not scheduler:
            client.close()
    # how the counting ran (the spectra do not depend on it)
    ss.provenance["execution"] = {
        "region_size": region_size,
        "workers": resolve_workers(workers) if scheduler is None else None,
        "scheduler": scheduler_address(scheduler),
    }
    return ss


def _as_sample_table(x: SampleTable | str | os.PathLike) -> SampleTable:
    return x if isinstance(x, SampleTable) else read_sample_table(x)


def _as_classes(x: SiteClasses | str | os.PathLike) -> SiteClasses:
    return x if isinstance(x, SiteClasses) else read_site_classes(x)


@dataclass
class Prepared:
    """Everything fixed before any VCF record is read (see :func:`prepare_counting`).

    Attributes
    ----------
    sample_table : SampleTable
    assign : SampleAssignment
    classes : SiteClasses
    design : CountDesign
    plan : SitePlan
        Callable class sites (with their ancestral bases for ``fasta:FILE``).
    dropped : dict of str to dict of str to int
        Class sites dropped for want of an ancestral base, by reason and class (empty
        unless ``fasta:FILE``).
    bed_path : str
        The site-class BED's name, for messages.
    chroms_known : bool
        Whether the VCF's chromosomes are known before reading records (index or header).
    """

    sample_table: SampleTable
    assign: SampleAssignment
    classes: SiteClasses
    design: CountDesign
    plan: SitePlan
    dropped: dict[str, dict[str, int]]
    bed_path: str
    chroms_known: bool


def prepare_counting(
    src: VariantSource,
    sample_table: SampleTable | str | os.PathLike,
    sites: SiteClasses | str | os.PathLike,
    callable_mask: IntervalSet | str | os.PathLike | None,
    opts: SpectraOptions,
) -> Prepared:
    """Check the header, match the samples and plan the callable sites, before counting.

    Parameters
    ----------
    src : VcfSource or VczSource
        The open VCF/BCF or VCF Zarr store.
    sample_table, sites, callable_mask
        As for :func:`build_spectra`.
    opts : SpectraOptions

    Returns
    -------
    Prepared

    Raises
    ------
    InputError, OptionError
        The checks of :func:`build_spectra` that need no VCF record.
    """
    pm = _as_sample_table(sample_table)
    og = _check_header(src, opts)
    assign = assign_samples(pm, src.header.samples, src.path, og or None)
    if assign.ignored:
        shown = ", ".join(assign.ignored[:10]) + (" ..." if len(assign.ignored) > 10 else "")
        log.warning(
            "%d VCF sample(s) not in the sample table are ignored: %s", len(assign.ignored), shown
        )
    sc = _as_classes(sites)
    mask = None
    if callable_mask is not None:
        mask = callable_mask if isinstance(callable_mask, IntervalSet) else read_mask(callable_mask)
    reg = parse_regions(opts.regions) if opts.regions else None
    blk = read_blocks(opts.blocks) if opts.blocks is not None else None
    design = make_design(
        assign, sorted(sc.classes), opts.ancestral, opts.min_dp, opts.min_gq, opts.pass_only
    )
    vchroms = src.chroms
    plan = make_plan(sc, vchroms, mask, reg, opts.block_size, blk, src.header.contig_lengths)
    bed_path = sc.path or "site classes"
    if reg is not None:
        unknown = [c for c in reg.chroms if vchroms and c not in vchroms]
        if unknown and (src.indexed or src.header.contigs):
            raise OptionError(
                f"--regions: chromosome {unknown[0]!r} is not in the VCF "
                f"({chrom_mismatch_hint(unknown, vchroms)})"
            )
    known_now = src.indexed or bool(src.header.contigs)
    if known_now:
        _check_chroms(plan, sc, vchroms, bed_path, src.path)
    dropped: dict[str, dict[str, int]] = {}
    if design.ancestral == "fasta" and design.ancestral_file is not None:
        from .ancestral import attach_ancestral

        plan, dropped = attach_ancestral(
            plan, design.ancestral_file, opts.exclude_lowercase_ancestral, src.header.contig_lengths
        )
    for c, n in plan.sites().items():
        if n == 0:
            why = " and the sites without an ancestral base" if dropped else ""
            raise InputError(
                f"class {c!r} has no callable sites after intersecting with the "
                f"mask, regions and blocks{why}",
                bed_path,
            )
    return Prepared(pm, assign, sc, design, plan, dropped, bed_path, known_now)


def count_prepared(
    src: VariantSource,
    prep: Prepared,
    opts: SpectraOptions,
    progress: Callable[[int, int, int], None] | None = None,
    scheduler: Any = None,
) -> tuple[RegionCounts, SitePlan]:
    """Count the records of the VCF on the prepared plan (regions of an indexed file in
    parallel, or one stream); returns the summed counts and the plan they refer to."""
    if src.indexed:
        from .parallel import count_regions

        plan = prep.plan.restrict(src.chroms)
        total = count_regions(
            src,
            prep.design,
            plan,
            opts.region_size,
            workers=opts.workers,
            scheduler=scheduler,
            progress=progress,
        )
    else:
        assert isinstance(src, VcfSource)  # a store is always read by region
        check = None if prep.chroms_known else (prep.classes, prep.bed_path)
        total, plan = _count_unindexed(
            src, prep.design, prep.plan, opts, progress, scheduler, check
        )
    if total.records == 0:
        raise InputError("the VCF holds no records in the regions with class sites", src.path)
    return total, plan


def _build(
    src: VariantSource,
    vcf: str | os.PathLike,
    sample_table: SampleTable | str | os.PathLike,
    sites: SiteClasses | str | os.PathLike,
    callable_mask: IntervalSet | str | os.PathLike | None,
    opts: SpectraOptions,
    progress: Callable[[int, int, int], None] | None,
    scheduler: Any,
) -> SpectraSet:
    """:func:`build_spectra` on an open VCF; ``provenance`` without ``execution``."""
    digest = _Checksum(vcf if opts.checksums else None)  # hashed while counting runs
    prep = prepare_counting(src, sample_table, sites, callable_mask, opts)
    tracker = _CountingProgress(progress)
    total, plan = count_prepared(src, prep, opts, tracker, scheduler)
    tracker.close()
    status = callable_status(
        total, callable_mask is not None, opts.all_sites_callable, sum(plan.sites().values())
    )
    ss = spectra_from_counts(total, prep.design, plan.blocks, opts.project, opts.keep)
    absent = max(sum(plan.sites().values()) - sites_with_records(total), 0)
    if status["warn"]:
        log.warning("%s", variants_only_message(src.path, absent))
    elif status.get("sparse") and not opts.all_sites_callable:
        log.warning("%s", sparse_message(src.path, status["record_coverage"], absent))
    ss.provenance = _provenance(
        opts,
        digest,
        vcf,
        prep.sample_table,
        prep.classes,
        callable_mask,
        total,
        prep.design,
        prep.assign.ignored,
    )
    ss.provenance["callable_sites"] = {k: v for k, v in status.items() if k != "warn"} | {
        "warning": status["warn"]
    }
    if prep.dropped:
        ss.provenance["counts"]["dropped_sites"] = prep.dropped
    return ss


def _check_header(src: VariantSource, opts: SpectraOptions) -> str:
    """Check that the VCF header (or the store's arrays) has what the options need; the
    outgroup's name or ''."""
    kind, _, og = opts.ancestral.partition(":")
    if kind == "outgroup" and not og:
        raise OptionError("--ancestral outgroup:POP needs the outgroup population's name")
    if opts.exclude_lowercase_ancestral and kind != "fasta":
        raise OptionError(
            "--exclude-lowercase-ancestral applies only to --ancestral fasta:FILE "
            f"(not {opts.ancestral})"
        )
    store = src.kind == "vcz"
    if kind == "aa" and "AA" not in src.header.info:
        where = (
            "the store has no variant_AA array"
            if store
            else "the header declares no ##INFO=<ID=AA> field"
        )
        raise InputError(
            f"--ancestral aa needs INFO/AA, but {where}; use --ancestral fold, "
            "outgroup:POP or fasta:FILE",
            src.path,
        )
    if "GT" not in src.header.formats:
        raise InputError(
            "the VCF has no GT field (no ##FORMAT=<ID=GT> header line); spectra need genotypes",
            src.path,
        )
    for name, v, key in (("--min-dp", opts.min_dp, "DP"), ("--min-gq", opts.min_gq, "GQ")):
        if v is not None and key not in src.header.formats:
            where = (
                f"the store has no call_{key} array"
                if store
                else (f"the header declares no FORMAT/{key}")
            )
            raise InputError(f"{name} given but {where}", src.path)
    return og if kind == "outgroup" else ""


class _CountingProgress:
    """The counting's ``progress(done, total, records)`` calls fed to a :class:`Progress`
    (regions of an indexed file; records of a stream), then to the caller's callback."""

    def __init__(self, then: Callable[[int, int, int], None] | None) -> None:
        self.then = then
        self.prog: Progress | None = None
        self.records = 0

    def __call__(self, done: int, total: int, records: int) -> None:
        if self.prog is None:
            self.prog = Progress("spectra", total or None, "regions" if total else "records")
        self.prog.advance((done if total else records) - self.prog.done)
        self.records = records
        if self.then is not None:
            self.then(done, total, records)

    def close(self) -> None:
        if self.prog is not None:
            self.prog.close()
            log.info("spectra: %d records read", self.records)


def _count_unindexed(
    src: VcfSource,
    design: CountDesign,
    plan: SitePlan,
    opts: SpectraOptions,
    progress: Callable[[int, int, int], None] | None,
    scheduler: Any,
    check: tuple[SiteClasses, str] | None,
) -> tuple[RegionCounts, SitePlan]:
    """Count a file without an index as one stream, in this process.

    ``check`` (site classes, BED name) when the VCF's chromosomes are known only after the
    stream: they are checked against the BED then. Returns the counts and the plan,
    restricted to the chromosomes of the VCF (the block indices of the counts renumbered).
    """
    if scheduler is not None or opts.workers != 1:
        (log.warning if scheduler is not None else log.info)(
            "%s is not indexed: counting it as one stream in this process (index it "
            "with tabix -p vcf or bcftools index to count regions in parallel)",
            src.path,
        )
    state = {"n": 0}

    def tick(_chrom: str, k: int) -> None:
        state["n"] += k
        if progress is not None:
            progress(0, 0, state["n"])

    total = count_stream(src, design, plan, opts.region_size, tick)
    present = list(dict.fromkeys([*src.header.contigs, *sorted(total.chroms)]))
    if check is not None:
        _check_chroms(plan, check[0], present, check[1], src.path)
    keep_chroms = [c for c in plan.chroms if c in set(present)]
    if len(keep_chroms) < len(plan.chroms):
        old_blocks = plan.blocks
        plan = plan.restrict(keep_chroms)
        total = _renumber(total, old_blocks, plan.blocks)
    return total, plan


def _provenance(
    opts: SpectraOptions,
    digest: _Checksum,
    vcf: str | os.PathLike,
    pm: SampleTable,
    sc: SiteClasses,
    callable_mask: IntervalSet | str | os.PathLike | None,
    total: RegionCounts,
    design: CountDesign,
    ignored: Sequence[str],
) -> dict[str, Any]:
    """The provenance of the spectra file: options, inputs and what was counted."""

    def rec(p: str | os.PathLike | None) -> dict[str, Any] | None:
        if opts.checksums:
            return file_record(p)
        if p is None:
            return None
        return {"path": os.path.abspath(os.fspath(p)) if os.fspath(p) != "-" else "-"}

    inputs = {
        "vcf": digest.result() or rec(vcf),
        "samples": rec(pm.path),
        "sites": rec(sc.path),
        "callable": rec(callable_mask) if isinstance(callable_mask, str | os.PathLike) else None,
        "blocks": rec(opts.blocks),
        "ancestral": rec(design.ancestral_file) if design.ancestral_file else None,
    }
    prov = provenance(opts.provenance_options(), {k: v for k, v in inputs.items() if v is not None})
    prov["counts"] = {
        "records_read": total.records,
        "records_used": {p: int(r[:, 4].sum()) for p, r in total.rows.items()},
        "ignored_samples": list(ignored),
        "samples": {p: int(c.size) for p, c in zip(design.populations, design.columns)},
        "outgroup": design.outgroup,
        "monomorphic_records": int(total.monomorphic),
        # the most gene copies called at a usable site: what the projection started from
        "called_copies_max": {
            p: int(r[r[:, 4] > 0, 2].max()) if (r[:, 4] > 0).any() else 0
            for p, r in total.rows.items()
        },
    }
    return prov


class _Checksum:
    """SHA-256 of the VCF for the provenance, computed in a helper thread while counting
    runs (it is I/O bound, and file reads and hashlib release the GIL)."""

    def __init__(self, path: str | os.PathLike | None) -> None:
        self.path = None if path is None or os.fspath(path) == "-" else os.fspath(path)
        self.record: dict[str, Any] | None = None
        self.error: BaseException | None = None
        self._t: threading.Thread | None = None
        if self.path is not None:
            self._t = threading.Thread(target=self._run, name="driftband-sha256", daemon=True)
            self._t.start()

    def _run(self) -> None:
        try:
            self.record = file_record(self.path)
        except BaseException as err:  # re-raised by result()
            self.error = err

    def result(self) -> dict[str, Any] | None:
        """The file record (path, size, sha256), or None without a checksum."""
        if self._t is not None:
            self._t.join()
        if self.error is not None:
            raise self.error
        return self.record


def _check_chroms(
    plan: SitePlan, sc: SiteClasses, vchroms: Sequence[str], bed_path: str, vcf_path: str
) -> None:
    bed_chroms = list(plan.chroms) or sorted(sc.chroms)
    present = [c for c in bed_chroms if c in set(vchroms)]
    if not present:
        ex_b = ", ".join(bed_chroms[:3])
        ex_v = ", ".join(list(vchroms)[:3]) or "none"
        raise InputError(
            f"none of the BED chromosomes ({ex_b} ...) is in the VCF "
            f"{vcf_path} (it has {ex_v} ...); "
            f"{chrom_mismatch_hint(bed_chroms, vchroms)}",
            bed_path,
        )
    absent = [c for c in bed_chroms if c not in set(vchroms)]
    if absent:
        log.warning(
            "%d BED chromosome(s) are not in the VCF and are left out: %s%s",
            len(absent),
            ", ".join(absent[:5]),
            " ..." if len(absent) > 5 else "",
        )


def _renumber(total: RegionCounts, old: Sequence[Block], new: Sequence[Block]) -> RegionCounts:
    pos = {(b.chrom, b.start, b.end, b.name): i for i, b in enumerate(new)}
    remap = np.array([pos.get((b.chrom, b.start, b.end, b.name), -1) for b in old], np.int64)

    def fix(a: np.ndarray, col: int = 1) -> np.ndarray:
        if not a.size:
            return a
        a = a.copy()
        a[:, col] = remap[a[:, col]]
        return a[a[:, col] >= 0]

    return RegionCounts(
        {p: fix(r) for p, r in total.rows.items()},
        fix(total.callable),
        fix(total.removed),
        total.skipped,
        total.records,
        total.chroms,
        total.monomorphic,
    )
