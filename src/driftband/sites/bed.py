"""BED intervals (0-based, half-open): site classes, callable masks and blocks.

Intervals of one chromosome are held as two sorted int64 arrays ``(starts, ends)`` of
disjoint, merged intervals. No model code here.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from typing import IO

import numpy as np

from .._io import atomic_output, open_text
from ..exceptions import InputError

__all__ = [
    "MAX_COORDINATE",
    "IntervalSet",
    "SiteClasses",
    "intersect",
    "merge_intervals",
    "read_bed",
    "read_mask",
    "read_site_classes",
    "write_bed4",
]

Intervals = tuple[np.ndarray, np.ndarray]


def merge_intervals(starts: np.ndarray, ends: np.ndarray) -> Intervals:
    """Sort and merge overlapping or touching half-open intervals.

    Examples
    --------
    >>> s, e = merge_intervals(np.array([5, 0, 2]), np.array([8, 3, 4]))
    >>> s.tolist(), e.tolist()
    ([0, 5], [4, 8])
    """
    starts = np.asarray(starts, dtype=np.int64)
    ends = np.asarray(ends, dtype=np.int64)
    if starts.size == 0:
        return starts.copy(), ends.copy()
    order = np.lexsort((ends, starts))
    s, e = starts[order], ends[order]
    run_end = np.maximum.accumulate(e)
    new = np.ones(s.size, dtype=bool)
    new[1:] = s[1:] > run_end[:-1]
    idx = np.flatnonzero(new)
    out_s = s[idx]
    out_e = np.maximum.reduceat(e, idx)
    return out_s, out_e


def intersect(a: Intervals, b: Intervals) -> Intervals:
    """Intersection of two merged interval lists of one chromosome."""
    (as_, ae), (bs, be) = a, b
    if as_.size == 0 or bs.size == 0:
        return np.empty(0, np.int64), np.empty(0, np.int64)
    # For every a-interval, the b-intervals that can overlap it.
    lo = np.searchsorted(be, as_, side="right")
    hi = np.searchsorted(bs, ae, side="left")
    counts = np.maximum(hi - lo, 0)
    ai = np.repeat(np.arange(as_.size), counts)
    bi = (
        np.concatenate([np.arange(l, h) for l, h in zip(lo, hi) if h > l])
        if counts.sum()
        else np.empty(0, np.int64)
    )
    s = np.maximum(as_[ai], bs[bi])
    e = np.minimum(ae[ai], be[bi])
    keep = e > s
    return s[keep], e[keep]


@dataclass
class IntervalSet:
    """Merged intervals per chromosome."""

    chroms: dict[str, Intervals] = field(default_factory=dict)

    def length(self) -> int:
        """Total bases covered."""
        return int(sum((e - s).sum() for s, e in self.chroms.values()))

    def intersect(self, other: IntervalSet) -> IntervalSet:
        """Bases in both sets."""
        out = {}
        for c, iv in self.chroms.items():
            if c in other.chroms:
                s, e = intersect(iv, other.chroms[c])
                if s.size:
                    out[c] = (s, e)
        return IntervalSet(out)

    def contains(self, chrom: str, pos0: np.ndarray) -> np.ndarray:
        """Boolean mask: which 0-based positions of ``chrom`` lie in the set."""
        pos0 = np.asarray(pos0, dtype=np.int64)
        if chrom not in self.chroms:
            return np.zeros(pos0.shape, dtype=bool)
        s, e = self.chroms[chrom]
        k = np.searchsorted(s, pos0, side="right") - 1
        ok = k >= 0
        out = np.zeros(pos0.shape, dtype=bool)
        out[ok] = pos0[ok] < e[k[ok]]
        return out


@dataclass
class SiteClasses:
    """Site classes (e.g. ``0fold``, ``4fold``) as disjoint interval sets."""

    classes: dict[str, IntervalSet]
    path: str | None = None

    @property
    def chroms(self) -> set[str]:
        """Chromosomes named by any class."""
        return {c for s in self.classes.values() for c in s.chroms}


#: The largest coordinate accepted (2**62: far beyond any genome, safe in int64 sums).
MAX_COORDINATE = 1 << 62


def _numbered_lines(fh: IO[str], path: str | os.PathLike) -> Iterator[tuple[int, str]]:
    """``(line number, line)`` of a text file; bytes that are not UTF-8 are named."""
    ln = 0
    try:
        for ln, line in enumerate(fh, start=1):
            yield ln, line
    except UnicodeDecodeError:
        raise InputError("not a text BED file (bytes that are not UTF-8)", path, ln + 1) from None


def read_bed(
    path: str | os.PathLike,
    need_name: bool = False,
) -> dict[str, dict[str, tuple[list[int], list[int]]]]:
    """Read a BED file (plain or gzip) into ``name -> chrom -> (starts, ends)``.

    ``track``/``browser``/``#`` lines are skipped. Without ``need_name`` all intervals go
    under the name ``""``.

    Raises
    ------
    InputError
        With the file and line of a malformed record (fewer than 3 columns, start > end,
        negative or non-integer coordinates, missing name column).
    """
    out: dict[str, dict[str, tuple[list[int], list[int]]]] = {}
    try:
        fh = open_text(path)
    except FileNotFoundError:
        raise InputError("file not found", path) from None
    with fh:
        for ln, line in _numbered_lines(fh, path):
            if not line.strip() or line.startswith(("#", "track", "browser")):
                continue
            f = line.rstrip("\r\n").split("\t")
            if len(f) < 3:
                raise InputError(
                    "a BED line needs at least 3 tab-separated columns (chrom, start, end)",
                    path,
                    ln,
                )
            try:
                s, e = int(f[1]), int(f[2])
            except ValueError:
                raise InputError(
                    f"start/end {f[1]!r}, {f[2]!r} are not integers", path, ln
                ) from None
            if e > MAX_COORDINATE:
                raise InputError(
                    f"end {e} is beyond any chromosome (at most {MAX_COORDINATE})", path, ln
                )
            if s < 0 or e < s:
                raise InputError(
                    f"invalid interval {s}-{e} (BED is 0-based, half-open: 0 <= start <= end)",
                    path,
                    ln,
                )
            if need_name:
                if len(f) < 4 or not f[3]:
                    raise InputError(
                        "column 4 (the site class, e.g. 0fold or 4fold) is missing", path, ln
                    )
                name = f[3]
            else:
                name = ""
            d = out.setdefault(name, {}).setdefault(f[0], ([], []))
            d[0].append(s)
            d[1].append(e)
    return out


def _to_set(chroms: dict[str, tuple[list[int], list[int]]]) -> IntervalSet:
    return IntervalSet(
        {c: merge_intervals(np.array(s), np.array(e)) for c, (s, e) in chroms.items()}
    )


def read_mask(path: str | os.PathLike) -> IntervalSet:
    """Read a callable-sites mask (BED, any number of columns) as one merged set."""
    raw = read_bed(path)
    if not raw:
        raise InputError("the mask BED holds no intervals", path)
    return _to_set(raw[""])


def read_site_classes(path: str | os.PathLike, classes: Iterable[str] | None = None) -> SiteClasses:
    """Read a BED4 of site classes (class in column 4) and check that classes are disjoint.

    Parameters
    ----------
    path : path-like
    classes : iterable of str, optional
        Keep only these classes (others are ignored).

    Raises
    ------
    InputError
        On malformed lines, no intervals, or a site in two classes (named).
    """
    raw = read_bed(path, need_name=True)
    if classes is not None:
        keep = set(classes)
        raw = {k: v for k, v in raw.items() if k in keep}
    if not raw:
        raise InputError("no site-class intervals found", path)
    sets = {name: _to_set(ch) for name, ch in sorted(raw.items())}
    names = list(sets)
    for i, a in enumerate(names):
        for b in names[i + 1 :]:
            both = sets[a].intersect(sets[b])
            if both.chroms:
                c, (s, _e) = next(iter(both.chroms.items()))
                raise InputError(
                    f"site {c}:{int(s[0]) + 1} (1-based) is in two classes, "
                    f"{a!r} and {b!r}; a site may have one class only",
                    path,
                )
    return SiteClasses(sets, os.fspath(path))


def write_bed4(
    path: str | os.PathLike, rows: Iterable[tuple[str, int, int, str]], force: bool = False
) -> int:
    """Write BED4 rows atomically; returns the number of rows written."""
    n = 0
    with atomic_output(path, force=force, newline="") as fh:
        for chrom, s, e, name in rows:
            fh.write(f"{chrom}\t{int(s)}\t{int(e)}\t{name}\n")
            n += 1
    return n
