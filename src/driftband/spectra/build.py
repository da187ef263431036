"""Site frequency spectra from a VCF: counting per region, then projection and assembly.

The work is split so that it scales (DESIGN §5):

1. :func:`make_design` and :func:`driftband.spectra.plan.make_plan` fix, from the popmap,
   the options and the BED files alone, who is counted and where the callable sites are.
2. :func:`count_region` counts one region ``(chrom, start, end)`` of an indexed VCF into a
   :class:`RegionCounts`: for each population, class and block, how many sites have ``m``
   called gene copies of which ``d`` are derived (ALT copies when folding), plus the
   callable and removed site counts and the skipped records by reason. It is pure (opens
   the file itself, keeps no state) and its results add up with ``+`` in any order, so
   region tasks can run in parallel (e.g. on Dask); memory is bounded by one region.
3. :func:`spectra_from_counts` turns the summed counts into spectra: it chooses the sample
   size ``n`` of each population, projects every site to ``n`` copies (hypergeometric),
   fills entry 0 with the callable sites not seen as variable, and folds when asked.
   Because projection comes after summation, results do not depend on the region order.

:func:`build_spectra` is the driver that does all of it (the ``driftband spectra`` command).

Rules (stated in the README)
----------------------------
* Skipped records, in this order of precedence: ``no_site_class`` (POS not a callable
  class site: outside the class BED, the mask, ``--regions`` or ``--blocks``),
  ``indel_or_symbolic`` (indel, MNP, symbolic or non-ACGT allele), ``multiallelic``
  (more than one ALT allele; ``<*>``/``<NON_REF>`` placeholders do not count), ``filter``
  (with ``pass_only``: FILTER neither PASS nor ``.``), ``unpolarisable`` (AA missing or
  neither REF nor ALT; outgroup without calls or polymorphic), ``duplicate_position``
  (two or more records at one position, e.g. a split multi-allelic site). Sites of every
  reason but ``no_site_class`` and ``indel_or_symbolic`` are removed from the callable
  count (they are not known to be monomorphic). ``missing_data:POP``: sites with fewer
  than ``n`` called copies in population POP, dropped from its spectrum and its callable
  count.
* Monomorphic records (ALT ``.``) count at entry 0, or at entry ``n`` when INFO/AA is a
  base other than REF; callable sites absent from the VCF count at entry 0; no site is
  counted twice.
* Genotype filters ``min_dp``/``min_gq`` set a genotype to missing when its DP/GQ is below
  the threshold or missing.
* Default sample size (``project=None``): per population, the largest ``n`` such that at
  least 90 % of the usable records (biallelic SNPs and monomorphic records at callable
  class sites) have ``n`` or more called gene copies. Without missing data this is all
  gene copies and nothing is projected.
"""

from __future__ import annotations

import logging
import math
import os
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._io import file_record, provenance
from ..exceptions import InputError, OptionError
from ..sites.bed import IntervalSet, SiteClasses, read_mask, read_site_classes
from ..variants.batches import VariantBatch
from ..variants.popmap import Popmap, SampleAssignment, assign_samples, read_popmap
from ..variants.source import BATCH_BYTES, VcfSource
from ._types import Block, ClassSpectrum, PopulationSpectra, SpectraSet
from .io import add_diversity
from .plan import (
    RegionSites,
    SitePlan,
    aggregate,
    chrom_mismatch_hint,
    make_plan,
    parse_regions,
    read_blocks,
)

__all__ = [
    "DEFAULT_KEEP_FRACTION",
    "REASONS",
    "CountDesign",
    "RegionCounts",
    "build_spectra",
    "choose_sample_size",
    "count_region",
    "count_stream",
    "make_design",
    "projection_matrix",
    "spectra_from_counts",
]

log = logging.getLogger("driftband")

DEFAULT_KEEP_FRACTION = 0.9
REASONS = ("no_site_class", "indel_or_symbolic", "multiallelic", "filter", "unpolarisable",
           "duplicate_position")
_REMOVING = {2: "multiallelic", 3: "filter", 4: "unpolarisable", 5: "duplicate_position"}
_PLACEHOLDERS = {b"<*>", b"<NON_REF>", b"<X>"}
_BASES = {b"A", b"C", b"G", b"T"}
_SNP, _MONO, _MULTI, _OTHER = 0, 1, 2, 3
_IS_BASE = np.zeros(256, bool)
_IS_BASE[[65, 67, 71, 84]] = True


# ---------------------------------------------------------------------------- design

@dataclass(frozen=True)
class CountDesign:
    """Who is counted and how: everything a region task needs besides its sites.

    Attributes
    ----------
    populations : tuple of str
        Focal populations.
    columns : tuple of ndarray of int64
        VCF sample columns of each focal population.
    classes : tuple of str
        Site class names (index order of the class arrays).
    ancestral : {"aa", "fold", "outgroup"}
        How alleles are polarised.
    outgroup : str or None
    outgroup_columns : ndarray of int64 or None
    min_dp, min_gq : int or None
        Genotype filters.
    pass_only : bool
        Keep only records whose FILTER is PASS or ``.``.
    batch_bytes : int
        Text read per batch.
    """

    populations: tuple[str, ...]
    columns: tuple[np.ndarray, ...]
    classes: tuple[str, ...]
    ancestral: str = "aa"
    outgroup: str | None = None
    outgroup_columns: np.ndarray | None = None
    min_dp: int | None = None
    min_gq: int | None = None
    pass_only: bool = False
    batch_bytes: int = BATCH_BYTES

    @property
    def polarisation(self) -> str:
        """Label stored in the spectra file: ``aa``, ``fold`` or ``outgroup:POP``."""
        return f"outgroup:{self.outgroup}" if self.ancestral == "outgroup" else self.ancestral

    def used_columns(self) -> tuple[np.ndarray, list[np.ndarray], np.ndarray | None]:
        """Sorted VCF columns decoded, and each population's (and the outgroup's) indices
        into them."""
        parts = list(self.columns)
        if self.outgroup_columns is not None:
            parts.append(self.outgroup_columns)
        used = np.unique(np.concatenate(parts))
        idx = [np.searchsorted(used, c) for c in self.columns]
        og = None if self.outgroup_columns is None else np.searchsorted(used,
                                                                        self.outgroup_columns)
        return used, idx, og


