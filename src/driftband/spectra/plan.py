"""Where the callable sites are: site classes ∩ callable mask ∩ regions, cut into blocks.

The plan is made from BED files alone, before any VCF record is read. Callable sites of
each class are held per chromosome as disjoint intervals, each inside one block, labelled
with their class and their (global) block index. :meth:`SitePlan.region_sites` cuts out the
part of one region: a small, picklable :class:`RegionSites` that a region task needs.
No model code and no VCF reading here.
"""

from __future__ import annotations

import os
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from ..exceptions import InputError, OptionError
from ..sites.bed import IntervalSet, SiteClasses, intersect, merge_intervals, read_bed
from ._types import Block

__all__ = [
    "DEFAULT_REGION_SIZE",
    "ChromSites",
    "RegionSites",
    "SitePlan",
    "chrom_mismatch_hint",
    "make_plan",
    "parse_regions",
    "read_blocks",
]

#: Bases per region window of :meth:`SitePlan.regions`: one counting task each
#: (``--region-size``).
DEFAULT_REGION_SIZE = 5_000_000


@dataclass
class RegionSites:
    """Callable sites of one region (0-based, half-open), ready for counting.

    Attributes
    ----------
    chrom : str
    start, end : int
        The region.
    starts, ends : ndarray of int64, shape (k,)
        Disjoint, sorted intervals of callable class sites inside the region; each lies in
        one block.
    cls : ndarray of int64, shape (k,)
        Class index of each interval (into :attr:`SitePlan.classes`).
    block : ndarray of int64, shape (k,)
        Global block index of each interval (into :attr:`SitePlan.blocks`).
    anc : ndarray of uint8, optional
        With an ancestral sequence: the ancestral base (upper-case byte code) of every
        callable site, the intervals' sites one after the other.
    dropped : tuple of three ndarrays of int64, optional
        With an ancestral sequence: ``starts, ends, reason`` of the class sites dropped
        for want of a (confident) ancestral base (reason codes of
        :data:`driftband.spectra.ancestral.DROP_REASONS`, from 1).
    """

    chrom: str
    start: int
    end: int
    starts: np.ndarray
    ends: np.ndarray
    cls: np.ndarray
    block: np.ndarray
    anc: np.ndarray | None = None
    dropped: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None

    def lookup(self, pos0: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Class and block of 0-based positions.

        Returns
        -------
        inside : ndarray of bool
            Position is a callable class site of this region.
        cls, block : ndarray of int64
            Class and block index (meaningful where ``inside``).
        """
        pos0 = np.asarray(pos0, dtype=np.int64)
        k = np.searchsorted(self.starts, pos0, side="right") - 1
        kk = np.maximum(k, 0)
        inside = (
            (k >= 0) & (pos0 < self.ends[kk]) if self.starts.size else np.zeros(pos0.shape, bool)
        )
        if not self.starts.size:
            z = np.zeros(pos0.shape, np.int64)
            return inside, z, z
        return inside, self.cls[kk], self.block[kk]

    def ancestral_codes(self, pos0: np.ndarray) -> np.ndarray:
        """Ancestral base (upper-case byte code) at callable sites ``pos0`` (0-based).

        Only with an ancestral sequence (:attr:`anc`); every position must be inside.
        """
        if self.anc is None:
            raise ValueError("no ancestral sequence in this plan")
        pos0 = np.asarray(pos0, dtype=np.int64)
        k = np.searchsorted(self.starts, pos0, side="right") - 1
        off = np.concatenate([[0], np.cumsum(self.ends - self.starts)])
        return self.anc[off[k] + pos0 - self.starts[k]]

    def drop_reasons(self, pos0: np.ndarray) -> np.ndarray:
        """Reason code (0: none) of positions that are class sites dropped for want of an
        ancestral base (see :attr:`dropped`)."""
        pos0 = np.asarray(pos0, dtype=np.int64)
        if self.dropped is None or not self.dropped[0].size:
            return np.zeros(pos0.shape, np.int64)
        s, e, why = self.dropped
        k = np.searchsorted(s, pos0, side="right") - 1
        kk = np.maximum(k, 0)
        return np.where((k >= 0) & (pos0 < e[kk]), why[kk], 0)

    def callable_rows(self) -> np.ndarray:
        """Callable sites per (class, block): int64 array (k, 3) of class, block, sites."""
        if not self.starts.size:
            return np.zeros((0, 3), np.int64)
        return aggregate(np.stack([self.cls, self.block], axis=1), self.ends - self.starts)


def aggregate(keys: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Sum ``weights`` over equal rows of ``keys``; rows sorted lexicographically.

    Parameters
    ----------
    keys : ndarray of int64, shape (k, q)
    weights : ndarray of int64, shape (k,)

    Returns
    -------
    ndarray of int64, shape (u, q + 1)
        Unique key rows followed by their summed weight; rows with weight 0 are kept.
    """
    keys = np.asarray(keys, dtype=np.int64)
    weights = np.asarray(weights, dtype=np.int64)
    if weights.size == 0:
        q = keys.shape[1] if keys.ndim == 2 else 1
        return np.zeros((0, q + 1), np.int64)
    keys = keys.reshape(weights.size, -1)
    lo, hi = keys.min(axis=0), keys.max(axis=0)
    bits = [int(h).bit_length() for h in hi]
    if lo.min() >= 0 and sum(bits) <= 62:  # pack the key columns into one int64
        packed = np.zeros(weights.size, np.int64)
        for j, b in enumerate(bits):
            packed = (packed << b) | keys[:, j]
        u, first, inv = np.unique(packed, return_index=True, return_inverse=True)
        sums = np.bincount(inv.reshape(-1), weights=weights, minlength=u.size)
        return np.column_stack([keys[first], np.rint(sums).astype(np.int64)])
    order = np.lexsort(keys.T[::-1])
    ks = keys[order]
    ws = weights[order]
    new = np.ones(ks.shape[0], bool)
    new[1:] = np.any(ks[1:] != ks[:-1], axis=1)
    idx = np.flatnonzero(new)
    return np.column_stack([ks[idx], np.add.reduceat(ws, idx)])


@dataclass
class ChromSites:
    """Callable sites of one chromosome: disjoint, sorted intervals, each inside one block,
    with class and block indices (and, with an ancestral sequence, the fields of
    :class:`RegionSites` of the same names)."""

    starts: np.ndarray
    ends: np.ndarray
    cls: np.ndarray
    block: np.ndarray
    anc: np.ndarray | None = None  # see RegionSites.anc
    dropped: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None  # see RegionSites


@dataclass
class SitePlan:
    """Callable class sites of the whole study, cut into blocks.

    Attributes
    ----------
    classes : tuple of str
        Class names (sorted), the class index order of every array.
    blocks : list of Block
        All blocks holding callable sites, in chromosome then position order.
    chroms : dict of str to ChromSites
        Per chromosome: intervals, class and block indices.
    """

    classes: tuple[str, ...]
    blocks: list[Block]
    chroms: dict[str, ChromSites]

    def with_chroms(self, chroms: dict[str, ChromSites]) -> SitePlan:
        """The plan with other sites on its blocks; blocks left without sites are removed
        and the others renumbered (order kept)."""
        parts = [cs.block for cs in chroms.values()]
        used = np.unique(np.concatenate(parts)) if parts else np.zeros(0, np.int64)
        remap = np.full(len(self.blocks), -1, np.int64)
        remap[used] = np.arange(used.size)
        new = {
            c: ChromSites(cs.starts, cs.ends, cs.cls, remap[cs.block], cs.anc, cs.dropped)
            for c, cs in chroms.items()
        }
        return SitePlan(self.classes, [self.blocks[i] for i in used.tolist()], new)

    def sites(self) -> dict[str, int]:
        """Callable sites per class."""
        out = dict.fromkeys(self.classes, 0)
        for cs in self.chroms.values():
            tot = np.bincount(cs.cls, weights=cs.ends - cs.starts, minlength=len(self.classes))
            for i, c in enumerate(self.classes):
                out[c] += int(tot[i])
        return out

    def region_sites(self, chrom: str, start: int, end: int) -> RegionSites:
        """The callable sites of one region (clipped to it)."""
        cs = self.chroms.get(chrom)
        if cs is None:
            z = np.zeros(0, np.int64)
            return RegionSites(chrom, start, end, z, z, z, z)
        a = np.searchsorted(cs.ends, start, side="right")
        b = np.searchsorted(cs.starts, end, side="left")
        s = np.maximum(cs.starts[a:b], start)
        e = np.minimum(cs.ends[a:b], end)
        anc = dropped = None
        if cs.anc is not None:  # the intervals' sites are consecutive in cs.anc
            off = int((cs.ends[:a] - cs.starts[:a]).sum())
            lo = off + int(s[0] - cs.starts[a]) if s.size else off
            anc = cs.anc[lo : lo + int((e - s).sum())].copy()
        if cs.dropped is not None:
            ds, de, dw = cs.dropped
            i = np.searchsorted(de, start, side="right")
            j = np.searchsorted(ds, end, side="left")
            dropped = (np.maximum(ds[i:j], start), np.minimum(de[i:j], end), dw[i:j].copy())
        return RegionSites(
            chrom, start, end, s, e, cs.cls[a:b].copy(), cs.block[a:b].copy(), anc, dropped
        )

    def regions(self, size: int, chroms: Iterable[str] | None = None) -> list[tuple[str, int, int]]:
        """Windows ``[k·size, (k+1)·size)`` that hold callable sites, in plan order."""
        out: list[tuple[str, int, int]] = []
        for c in self.chroms if chroms is None else chroms:
            cs = self.chroms.get(c)
            if cs is None or not cs.starts.size:
                continue
            first = cs.starts // size
            last = (cs.ends - 1) // size
            ks = _window_ids(first, last)
            out.extend((c, int(k) * size, (int(k) + 1) * size) for k in ks)
        return out

    def restrict(self, chroms: Iterable[str]) -> SitePlan:
        """The plan on some chromosomes only, blocks renumbered (order kept)."""
        keep = [c for c in self.chroms if c in set(chroms)]
        old = [b for b in range(len(self.blocks)) if self.blocks[b].chrom in set(keep)]
        remap = np.full(len(self.blocks), -1, np.int64)
        remap[old] = np.arange(len(old))
        chrom_sites = {
            c: ChromSites(cs.starts, cs.ends, cs.cls, remap[cs.block], cs.anc, cs.dropped)
            for c, cs in self.chroms.items()
            if c in set(keep)
        }
        return SitePlan(self.classes, [self.blocks[i] for i in old], chrom_sites)


def _window_ids(first: np.ndarray, last: np.ndarray) -> np.ndarray:
    n = last - first + 1
    base = np.repeat(first, n)
    off = np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n)
    return np.unique(base + off)


