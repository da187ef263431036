"""Counting one region of a VCF: per population, class and block, called and derived copies.

:func:`count_region` counts one region ``(chrom, start, end)`` of an indexed VCF into a
:class:`RegionCounts`: for each population, class and block, how many sites have ``m``
called gene copies of which ``d`` are derived (ALT copies when folding), plus the callable
and removed site counts and the skipped records by reason. It is pure (opens the file
itself, keeps no state) and its results add up with ``+`` in any order, so region tasks
can run in parallel (:mod:`driftband.spectra.parallel`); memory is bounded by one region.
:func:`count_stream` gives the same counts for a file read as one stream (no index).
Who is counted and how is a :class:`CountDesign` (:func:`make_design`).

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
  count (they are not known to be monomorphic). With an ancestral sequence
  (:mod:`driftband.spectra.ancestral`), records at class sites dropped for want of an
  ancestral base are skipped with that reason (``no_ancestral_base``,
  ``low_confidence_ancestral``) instead of ``no_site_class``. ``missing_data:POP``
  (counted later, by :func:`driftband.spectra.projection.spectra_from_counts`): sites
  with fewer than ``n`` called copies in population POP, dropped from its spectrum and
  its callable count.
* Monomorphic records (ALT ``.``) count at entry 0, or at entry ``n`` when INFO/AA (or the
  ancestral sequence) is a base other than REF; :attr:`RegionCounts.monomorphic` counts
  them (no such record at all: the VCF looks variants-only); callable sites absent from
  the VCF count at entry 0; no site is counted twice.
* Genotype filters ``min_dp``/``min_gq`` set a genotype to missing when its DP/GQ is below
  the threshold or missing.

Longer than the ~600-line guide (about 650 lines after formatting): the counting of one
region is one hot loop with its design object and skip rules; split further, its
vectorised steps would be harder to follow and to time.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np

from ..exceptions import InputError, OptionError
from ..variants.batches import VariantBatch
from ..variants.samples import SampleAssignment
from ..variants.source import BATCH_BYTES, VariantSource, VcfSource, open_variants
from ..variants.vcz import VczSource
from .ancestral import DROP_REASONS as _DROP_REASONS
from .plan import RegionSites, SitePlan, aggregate

__all__ = [
    "REASONS",
    "CountDesign",
    "RegionCounts",
    "count_region",
    "count_stream",
    "make_design",
]

REASONS = (
    "no_site_class",
    "indel_or_symbolic",
    "multiallelic",
    "filter",
    "unpolarisable",
    "duplicate_position",
)
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
    ancestral : {"aa", "fold", "outgroup", "fasta"}
        How alleles are polarised (``fasta``: the plan's ancestral bases).
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
    ancestral_file: str | None = None

    @property
    def polarisation(self) -> str:
        """Label stored in the spectra file: ``aa``, ``fold``, ``outgroup:POP`` or
        ``fasta:NAME`` (the ancestral FASTA's file name)."""
        if self.ancestral == "outgroup":
            return f"outgroup:{self.outgroup}"
        if self.ancestral == "fasta":
            return f"fasta:{os.path.basename(self.ancestral_file or '')}"
        return self.ancestral

    def used_columns(self) -> tuple[np.ndarray, list[np.ndarray], np.ndarray | None]:
        """Sorted VCF columns decoded, and each population's (and the outgroup's) indices
        into them."""
        parts = list(self.columns)
        if self.outgroup_columns is not None:
            parts.append(self.outgroup_columns)
        used = np.unique(np.concatenate(parts))
        idx = [np.searchsorted(used, c) for c in self.columns]
        og = None if self.outgroup_columns is None else np.searchsorted(used, self.outgroup_columns)
        return used, idx, og


def make_design(
    assignment: SampleAssignment,
    classes: Sequence[str],
    ancestral: str = "aa",
    min_dp: int | None = None,
    min_gq: int | None = None,
    pass_only: bool = False,
) -> CountDesign:
    """A :class:`CountDesign` from matched samples and options (``ancestral`` may be
    ``"aa"``, ``"fold"``, ``"outgroup:POP"`` or ``"fasta:FILE"``)."""
    kind, _, arg = ancestral.partition(":")
    if kind not in ("aa", "fold", "outgroup", "fasta"):
        raise OptionError(
            f"--ancestral {ancestral!r}: expected aa, fold, outgroup:POP or fasta:FILE"
        )
    if kind == "outgroup" and assignment.outgroup is None:
        raise OptionError("--ancestral outgroup:POP needs the outgroup population's name")
    if kind == "fasta" and not arg:
        raise OptionError("--ancestral fasta:FILE needs the ancestral FASTA's path")
    for name, v in (("--min-dp", min_dp), ("--min-gq", min_gq)):
        if v is not None and v < 0:
            raise OptionError(f"{name} must be >= 0, got {v}")
    return CountDesign(
        assignment.populations,
        assignment.columns,
        tuple(classes),
        kind,
        assignment.outgroup,
        assignment.outgroup_columns,
        min_dp,
        min_gq,
        pass_only,
        ancestral_file=arg if kind == "fasta" else None,
    )


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
    monomorphic : int
        Monomorphic records (ALT ``.`` or a placeholder only) at callable class sites.
    """

    rows: dict[str, np.ndarray] = field(default_factory=dict)
    callable: np.ndarray = field(default_factory=lambda: np.zeros((0, 3), np.int64))
    removed: np.ndarray = field(default_factory=lambda: np.zeros((0, 3), np.int64))
    skipped: dict[str, int] = field(default_factory=dict)
    records: int = 0
    chroms: set[str] = field(default_factory=set)
    monomorphic: int = 0

    def __add__(self, other: RegionCounts) -> RegionCounts:
        if not isinstance(other, RegionCounts):
            return NotImplemented
        pops = list(dict.fromkeys([*self.rows, *other.rows]))
        rows = {
            p: _merge_rows(
                [
                    self.rows.get(p, np.zeros((0, 5), np.int64)),
                    other.rows.get(p, np.zeros((0, 5), np.int64)),
                ],
                4,
            )
            for p in pops
        }
        sk = dict(self.skipped)
        for k, v in other.skipped.items():
            sk[k] = sk.get(k, 0) + v
        return RegionCounts(
            rows,
            _merge_rows([self.callable, other.callable], 2),
            _merge_rows([self.removed, other.removed], 2),
            sk,
            self.records + other.records,
            self.chroms | other.chroms,
            self.monomorphic + other.monomorphic,
        )

    def __radd__(self, other: object) -> RegionCounts:
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
        return cls(
            {p: _merge_rows([r.rows[p] for r in parts if p in r.rows], 4) for p in pops},
            _merge_rows([r.callable for r in parts], 2),
            _merge_rows([r.removed for r in parts], 2),
            sk,
            sum(r.records for r in parts),
            set().union(*(r.chroms for r in parts)),
            sum(r.monomorphic for r in parts),
        )


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
        runs = [
            (int(ix[0]), int(ix[-1]) + 1)
            for ix in groups
            if ix.size and ix[-1] - ix[0] == ix.size - 1
        ]
        self.slices = runs if len(runs) == len(groups) else None
        self.fields = tuple(
            f for f, v in (("DP", design.min_dp), ("GQ", design.min_gq)) if v is not None
        )
        self.kinds: dict[tuple[bytes, bytes], tuple[int, int, int]] = {}
        self.aa_cache: dict[tuple, int] = {}
        drops = _DROP_REASONS if design.ancestral == "fasta" else ()
        self.skip = dict.fromkeys(("no_site_class", *drops, "indel_or_symbolic"), 0)
        self.monomorphic = 0
        # usable records: position, class, block, called and derived copies per population
        self.u_pos: list[np.ndarray] = []
        self.u_cls: list[np.ndarray] = []
        self.u_blk: list[np.ndarray] = []
        self.u_m: list[np.ndarray] = []
        self.u_d: list[np.ndarray] = []
        # removed records: position, class, block, reason code
        self.r_pos: list[np.ndarray] = []
        self.r_cls: list[np.ndarray] = []
        self.r_blk: list[np.ndarray] = []
        self.r_why: list[np.ndarray] = []
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
        outside = int(pos0.size - rows.size)
        if outside and self.sites.dropped is not None:  # no ancestral base there
            why = self.sites.drop_reasons(pos0[~inside])
            for reason_code, name in enumerate(_DROP_REASONS, start=1):
                k = int((why == reason_code).sum())
                self.skip[name] += k
                outside -= k
        self.skip["no_site_class"] += outside
        if not rows.size:
            return
        codes = b.codes()
        r1, a1 = codes["ref1"][rows], codes["alt1"][rows]
        base_r = _IS_BASE[r1]
        simple_snp = base_r & _IS_BASE[a1] & (r1 != a1)
        simple_mono = base_r & (a1 == 46)
        kind = np.where(simple_snp, _SNP, np.where(simple_mono, _MONO, -1)).astype(np.int64)
        n_mono = int(simple_mono.sum())
        alt_idx = simple_snp.astype(np.int64)
        n_alts = alt_idx.copy()
        hard = np.flatnonzero(kind < 0)
        if hard.size:  # everything but plain SNPs and monomorphic records: per record
            kinds = self.kinds
            ref, alt = b.ref, b.alt
            for j in hard.tolist():
                i = int(rows[j])
                x = kinds.get((ref[i], alt[i])) or kinds.setdefault(
                    (ref[i], alt[i]), _classify(ref[i], alt[i])
                )
                kind[j], alt_idx[j], n_alts[j] = x
                n_mono += x[0] == _MONO
        self.monomorphic += n_mono
        status = np.zeros(rows.size, np.int64)  # 0 usable, 1 indel, 2.. removing reasons
        status[kind == _OTHER] = 1
        status[kind == _MULTI] = 2
        if self.d.pass_only:
            bad = codes["pass"][rows] == 0
            status[(status == 0) & bad] = 3
        anc = np.zeros(rows.size, np.int64)  # 0 REF, 1 ALT, 2 other (fixed derived)
        if self.d.ancestral in ("aa", "fasta"):
            fasta = self.d.ancestral == "fasta"
            aa1 = self.sites.ancestral_codes(pos0[rows]) if fasta else codes["aa1"][rows]
            easy = (status == 0) & (aa1 != 0) & (simple_snp | simple_mono)
            snp_e = easy & simple_snp
            anc[snp_e & (aa1 == a1)] = 1
            status[snp_e & (aa1 != r1) & (aa1 != a1)] = 4
            mono_e = easy & simple_mono
            anc[mono_e & _IS_BASE[aa1] & (aa1 != r1)] = 2
            cand = np.flatnonzero((status == 0) & ~easy)
            if cand.size:
                aa = (
                    [bytes(aa1[cand[k] : cand[k] + 1]) for k in range(cand.size)]
                    if fasta
                    else b.info(rows[cand].tolist(), "AA")
                )
                cache = self.aa_cache
                ref, alt = b.ref, b.alt
                for j, v in zip(cand.tolist(), aa):
                    i = int(rows[j])
                    key = (v, ref[i], alt[i])
                    code = cache.get(key)
                    if code is None:
                        code = cache.setdefault(
                            key, _aa_code(v, ref[i], alt[i], (int(kind[j]), int(alt_idx[j]), 0))
                        )
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

    def _genotypes(
        self,
        b: VariantBatch,
        rows: np.ndarray,
        good: np.ndarray,
        kind: np.ndarray,
        info: tuple[np.ndarray, np.ndarray],
        anc: np.ndarray,
        status: np.ndarray,
    ) -> None:
        snp = kind[good] == _SNP
        fast = None
        if not self.fields and hasattr(b, "allele_counts"):
            fast = b.allele_counts(rows[good], self.used)
        if fast is not None:
            altc, called, ok = fast
            if not snp.all():  # allele 1 in a monomorphic record: placeholder or error
                ok = ok & (snp | (altc.max(axis=1) == 0))
            if not ok.all():
                slow = np.flatnonzero(~ok)
                a2, c2 = self._counts(b, rows, good[slow], kind, info, snp[slow])
                altc, called = altc.copy(), called.copy()
                altc[slow], called[slow] = a2, c2
        else:
            altc, called = self._counts(b, rows, good, kind, info, snp)
        self._finish(altc, called, snp, anc[good], good, status)

    def _counts(
        self,
        b: VariantBatch,
        rows: np.ndarray,
        good: np.ndarray,
        kind: np.ndarray,
        info: tuple[np.ndarray, np.ndarray],
        snp: np.ndarray,
    ) -> tuple[np.ndarray, np.ndarray]:
        """Per-sample ALT and called copies through the generic genotype decoder."""
        g = b.genotypes(rows[good], self.used, self.fields)
        a = g.alleles
        n_alts = info[1][good].astype(np.int16)
        amax = int(a.max()) if a.size else 0
        if amax > int(n_alts.min()):
            over = np.any(a.astype(np.int16) > n_alts[:, None, None], axis=(1, 2))
            if over.any():
                name, ln = b.where(int(rows[good[int(np.flatnonzero(over)[0])]]))
                raise InputError(
                    f"{name}: a GT allele index exceeds the number of ALT alleles", b.path, ln
                )
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
                ok = g.fields[f] >= thr  # missing (-1) fails too
                keep = ok if keep is None else keep & ok
        if keep is not None:
            k8 = keep.view(np.int8)
            called = called * k8
            altc = altc * k8
        return altc, called

    def _finish(
        self,
        altc: np.ndarray,
        called: np.ndarray,
        snp: np.ndarray,
        ga: np.ndarray,
        good: np.ndarray,
        status: np.ndarray,
    ) -> None:
        """Per-population called (m) and derived (d) copies of the usable records."""
        r = called.shape[0]
        if self.slices is not None:  # populations are runs of columns: slice sums
            both = np.empty((2 * r, len(self.slices)), np.int64)
            for k, (a, z) in enumerate(self.slices):
                both[:r, k] = called[:, a:z].sum(axis=1, dtype=np.int64)
                both[r:, k] = altc[:, a:z].sum(axis=1, dtype=np.int64)
        else:  # one small matrix product (exact: integers < 2**24)
            both = np.rint(np.concatenate([called, altc]).astype(np.float32) @ self.W).astype(
                np.int64
            )
        m, x = both[:r, : self.npop], both[r:, : self.npop]
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

        def cat(xs: list[np.ndarray]) -> np.ndarray:
            return np.concatenate(xs).astype(np.int64) if xs else np.zeros(0, np.int64)

        u_pos, u_cls, u_blk = cat(self.u_pos), cat(self.u_cls), cat(self.u_blk)
        u_m = np.concatenate(self.u_m) if self.u_m else np.zeros((0, npop), np.int64)
        u_d = np.concatenate(self.u_d) if self.u_d else np.zeros((0, npop), np.int64)
        r_pos, r_cls, r_blk, r_why = (
            cat(self.r_pos),
            cat(self.r_cls),
            cat(self.r_blk),
            cat(self.r_why),
        )
        allpos = np.concatenate([u_pos, r_pos])
        if allpos.size:
            _, inv, cnt = np.unique(allpos, return_inverse=True, return_counts=True)
            dup = cnt[inv] > 1
        else:
            dup = np.zeros(0, bool)
        du, dr = dup[: u_pos.size], dup[u_pos.size :]
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
            removed = aggregate(
                np.stack([r_cls[first], r_blk[first]], axis=1), np.ones(first.size, np.int64)
            )
        else:
            removed = np.zeros((0, 3), np.int64)
        rows = {}
        for k, p in enumerate(self.d.populations):
            rows[p] = aggregate(
                np.stack([u_cls, u_blk, u_m[:, k], u_d[:, k]], axis=1),
                np.ones(u_cls.size, np.int64),
            )
        return RegionCounts(
            rows,
            self.sites.callable_rows(),
            removed,
            skipped,
            self.records,
            set(self.chroms),
            self.monomorphic,
        )


def count_region(
    vcf: str | os.PathLike | VariantSource,
    chrom: str,
    start: int,
    end: int,
    design: CountDesign,
    sites: RegionSites,
) -> RegionCounts:
    """Count the records of one region of an indexed VCF/BCF or a VCF Zarr store.

    Parameters
    ----------
    vcf : path-like, VcfSource or VczSource
        A bgzipped, indexed VCF, an indexed BCF or a VCF Zarr store (opened and closed
        here when a path).
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
                    for c, s, e in plan.regions(region_size))
        spectra = spectra_from_counts(total, design, plan.blocks)
    """
    src = vcf if isinstance(vcf, VcfSource | VczSource) else open_variants(vcf)
    own = src is not vcf
    try:
        if not src.indexed:
            raise OptionError(
                f"{src.path}: counting by region needs an indexed file "
                "(bgzip + tabix -p vcf, or bcftools index)"
            )
        counter = _RegionCounter(design, sites)
        for b in src.fetch(chrom, start, end, design.batch_bytes):
            counter.add(b)
        return counter.result()
    finally:
        if own:
            src.close()


def count_stream(
    src: VcfSource,
    design: CountDesign,
    plan: SitePlan,
    region_size: int,
    progress: Callable[[str, int], None] | None = None,
) -> RegionCounts:
    """Count a VCF read as one stream (no index), region by region of the same grid.

    Parameters
    ----------
    src : VcfSource
        The open VCF/BCF, read from its first record.
    design : CountDesign
    plan : SitePlan
    region_size : int
        Bases per region (the grid of :meth:`SitePlan.regions`).
    progress : callable, optional
        Called as ``progress(chrom, records)`` after each batch, with its record count.

    Returns
    -------
    RegionCounts
        The same counts as summing :func:`count_region` over ``plan.regions(region_size)``
        (plus the skip counts of records outside them). Raises on unsorted input.
    """
    parts: list[RegionCounts] = []
    key: tuple[str, int] | None = None
    counter: _RegionCounter | None = None
    visited = set()
    for b in src.stream(design.batch_bytes):
        w = (b.pos - 1) // region_size
        cuts = np.flatnonzero(np.diff(w)) + 1
        for a, z in zip(np.r_[0, cuts].tolist(), np.r_[cuts, len(b)].tolist()):
            k = (b.chrom, int(w[a]))
            if counter is None or k != key:
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