def make_design(assignment: SampleAssignment, classes: Sequence[str], ancestral: str = "aa",
                min_dp: int | None = None, min_gq: int | None = None,
                pass_only: bool = False) -> CountDesign:
    """A :class:`CountDesign` from matched samples and options (``ancestral`` may be
    ``"aa"``, ``"fold"`` or ``"outgroup:POP"``)."""
    kind = ancestral.split(":", 1)[0]
    if kind not in ("aa", "fold", "outgroup"):
        raise OptionError(f"--ancestral {ancestral!r}: expected aa, fold or outgroup:POP")
    if kind == "outgroup" and assignment.outgroup is None:
        raise OptionError("--ancestral outgroup:POP needs the outgroup population's name")
    for name, v in (("--min-dp", min_dp), ("--min-gq", min_gq)):
        if v is not None and v < 0:
            raise OptionError(f"{name} must be >= 0, got {v}")
    return CountDesign(assignment.populations, assignment.columns, tuple(classes), kind,
                       assignment.outgroup, assignment.outgroup_columns, min_dp, min_gq,
                       pass_only)


# ---------------------------------------------------------------------------- counts

def _merge_rows(parts: Sequence[np.ndarray], q: int) -> np.ndarray:
    parts = [p for p in parts if p.size]
    if not parts:
        return np.zeros((0, q + 1), np.int64)
    allr = np.concatenate(parts)
    return aggregate(allr[:, :q], allr[:, q])


@dataclass
class RegionCounts:
    """Counts of one or more regions; add them up with ``+`` (or ``sum``).

    Attributes
    ----------
    rows : dict of str to ndarray of int64, shape (k, 5)
        Per population: ``class, block, m, d, sites`` -- ``sites`` usable sites of the class
        in the block with ``m`` called gene copies of which ``d`` are derived (ALT copies
        when folding). Sorted, unique keys.
    callable : ndarray of int64, shape (k, 3)
        ``class, block, sites``: callable class sites (BED ∩ mask ∩ regions).
    removed : ndarray of int64, shape (k, 3)
        ``class, block, sites``: callable sites removed by a skipped record.
    skipped : dict of str to int
        Records skipped, by reason (see the module docstring).
    records : int
        Records read.
    chroms : set of str
        Chromosomes of the records read.
    """

    rows: dict[str, np.ndarray] = field(default_factory=dict)
    callable: np.ndarray = field(default_factory=lambda: np.zeros((0, 3), np.int64))
    removed: np.ndarray = field(default_factory=lambda: np.zeros((0, 3), np.int64))
    skipped: dict[str, int] = field(default_factory=dict)
    records: int = 0
    chroms: set[str] = field(default_factory=set)

    def __add__(self, other: RegionCounts) -> RegionCounts:
        if not isinstance(other, RegionCounts):
            return NotImplemented
        pops = list(dict.fromkeys([*self.rows, *other.rows]))
        rows = {p: _merge_rows([self.rows.get(p, np.zeros((0, 5), np.int64)),
                                other.rows.get(p, np.zeros((0, 5), np.int64))], 4)
                for p in pops}
        sk = dict(self.skipped)
        for k, v in other.skipped.items():
            sk[k] = sk.get(k, 0) + v
        return RegionCounts(rows, _merge_rows([self.callable, other.callable], 2),
                            _merge_rows([self.removed, other.removed], 2), sk,
                            self.records + other.records, self.chroms | other.chroms)

    def __radd__(self, other):
        if other == 0:  # sum() starts from 0
            return self
        return NotImplemented

    @classmethod
    def total(cls, parts: Sequence[RegionCounts]) -> RegionCounts:
        """Sum of many counts at once (one sort instead of one per addition)."""
        parts = list(parts)
        pops = list(dict.fromkeys(p for r in parts for p in r.rows))
        sk: dict[str, int] = {}
        for r in parts:
            for k, v in r.skipped.items():
                sk[k] = sk.get(k, 0) + v
        return cls({p: _merge_rows([r.rows[p] for r in parts if p in r.rows], 4) for p in pops},
                   _merge_rows([r.callable for r in parts], 2),
                   _merge_rows([r.removed for r in parts], 2), sk,
                   sum(r.records for r in parts), set().union(*(r.chroms for r in parts)))


def _classify(ref: bytes, alt: bytes) -> tuple[int, int, int]:
    """Kind of a record from REF and ALT: (kind, ALT allele index, number of ALT alleles)."""
    r = ref.upper()
    alts = [] if alt == b"." else alt.split(b",")
    if len(r) != 1 or r not in _BASES:
        return _OTHER, 0, len(alts)
    real = [i for i, a in enumerate(alts, start=1) if a not in _PLACEHOLDERS]
    if not real:
        return _MONO, 0, len(alts)
    if len(real) > 1:
        return _MULTI, 0, len(alts)
    i = real[0]
    a = alts[i - 1].upper()
    if len(a) != 1 or a not in _BASES or a == r:
        return _OTHER, 0, len(alts)
    if any(j < i for j in range(1, len(alts) + 1) if j not in real):
        return _OTHER, 0, len(alts)  # a placeholder before the real ALT: unusual, skip
    return _SNP, i, len(alts)