def chrom_mismatch_hint(bed_chroms: Iterable[str], vcf_chroms: Iterable[str]) -> str:
    """A suggestion when BED and VCF chromosome names differ (e.g. ``chr1`` vs ``1``)."""
    bed, vcf = set(bed_chroms), set(vcf_chroms)
    strip = {c[3:] for c in bed if c.startswith("chr")}
    add = {"chr" + c for c in bed}
    if strip & vcf:
        return (
            "the BED names chromosomes with a 'chr' prefix and the VCF without it; "
            "remove the prefix from the BED (e.g. sed 's/^chr//')"
        )
    if add & vcf:
        return (
            "the VCF names chromosomes with a 'chr' prefix and the BED without it; "
            "add the prefix to the BED (e.g. sed 's/^/chr/')"
        )
    return "check that the BED and the VCF use the same reference and chromosome names"


def read_blocks(path: str | os.PathLike) -> dict[str, list[Block]]:
    """Read a BED of blocks (e.g. genes); the optional 4th column is the block name.

    Raises
    ------
    InputError
        Malformed lines (from :func:`driftband.sites.bed.read_bed`) or overlapping blocks
        (both named).
    """
    read_bed(path)  # validates every line, with its number
    from .._io import open_text

    out: dict[str, list[tuple[int, int, str, int]]] = {}
    with open_text(path) as fh:
        for ln, line in enumerate(fh, start=1):
            if not line.strip() or line.startswith(("#", "track", "browser")):
                continue
            f = line.rstrip("\r\n").split("\t")
            out.setdefault(f[0], []).append((int(f[1]), int(f[2]), f[3] if len(f) > 3 else "", ln))
    blocks: dict[str, list[Block]] = {}
    for c, rows in out.items():
        rows.sort()
        for (s0, e0, _n0, l0), (s1, e1, _n1, l1) in zip(rows, rows[1:]):
            if s1 < e0:
                raise InputError(
                    f"blocks overlap: {c}:{s0}-{e0} (line {l0}) and "
                    f"{c}:{s1}-{e1} (BED coordinates); blocks must be disjoint",
                    path,
                    l1,
                )
        blocks[c] = [Block(c, s, e, n) for s, e, n, _ in rows if e > s]
    if not blocks:
        raise InputError("the blocks BED holds no intervals", path)
    return blocks