def _aa_code(v: bytes | None, ref: bytes, alt: bytes, kind: tuple[int, int, int]) -> int:
    """Ancestral state from INFO/AA: 0 REF, 1 ALT, 2 another base (a monomorphic record
    fixed for the derived allele), -1 unpolarisable."""
    v = v.split(b"|", 1)[0].strip().upper() if v else b""
    r = ref.upper()
    if kind[0] == _SNP:
        a = alt.split(b",")[kind[1] - 1].upper()
        return 0 if v == r else 1 if v == a else -1
    return 2 if (v in _BASES and v != r) else 0


class _RegionCounter:
    """Accumulates the records of one region; :meth:`result` gives its RegionCounts."""

    def __init__(self, design: CountDesign, sites: RegionSites) -> None:
        self.d = design
        self.sites = sites
        self.used, self.pidx, self.oidx = design.used_columns()
        self.npop = len(design.populations)
        groups = list(self.pidx) + ([self.oidx] if self.oidx is not None else [])
        self.W = np.zeros((self.used.size, len(groups)), np.float32)
        for k, ix in enumerate(groups):
            self.W[ix, k] = 1.0
        runs = [(int(ix[0]), int(ix[-1]) + 1) for ix in groups
                if ix.size and ix[-1] - ix[0] == ix.size - 1]
        self.slices = runs if len(runs) == len(groups) else None
        self.fields = tuple(f for f, v in (("DP", design.min_dp), ("GQ", design.min_gq))
                            if v is not None)
        self.kinds: dict[tuple[bytes, bytes], tuple[int, int, int]] = {}
        self.aa_cache: dict[tuple, int] = {}
        self.skip = dict.fromkeys(("no_site_class", "indel_or_symbolic"), 0)
        self.u_pos, self.u_cls, self.u_blk, self.u_m, self.u_d = [], [], [], [], []
        self.r_pos, self.r_cls, self.r_blk, self.r_why = [], [], [], []
        self.records = 0
        self.chroms: set[str] = set()

    def add(self, b: VariantBatch) -> None:
        """Count a batch (all its records belong to this region)."""
        if not len(b):
            return
        self.records += len(b)
        self.chroms.add(b.chrom)
        pos0 = b.pos - 1
        inside, cls, blk = self.sites.lookup(pos0)
        rows = np.flatnonzero(inside)
        self.skip["no_site_class"] += int(pos0.size - rows.size)
        if not rows.size:
            return
        codes = b.codes()
        r1, a1 = codes["ref1"][rows], codes["alt1"][rows]
        base_r = _IS_BASE[r1]
        simple_snp = base_r & _IS_BASE[a1] & (r1 != a1)
        simple_mono = base_r & (a1 == 46)
        kind = np.where(simple_snp, _SNP, np.where(simple_mono, _MONO, -1)).astype(np.int64)
        alt_idx = simple_snp.astype(np.int64)
        n_alts = alt_idx.copy()
        hard = np.flatnonzero(kind < 0)
        if hard.size:   # everything but plain SNPs and monomorphic records: per record
            kinds = self.kinds
            ref, alt = b.ref, b.alt
            for j in hard.tolist():
                i = int(rows[j])
                x = kinds.get((ref[i], alt[i])) or kinds.setdefault(
                    (ref[i], alt[i]), _classify(ref[i], alt[i]))
                kind[j], alt_idx[j], n_alts[j] = x
        status = np.zeros(rows.size, np.int64)   # 0 usable, 1 indel, 2.. removing reasons
        status[kind == _OTHER] = 1
        status[kind == _MULTI] = 2
        if self.d.pass_only:
            bad = codes["pass"][rows] == 0
            status[(status == 0) & bad] = 3
        anc = np.zeros(rows.size, np.int64)       # 0 REF, 1 ALT, 2 other (fixed derived)
        if self.d.ancestral == "aa":
            aa1 = codes["aa1"][rows]
            easy = (status == 0) & (aa1 != 0) & (simple_snp | simple_mono)
            snp_e = easy & simple_snp
            anc[snp_e & (aa1 == a1)] = 1
            status[snp_e & (aa1 != r1) & (aa1 != a1)] = 4
            mono_e = easy & simple_mono
            anc[mono_e & _IS_BASE[aa1] & (aa1 != r1)] = 2
            cand = np.flatnonzero((status == 0) & ~easy)
            if cand.size:
                aa = b.info(rows[cand].tolist(), "AA")
                cache = self.aa_cache
                ref, alt = b.ref, b.alt
                for j, v in zip(cand.tolist(), aa):
                    i = int(rows[j])
                    key = (v, ref[i], alt[i])
                    code = cache.get(key)
                    if code is None:
                        code = cache.setdefault(key, _aa_code(
                            v, ref[i], alt[i], (int(kind[j]), int(alt_idx[j]), 0)))
                    if code < 0:
                        status[j] = 4
                    else:
                        anc[j] = code
        info = (alt_idx, n_alts)
        self.skip["indel_or_symbolic"] += int((status == 1).sum())
        good = np.flatnonzero(status == 0)
        if good.size:
            self._genotypes(b, rows, good, kind, info, anc, status)
        rem = np.flatnonzero(status >= 2)
        if rem.size:
            self.r_pos.append(pos0[rows[rem]])
            self.r_cls.append(cls[rows[rem]])
            self.r_blk.append(blk[rows[rem]])
            self.r_why.append(status[rem])
        ok = np.flatnonzero(status == 0)
        if ok.size:
            self.u_pos.append(pos0[rows[ok]])
            self.u_cls.append(cls[rows[ok]])
            self.u_blk.append(blk[rows[ok]])
            self.u_m.append(self._m[np.searchsorted(good, ok)])
            self.u_d.append(self._dd[np.searchsorted(good, ok)])

    def _genotypes(self, b, rows, good, kind, info, anc, status) -> None:
        snp = kind[good] == _SNP
        fast = None
        if not self.fields and hasattr(b, "allele_counts"):
            fast = b.allele_counts(rows[good], self.used)
        if fast is not None:
            altc, called, ok = fast
            if not snp.all():   # allele 1 in a monomorphic record: placeholder or error
                ok = ok & (snp | (altc.max(axis=1) == 0))
            if not ok.all():
                slow = np.flatnonzero(~ok)
                a2, c2 = self._counts(b, rows, good[slow], kind, info, snp[slow])
                altc, called = altc.copy(), called.copy()
                altc[slow], called[slow] = a2, c2
        else:
            altc, called = self._counts(b, rows, good, kind, info, snp)
        self._finish(altc, called, snp, anc[good], good, status)

    def _counts(self, b, rows, good, kind, info, snp):
        """Per-sample ALT and called copies through the generic genotype decoder."""
        g = b.genotypes(rows[good], self.used, self.fields)
        a = g.alleles
        n_alts = info[1][good].astype(np.int16)
        amax = int(a.max()) if a.size else 0
        if amax > int(n_alts.min()):
            over = np.any(a.astype(np.int16) > n_alts[:, None, None], axis=(1, 2))
            if over.any():
                name, ln = b.where(int(rows[good[int(np.flatnonzero(over)[0])]]))
                raise InputError(f"{name}: a GT allele index exceeds the number of ALT "
                                 "alleles", b.path, ln)
        if amax <= 0:
            is_alt = np.zeros(a.shape, bool)
        elif snp.all():
            is_alt = a == 1
        else:
            is_alt = (a == 1) & snp[:, None, None]
        is_ref = a == 0
        if a.shape[2] == 2:
            altc = is_alt[..., 0].view(np.int8) + is_alt[..., 1].view(np.int8)
            called = altc + is_ref[..., 0].view(np.int8) + is_ref[..., 1].view(np.int8)
        else:
            altc = is_alt.sum(axis=2, dtype=np.int8)
            called = altc + is_ref.sum(axis=2, dtype=np.int8)
        keep = None
        for f, thr in (("DP", self.d.min_dp), ("GQ", self.d.min_gq)):
            if thr is not None:
                ok = g.fields[f] >= thr        # missing (-1) fails too
                keep = ok if keep is None else keep & ok
        if keep is not None:
            k8 = keep.view(np.int8)
            called = called * k8
            altc = altc * k8
        return altc, called

    def _finish(self, altc, called, snp, ga, good, status) -> None:
        """Per-population called (m) and derived (d) copies of the usable records."""
        r = called.shape[0]
        if self.slices is not None:     # populations are runs of columns: slice sums
            both = np.empty((2 * r, len(self.slices)), np.int64)
            for k, (a, z) in enumerate(self.slices):
                both[:r, k] = called[:, a:z].sum(axis=1, dtype=np.int64)
                both[r:, k] = altc[:, a:z].sum(axis=1, dtype=np.int64)
        else:  # one small matrix product (exact: integers < 2**24)
            both = np.rint(np.concatenate([called, altc]).astype(np.float32) @ self.W
                           ).astype(np.int64)
        m, x = both[:r, :self.npop], both[r:, :self.npop]
        if self.d.ancestral == "outgroup":
            mo, xo = both[:r, self.npop], both[r:, self.npop]
            ga = np.where(snp, np.where(xo == 0, 0, 1), 0)
            unpol = snp & ((mo == 0) | ((xo > 0) & (xo < mo)))
            status[good[unpol]] = 4
        dd = np.where(ga[:, None] == 0, x, np.where(ga[:, None] == 1, m - x, m))
        self._m, self._dd = m, dd

    def result(self) -> RegionCounts:
        """The counts of the region (duplicate positions resolved)."""
        npop = len(self.d.populations)
        def cat(xs):
            return np.concatenate(xs).astype(np.int64) if xs else np.zeros(0, np.int64)

        u_pos, u_cls, u_blk = cat(self.u_pos), cat(self.u_cls), cat(self.u_blk)
        u_m = np.concatenate(self.u_m) if self.u_m else np.zeros((0, npop), np.int64)
        u_d = np.concatenate(self.u_d) if self.u_d else np.zeros((0, npop), np.int64)
        r_pos, r_cls, r_blk, r_why = (cat(self.r_pos), cat(self.r_cls), cat(self.r_blk),
                                      cat(self.r_why))
        allpos = np.concatenate([u_pos, r_pos])
        if allpos.size:
            _, inv, cnt = np.unique(allpos, return_inverse=True, return_counts=True)
            dup = cnt[inv] > 1
        else:
            dup = np.zeros(0, bool)
        du, dr = dup[:u_pos.size], dup[u_pos.size:]
        r_why = np.where(dr, 5, r_why)
        if du.any():
            r_pos = np.concatenate([r_pos, u_pos[du]])
            r_cls = np.concatenate([r_cls, u_cls[du]])
            r_blk = np.concatenate([r_blk, u_blk[du]])
            r_why = np.concatenate([r_why, np.full(int(du.sum()), 5)])
            keep = ~du
            u_cls, u_blk, u_m, u_d = u_cls[keep], u_blk[keep], u_m[keep], u_d[keep]
        skipped = dict(self.skip)
        for code, name in _REMOVING.items():
            skipped[name] = int((r_why == code).sum())
        # each removed position counts once, whatever the number of its records
        if r_pos.size:
            _, first = np.unique(r_pos, return_index=True)
            removed = aggregate(np.stack([r_cls[first], r_blk[first]], axis=1),
                                np.ones(first.size, np.int64))
        else:
            removed = np.zeros((0, 3), np.int64)
        rows = {}
        for k, p in enumerate(self.d.populations):
            rows[p] = aggregate(np.stack([u_cls, u_blk, u_m[:, k], u_d[:, k]], axis=1),
                                np.ones(u_cls.size, np.int64))
        return RegionCounts(rows, self.sites.callable_rows(), removed, skipped,
                            self.records, set(self.chroms))


def count_region(vcf: str | os.PathLike | VcfSource, chrom: str, start: int, end: int,
                 design: CountDesign, sites: RegionSites) -> RegionCounts:
    """Count the records of one region of an indexed VCF/BCF.

    Parameters
    ----------
    vcf : path-like or VcfSource
        A bgzipped, indexed VCF or an indexed BCF (opened and closed here when a path).
    chrom : str
    start, end : int
        The region, 0-based, half-open; records are assigned to it by POS.
    design : CountDesign
    sites : RegionSites
        The callable sites of the region (``plan.region_sites(chrom, start, end)``).

    Returns
    -------
    RegionCounts
        Summable with the counts of the other regions; the regions must not overlap.

    Examples
    --------
    Regions as independent tasks (run them in any order, on any worker)::

        total = sum(count_region(path, c, s, e, design, plan.region_sites(c, s, e))
                    for c, s, e in plan.regions(5_000_000))
        spectra = spectra_from_counts(total, design, plan.blocks)
    """
    own = not isinstance(vcf, VcfSource)
    src = VcfSource(vcf) if own else vcf
    try:
        if not src.indexed:
            raise OptionError(f"{src.path}: counting by region needs an indexed file "
                              "(bgzip + tabix -p vcf, or bcftools index)")
        counter = _RegionCounter(design, sites)
        for b in src.fetch(chrom, start, end, design.batch_bytes):
            counter.add(b)
        return counter.result()
    finally:
        if own:
            src.close()