_REGION = re.compile(r"^(?P<chrom>[^:]+)(?::(?P<start>[\d,]+)(?:-(?P<end>[\d,]+))?)?$")


def parse_regions(items: Sequence[str]) -> IntervalSet:
    """Regions from ``CHROM``, ``CHROM:START-END`` (1-based, inclusive) or BED file paths.

    Raises
    ------
    OptionError
        An item that is neither a region nor a readable BED file.
    """
    chroms: dict[str, tuple[list[int], list[int]]] = {}
    big = np.iinfo(np.int64).max // 4
    for it in items:
        if os.path.isfile(it):
            for name_map in read_bed(it).values():
                for c, (bed_s, bed_e) in name_map.items():
                    d = chroms.setdefault(c, ([], []))
                    d[0].extend(bed_s)
                    d[1].extend(bed_e)
            continue
        m = _REGION.match(it)
        if not m:
            raise OptionError(f"--regions {it!r}: expected CHROM, CHROM:START-END or a BED file")
        c = m.group("chrom")
        s = int(m.group("start").replace(",", "")) - 1 if m.group("start") else 0
        e = int(m.group("end").replace(",", "")) if m.group("end") else big
        if s < 0 or e <= s:
            raise OptionError(
                f"--regions {it!r}: START-END must satisfy 1 <= START <= END (1-based, inclusive)"
            )
        d = chroms.setdefault(c, ([], []))
        d[0].append(s)
        d[1].append(e)
    return IntervalSet(
        {c: merge_intervals(np.array(s), np.array(e)) for c, (s, e) in chroms.items()}
    )