def count_stream(src: VcfSource, design: CountDesign, plan: SitePlan, region_size: int,
                 progress: Callable[[str, int], None] | None = None) -> RegionCounts:
    """Count a VCF read as one stream (no index), region by region of the same grid.

    Returns the same counts as summing :func:`count_region` over ``plan.regions`` (plus
    the skip counts of records outside them). Raises on unsorted input.
    """
    parts: list[RegionCounts] = []
    key, counter = None, None
    visited = set()
    for b in src.stream(design.batch_bytes):
        w = (b.pos - 1) // region_size
        cuts = np.flatnonzero(np.diff(w)) + 1
        for a, z in zip(np.r_[0, cuts].tolist(), np.r_[cuts, len(b)].tolist()):
            k = (b.chrom, int(w[a]))
            if k != key:
                if counter is not None:
                    parts.append(counter.result())
                key = k
                visited.add(k)
                s = k[1] * region_size
                counter = _RegionCounter(design, plan.region_sites(b.chrom, s, s + region_size))
            counter.add(b.slice(a, z) if (a, z) != (0, len(b)) else b)
        if progress is not None:
            progress(b.chrom, len(b))
    if counter is not None:
        parts.append(counter.result())
    seen = set().union(*(r.chroms for r in parts))
    for c, s, e in plan.regions(region_size):
        if (c, s // region_size) not in visited and (c in seen or c in src.header.contigs):
            parts.append(_RegionCounter(design, plan.region_sites(c, s, e)).result())
    return RegionCounts.total(parts)


# ---------------------------------------------------------------------------- projection

def projection_matrix(m: int, n: int) -> np.ndarray:
    r"""Hypergeometric projection from ``m`` to ``n`` gene copies.

    .. math:: P_{d j} = \binom{d}{j} \binom{m - d}{n - j} \Big/ \binom{m}{n}

    the probability that ``n`` copies drawn without replacement from ``m``, ``d`` of them
    derived, hold ``j`` derived copies.

    Parameters
    ----------
    m, n : int
        ``0 <= n <= m``.

    Returns
    -------
    ndarray of float64, shape (m + 1, n + 1)
        Rows sum to 1.

    Examples
    --------
    >>> projection_matrix(4, 2)[2].round(4).tolist()
    [0.1667, 0.6667, 0.1667]
    """
    if not 0 <= n <= m:
        raise ValueError(f"projection needs 0 <= n <= m, got n={n}, m={m}")
    return _projection_rows(m, n, np.arange(m + 1))


def _log_factorials(m: int) -> np.ndarray:
    """``log(k!)`` for k = 0..m (math.lgamma: no scipy import on the command line's path)."""
    return np.array([math.lgamma(k + 1.0) for k in range(m + 1)])


def _projection_band(m: int, n: int, d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The non-zero band of :func:`projection_matrix` for sites with ``d`` derived copies.

    Entry ``(d, j)`` can be non-zero only for ``d - (m - n) <= j <= d``. Returns ``j``
    and the probabilities, both shape (len(d), m - n + 1); columns with ``j`` outside
    ``0..n`` hold 0.
    """
    q = m - n
    lf = _log_factorials(m)
    d = np.asarray(d, dtype=np.int64)[:, None]
    t = np.arange(q + 1, dtype=np.int64)[None, :]
    j = d - q + t
    ok = (j >= 0) & (j <= n)
    jc = np.clip(j, 0, n)
    logp = (lf[d] + lf[m - d] - lf[jc] - lf[n - jc] - lf[q - t] - lf[t]
            - (lf[m] - lf[n] - lf[q]))
    return j, np.where(ok, np.exp(np.where(ok, logp, 0.0)), 0.0)


def _projection_rows(m: int, n: int, d: np.ndarray) -> np.ndarray:
    """Rows ``d`` of :func:`projection_matrix`, from a table of log-factorials."""
    lf = _log_factorials(m)
    d = np.asarray(d, dtype=np.int64)[:, None]
    j = np.arange(n + 1, dtype=np.int64)[None, :]
    ok = (j <= d) & (n - j <= m - d)
    jj = np.minimum(j, d)
    kk = np.clip(n - j, 0, m - d)
    logp = (lf[d] - lf[jj] - lf[d - jj] + lf[m - d] - lf[kk] - lf[m - d - kk]
            - (lf[m] - lf[n] - lf[m - n]))
    return np.where(ok, np.exp(np.where(ok, logp, 0.0)), 0.0)


def choose_sample_size(m: np.ndarray, weights: np.ndarray,
                       keep: float = DEFAULT_KEEP_FRACTION) -> int:
    """The default projection: the largest ``n`` kept by at least ``keep`` of the sites.

    Parameters
    ----------
    m : ndarray of int, shape (k,)
        Called gene copies.
    weights : ndarray of int, shape (k,)
        Number of sites with each ``m``.
    keep : float
        Fraction of sites that must have ``m >= n``.

    Examples
    --------
    >>> choose_sample_size(np.array([10, 9, 8]), np.array([85, 10, 5]))
    9
    """
    m = np.asarray(m, np.int64)
    w = np.asarray(weights, np.int64)
    if not w.sum():
        raise ValueError("no sites")
    order = np.argsort(-m, kind="stable")
    cum = np.cumsum(w[order])
    need = keep * cum[-1]
    i = int(np.searchsorted(cum, need - 1e-9 * cum[-1]))
    return int(m[order][min(i, m.size - 1)])


def _fold(sfs: np.ndarray, n: int) -> np.ndarray:
    """Fold spectra (rows) of ``n`` copies: entry j + entry n - j, middle entry once."""
    h = n // 2
    out = sfs[:, :h + 1] + sfs[:, ::-1][:, :h + 1]
    if n % 2 == 0:
        out[:, h] = sfs[:, h]
    return out


def spectra_from_counts(counts: RegionCounts, design: CountDesign, blocks: Sequence[Block],
                        project: int | Mapping[str, int] | None = None,
                        keep: float = DEFAULT_KEEP_FRACTION) -> SpectraSet:
    """Assemble spectra from summed counts: choose ``n``, project, fill entry 0, fold.

    Parameters
    ----------
    counts : RegionCounts
        Sum over all regions.
    design : CountDesign
    blocks : sequence of Block
        The plan's blocks (the block indices of ``counts``).
    project : int or mapping of str to int, optional
        Sample size for all populations, or per population; others get the default rule.
    keep : float
        Fraction of sites the default rule keeps.

    Returns
    -------
    SpectraSet
        Spectra are int64 when nothing was projected, float64 (expected counts) otherwise;
        ``provenance`` is left empty.

    Raises
    ------
    OptionError
        A sample size that is impossible for a population.
    InputError
        A class left without callable sites in a population.
    """
    C, B = len(design.classes), len(blocks)
    L = np.zeros(C * B, np.int64)
    R = np.zeros(C * B, np.int64)
    if counts.callable.size:
        np.add.at(L, counts.callable[:, 0] * B + counts.callable[:, 1], counts.callable[:, 2])
    if counts.removed.size:
        np.add.at(R, counts.removed[:, 0] * B + counts.removed[:, 1], counts.removed[:, 2])
    per = {} if project is None or isinstance(project, int) else dict(project)
    default = project if isinstance(project, int) else per.pop("*", None)
    for p in per:
        if p not in design.populations:
            raise OptionError(f"--project {p}={per[p]}: {p!r} is not a focal population "
                              f"({', '.join(design.populations)})")
    skipped = dict(counts.skipped)
    pops: dict[str, PopulationSpectra] = {}
    folded = design.ancestral == "fold"
    for p in design.populations:
        rows = counts.rows.get(p, np.zeros((0, 5), np.int64))
        tgt, m, d, w = rows[:, 0] * B + rows[:, 1], rows[:, 2], rows[:, 3], rows[:, 4]
        n = per.get(p, default)
        mmax = int(m.max()) if m.size else 0
        if n is None:
            if not w.sum():
                raise InputError(f"population {p!r}: no usable record at callable class "
                                 "sites; give the sample size with --project",
                                 None)
            n = choose_sample_size(m, w, keep)
            if n < 2:
                raise InputError(f"population {p!r}: too much missing data (the default "
                                 f"rule gives n={n} gene copies); lower it with --project "
                                 "or filter samples", None)
        else:
            if n < 2:
                raise OptionError(f"--project {p}={n}: a spectrum needs n >= 2 gene copies")
            if m.size and n > mmax:
                raise OptionError(f"--project {p}={n}: at most {mmax} gene copies are called "
                                  f"at any site of population {p!r}")
        kept = m >= n
        dropped = np.bincount(tgt[~kept], weights=w[~kept], minlength=C * B).astype(np.int64)
        counted = np.bincount(tgt[kept], weights=w[kept], minlength=C * B).astype(np.int64)
        sites = L - R - dropped
        skipped[f"missing_data:{p}"] = int(dropped.sum())
        exact = kept & (m == n)
        S = np.bincount(tgt[exact] * (n + 1) + d[exact], weights=w[exact],
                        minlength=C * B * (n + 1)).astype(np.int64).reshape(C * B, n + 1)
        proj = kept & (m > n)
        if proj.any():
            Sf = S.astype(np.float64)
            flat = Sf.reshape(-1)
            for mm in np.unique(m[proj]).tolist():
                sel = proj & (m == mm)
                j, prob = _projection_band(mm, n, d[sel])
                idx = tgt[sel, None] * (n + 1) + j
                ok = (j >= 0) & (j <= n)
                flat += np.bincount(idx[ok], weights=(prob * w[sel, None])[ok],
                                    minlength=flat.size)
            S = Sf
        S[:, 0] += sites - counted
        if np.any(S[:, 0] < -1e-6):
            raise RuntimeError("negative entry 0: callable-site accounting is inconsistent")
        if S.dtype.kind == "f":
            S[:, 0] = np.maximum(S[:, 0], 0.0)  # round-off of the projection
        if folded:
            S = _fold(S, n)
        classes = {}
        for ci, c in enumerate(design.classes):
            cs = ClassSpectrum(S[ci * B:(ci + 1) * B], sites[ci * B:(ci + 1) * B])
            if cs.sites <= 0:
                raise InputError(f"class {c!r} has no callable sites left in population "
                                 f"{p!r} after filtering (mask, FILTER, missing data with "
                                 f"n={n}); check the inputs or lower --project", None)
            classes[c] = cs
        ps = PopulationSpectra(p, int(n), folded, classes, design.polarisation)
        add_diversity(ps)
        pops[p] = ps
    return SpectraSet(pops, list(blocks), skipped, {})


# ---------------------------------------------------------------------------- driver

def _as_popmap(x) -> Popmap:
    return x if isinstance(x, Popmap) else read_popmap(x)


def _as_classes(x) -> SiteClasses:
    return x if isinstance(x, SiteClasses) else read_site_classes(x)


def build_spectra(vcf: str | os.PathLike, popmap: Popmap | str | os.PathLike,
                  sites: SiteClasses | str | os.PathLike, *,
                  callable_mask: IntervalSet | str | os.PathLike | None = None,
                  ancestral: str = "aa", project: int | Mapping[str, int] | None = None,
                  block_size: int = 100_000, blocks: str | os.PathLike | None = None,
                  regions: Sequence[str] | None = None, min_gq: int | None = None,
                  min_dp: int | None = None, pass_only: bool = False,
                  region_size: int = 5_000_000, keep: float = DEFAULT_KEEP_FRACTION,
                  progress: Callable[[int, int, int], None] | None = None,
                  checksums: bool = True, workers: int | None = 1,
                  scheduler: Any = None) -> SpectraSet:
    """Per-population, per-class, per-block site frequency spectra from a VCF/BCF.

    Parameters
    ----------
    vcf : path-like
        VCF (bgzipped + indexed, bgzipped, gzipped or plain), BCF, or ``-`` for stdin.
    popmap : Popmap or path-like
        ``sample<TAB>population``.
    sites : SiteClasses or path-like
        BED4 of site classes (e.g. ``0fold``, ``4fold``).
    callable_mask : IntervalSet or path-like, optional
        BED of callable sites; classes are intersected with it.
    ancestral : str
        ``"aa"`` (INFO/AA), ``"fold"`` or ``"outgroup:POP"``.
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

    Returns
    -------
    SpectraSet
    """
    from .._parallel import connect, resolve_workers, scheduler_address
    from .parallel import check_region_size

    check_region_size(region_size)
    resolve_workers(workers)
    client = connect(scheduler) if isinstance(scheduler, str) else scheduler  # fail fast
    src = None
    try:
        src = VcfSource(vcf)
        ss = _build(src, vcf, popmap, sites, callable_mask, ancestral, project, block_size,
                    blocks, regions, min_gq, min_dp, pass_only, region_size, keep, progress,
                    checksums, workers, client)
    finally:
        if src is not None:
            src.close()
        if client is not None and client is not scheduler:
            client.close()
    # how the counting ran (the spectra do not depend on it)
    ss.provenance["execution"] = {
        "region_size": region_size,
        "workers": resolve_workers(workers) if scheduler is None else None,
        "scheduler": scheduler_address(scheduler)}
    return ss


def _build(src, vcf, popmap, sites, callable_mask, ancestral, project, block_size, blocks,
           regions, min_gq, min_dp, pass_only, region_size, keep, progress, checksums,
           workers=1, scheduler=None):
    digest = _Checksum(vcf if checksums else None)   # hashed while counting runs
    pm = _as_popmap(popmap)
    kind, _, og = ancestral.partition(":")
    if kind == "outgroup" and not og:
        raise OptionError("--ancestral outgroup:POP needs the outgroup population's name")
    if kind == "aa" and "AA" not in src.header.info:
        raise InputError("--ancestral aa needs INFO/AA, but the header declares no "
                         "##INFO=<ID=AA> field; use --ancestral fold or outgroup:POP", src.path)
    if "GT" not in src.header.formats:
        raise InputError("the VCF has no GT field (no ##FORMAT=<ID=GT> header line); spectra "
                         "need genotypes", src.path)
    for name, v, key in (("--min-dp", min_dp, "DP"), ("--min-gq", min_gq, "GQ")):
        if v is not None and key not in src.header.formats:
            raise InputError(f"{name} given but the header declares no FORMAT/{key}",
                             src.path)
    assign = assign_samples(pm, src.header.samples, src.path, og or None)
    if assign.ignored:
        shown = ", ".join(assign.ignored[:10]) + (" ..." if len(assign.ignored) > 10 else "")
        log.warning("%d VCF sample(s) not in the popmap are ignored: %s",
                    len(assign.ignored), shown)
    sc = _as_classes(sites)
    mask = None
    if callable_mask is not None:
        mask = callable_mask if isinstance(callable_mask, IntervalSet) else read_mask(
            callable_mask)
    reg = parse_regions(regions) if regions else None
    blk = read_blocks(blocks) if blocks is not None else None
    design = make_design(assign, sorted(sc.classes), ancestral, min_dp, min_gq, pass_only)
    vchroms = src.chroms
    plan = make_plan(sc, vchroms, mask, reg, block_size, blk, src.header.contig_lengths)
    bed_path = sc.path or "site classes"
    if reg is not None:
        unknown = [c for c in reg.chroms if vchroms and c not in vchroms]
        if unknown and (src.indexed or src.header.contigs):
            raise OptionError(f"--regions: chromosome {unknown[0]!r} is not in the VCF "
                              f"({chrom_mismatch_hint(unknown, vchroms)})")
    known_now = src.indexed or bool(src.header.contigs)
    if known_now:
        _check_chroms(plan, sc, vchroms, bed_path, src.path)
    for c, n in plan.sites().items():
        if n == 0:
            raise InputError(f"class {c!r} has no callable sites after intersecting with the "
                             "mask, regions and blocks", bed_path)
    if src.indexed:
        plan = plan.restrict(vchroms)
        from .parallel import count_regions

        total = count_regions(src, design, plan, region_size, workers=workers,
                              scheduler=scheduler, progress=progress)
    else:
        if scheduler is not None or workers != 1:
            (log.warning if scheduler is not None else log.info)(
                "%s is not indexed: counting it as one stream in this process (index it "
                "with tabix -p vcf or bcftools index to count regions in parallel)", src.path)
        state = {"n": 0}

        def tick(_chrom, k):
            state["n"] += k
            if progress is not None:
                progress(0, 0, state["n"])

        total = count_stream(src, design, plan, region_size, tick)
        present = list(dict.fromkeys([*src.header.contigs, *sorted(total.chroms)]))
        if not known_now:
            _check_chroms(plan, sc, present, bed_path, src.path)
        keep_chroms = [c for c in plan.chroms if c in set(present)]
        if len(keep_chroms) < len(plan.chroms):
            old_blocks = plan.blocks
            plan = plan.restrict(keep_chroms)
            total = _renumber(total, old_blocks, plan.blocks)
    if total.records == 0:
        raise InputError("the VCF holds no records in the regions with class sites",
                         src.path)
    ss = spectra_from_counts(total, design, plan.blocks, project, keep)
    opts = {"ancestral": ancestral, "project": project if not isinstance(project, Mapping)
            else dict(project), "block_size": None if blocks else block_size,
            "blocks": None if blocks is None else os.fspath(blocks),
            "regions": list(regions) if regions else None, "min_gq": min_gq,
            "min_dp": min_dp, "pass_only": pass_only, "keep_fraction": keep,
            "projection_rule": (f"largest n such that >= {keep:.0%} of usable records have "
                                "n or more called gene copies")}
    rec = file_record if checksums else (lambda p: None if p is None else
                                         {"path": os.path.abspath(os.fspath(p))
                                          if os.fspath(p) != "-" else "-"})
    inputs = {"vcf": digest.result() or rec(vcf), "popmap": rec(pm.path),
              "sites": rec(sc.path),
              "callable": rec(callable_mask) if isinstance(callable_mask, str | os.PathLike)
              else None, "blocks": rec(blocks)}
    prov = provenance(opts, {k: v for k, v in inputs.items() if v is not None})
    prov["counts"] = {"records_read": total.records,
                      "records_used": {p: int(r[:, 4].sum()) for p, r in total.rows.items()},
                      "ignored_samples": list(assign.ignored),
                      "samples": {p: int(c.size) for p, c in zip(design.populations,
                                                                  design.columns)},
                      "outgroup": design.outgroup}
    ss.provenance = prov
    return ss


class _Checksum:
    """SHA-256 of the VCF for the provenance, computed in a helper thread while counting
    runs (it is I/O bound, and file reads and hashlib release the GIL)."""

    def __init__(self, path) -> None:
        import threading

        self.path = None if path is None or os.fspath(path) == "-" else os.fspath(path)
        self.record: dict[str, Any] | None = None
        self.error: BaseException | None = None
        self._t = None
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


def _check_chroms(plan: SitePlan, sc: SiteClasses, vchroms: Sequence[str], bed_path: str,
                  vcf_path: str) -> None:
    bed_chroms = list(plan.chroms) or sorted(sc.chroms)
    present = [c for c in bed_chroms if c in set(vchroms)]
    if not present:
        ex_b = ", ".join(bed_chroms[:3])
        ex_v = ", ".join(list(vchroms)[:3]) or "none"
        raise InputError(f"none of the BED chromosomes ({ex_b} ...) is in the VCF "
                         f"{vcf_path} (it has {ex_v} ...); "
                         f"{chrom_mismatch_hint(bed_chroms, vchroms)}", bed_path)
    absent = [c for c in bed_chroms if c not in set(vchroms)]
    if absent:
        log.warning("%d BED chromosome(s) are not in the VCF and are left out: %s%s",
                    len(absent), ", ".join(absent[:5]), " ..." if len(absent) > 5 else "")


def _renumber(total: RegionCounts, old: Sequence[Block], new: Sequence[Block]) -> RegionCounts:
    pos = {(b.chrom, b.start, b.end, b.name): i for i, b in enumerate(new)}
    remap = np.array([pos.get((b.chrom, b.start, b.end, b.name), -1) for b in old], np.int64)

    def fix(a, col=1):
        if not a.size:
            return a
        a = a.copy()
        a[:, col] = remap[a[:, col]]
        return a[a[:, col] >= 0]

    return RegionCounts({p: fix(r) for p, r in total.rows.items()}, fix(total.callable),
                        fix(total.removed), total.skipped, total.records, total.chroms)


def summary_lines(ss: SpectraSet) -> list[str]:
    """Human-readable summary: skip counts and per-population diversity (for stderr)."""
    out = []
    sk = ss.skipped
    if sk:
        out.append("skipped records: " + ", ".join(f"{k} {v:,}" for k, v in sk.items()))
    hdr = f"{'population':<14} {'class':<8} {'n':>5} {'sites':>12} {'segregating':>11} " \
          f"{'pi':>10} {'theta_W':>10} {'Tajima_D':>9}"
    out.append(hdr)
    for name, pop in ss.populations.items():
        for c, cs in pop.classes.items():
            st = pop.stats.get(c, {})
            out.append(f"{name:<14} {c:<8} {pop.n:>5} {cs.sites:>12,} "
                       f"{_fmt(st.get('segregating'), 0):>11} {_fmt(st.get('pi')):>10} "
                       f"{_fmt(st.get('theta_w')):>10} {_fmt(st.get('tajimas_d'), 3):>9}")
        r = pop.stats.get("piN_piS")
        out.append(f"{name:<14} piN/piS = {_fmt(r, 4)}"
                   + ("" if r is not None else " (needs classes 0fold and 4fold)"))
    return out


def _fmt(v: Any, digits: int | None = None) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "NA"
    if digits == 0:
        return f"{float(v):,.0f}"
    if digits is not None:
        return f"{float(v):.{digits}f}"
    return f"{float(v):.3e}"