def _split_windows(
    s: np.ndarray, e: np.ndarray, size: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cut intervals at multiples of ``size``; returns starts, ends and window numbers."""
    first = s // size
    last = (e - 1) // size
    n = last - first + 1
    w = np.repeat(first, n) + (np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n))
    ss = np.maximum(np.repeat(s, n), w * size)
    ee = np.minimum(np.repeat(e, n), (w + 1) * size)
    return ss, ee, w


def make_plan(
    classes: SiteClasses,
    chrom_order: Sequence[str],
    mask: IntervalSet | None = None,
    regions: IntervalSet | None = None,
    block_size: int = 100_000,
    blocks: dict[str, list[Block]] | None = None,
    contig_lengths: dict[str, int] | None = None,
) -> SitePlan:
    """Intersect classes with the mask and regions and cut them into blocks.

    Parameters
    ----------
    classes : SiteClasses
    chrom_order : sequence of str
        Chromosome order of the output (the VCF's); class chromosomes not in it follow in
        name order.
    mask, regions : IntervalSet, optional
        Callable mask; regions to keep.
    block_size : int
        Length of the default blocks (bp), windows ``[k·size, (k+1)·size)``.
    blocks : dict of str to list of Block, optional
        Explicit blocks (e.g. genes); sites outside every block are not used.
    contig_lengths : dict, optional
        Clip the last default window of a chromosome to its length.

    Returns
    -------
    SitePlan
        Only blocks with at least one callable site are listed.
    """
    if block_size <= 0:
        raise OptionError("--block-size must be a positive number of bases")
    names = tuple(sorted(classes.classes))
    all_chroms = set(classes.chroms)
    order = [c for c in dict.fromkeys(chrom_order) if c in all_chroms]
    order += sorted(all_chroms - set(order))
    plan_chroms: dict[str, ChromSites] = {}
    block_list: list[Block] = []
    lengths = contig_lengths or {}
    for c in order:
        parts = []
        for ci, name in enumerate(names):
            iv = classes.classes[name].chroms.get(c)
            if iv is None:
                continue
            if mask is not None:
                iv = intersect(iv, mask.chroms.get(c, (np.zeros(0, np.int64),) * 2))
            if regions is not None:
                iv = intersect(iv, regions.chroms.get(c, (np.zeros(0, np.int64),) * 2))
            if iv[0].size:
                parts.append((iv[0], iv[1], np.full(iv[0].size, ci, np.int64)))
        if not parts:
            continue
        s = np.concatenate([p[0] for p in parts])
        e = np.concatenate([p[1] for p in parts])
        k = np.concatenate([p[2] for p in parts])
        order_i = np.argsort(s, kind="stable")
        s, e, k = s[order_i], e[order_i], k[order_i]
        if blocks is None:
            ss, ee, w = _split_windows(s, e, block_size)
            kk = np.repeat(k, ((e - 1) // block_size) - (s // block_size) + 1)
            uw, inv = np.unique(w, return_inverse=True)
            base = len(block_list)
            for x in uw.tolist():
                end = (x + 1) * block_size
                if c in lengths:
                    end = min(end, max(lengths[c], x * block_size + 1))
                block_list.append(Block(c, x * block_size, end, ""))
            plan_chroms[c] = ChromSites(ss, ee, kk, base + inv)
        else:
            bl = blocks.get(c, [])
            if not bl:
                continue
            bs = np.array([b.start for b in bl], np.int64)
            be = np.array([b.end for b in bl], np.int64)
            ps, pe, pk, pb = [], [], [], []
            for ci in np.unique(k).tolist():
                sel = k == ci
                xs, xe = intersect((s[sel], e[sel]), (bs, be))
                ps.append(xs)
                pe.append(xe)
                pk.append(np.full(xs.size, ci, np.int64))
                pb.append(np.searchsorted(bs, xs, side="right") - 1)
            xs, xe = np.concatenate(ps), np.concatenate(pe)
            xk, xb = np.concatenate(pk), np.concatenate(pb)
            if not xs.size:
                continue
            o = np.argsort(xs, kind="stable")
            xs, xe, xk, xb = xs[o], xe[o], xk[o], xb[o]
            used, inv = np.unique(xb, return_inverse=True)
            base = len(block_list)
            block_list.extend(bl[i] for i in used.tolist())
            plan_chroms[c] = ChromSites(xs, xe, xk, base + inv)
    return SitePlan(names, block_list, plan_chroms)
