"""VCF text records: blocks of complete lines split into per-chromosome batches
(:class:`TextBatch`), whose fixed columns and genotypes are decoded vectorised.

A batch keeps the raw bytes and the positions of every tab and newline; the GT subfield
(and integer subfields such as DP and GQ, when asked for) of every sample of thousands of
records is decoded in one pass by :mod:`.decode` (the *fast path*). A record the fast path
does not handle (a polyploid or multi-digit GT, an odd value) is decoded by pysam instead,
record by record (the *fallback*), so both give the same answer; the tests check this on
every fixture.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from ..exceptions import VcfFormatError
from .batches import (
    GenotypeData,
    RecordParseError,
    VariantBatch,
    gt_index_problem,
    pysam_parse,
    records_genotypes,
)
from .decode import (
    count_gt_alleles,
    decode_gt,
    decode_int,
    parse_pos,
    scan_uint,
    upper_codes,
)
from .header import VcfHeader

__all__ = ["TextBatch", "split_text"]

_PAD = b"\0" * 24  # NULs after the text: decoders read a few bytes past a field


def _info_get(info: bytes, key: bytes) -> bytes | None:
    if info.startswith(key):
        v = info[len(key) :]
    else:
        k = info.find(b";" + key)
        if k < 0:
            return None
        v = info[k + len(key) + 1 :]
    e = v.find(b";")
    return v if e < 0 else v[:e]


class TextBatch(VariantBatch):
    """Records of VCF text: the raw bytes, the tab positions, and the fixed columns (split
    per line only when asked for; the common cases are decoded vectorised)."""

    _LAZY = ("ref", "alt", "filt", "_info", "fmt")

    def __init__(
        self,
        data: bytes,
        buf: np.ndarray,
        tabs: np.ndarray,
        nl: np.ndarray,
        starts: np.ndarray,
        chrom: str,
        pos: np.ndarray,
        lineno: np.ndarray | None,
        header: VcfHeader,
        path: str,
    ) -> None:
        self._data, self._buf, self._tabs, self._nl, self._starts = data, buf, tabs, nl, starts
        self.chrom = chrom
        self.pos = pos
        self.lineno = lineno
        self._header = header
        self.path = path
        self._colons: tuple[np.ndarray, Callable[[], np.ndarray]] | None = None
        self._n_samples = len(header.samples)

    def __getattr__(self, name: str) -> list[bytes]:  # the lazily split fixed columns
        if name in TextBatch._LAZY:
            self._split_fixed()
            return self.__dict__[name]
        raise AttributeError(name)

    def _split_fixed(self) -> None:
        d = self._data
        fixed = [
            d[a:b].split(b"\t") for a, b in zip(self._starts.tolist(), self._tabs[:, 8].tolist())
        ]
        cols = tuple(zip(*fixed)) if fixed else ((),) * 9
        _, _, _, ref, alt, _, filt, info, fmt = (list(c) for c in cols)
        self.__dict__.update(ref=ref, alt=alt, filt=filt, _info=info, fmt=fmt)

    def codes(self) -> dict[str, np.ndarray]:
        """Vectorised view of the common cases (see :meth:`VariantBatch.codes`), read
        straight from the text."""
        buf, t = self._buf, self._tabs
        ref1 = np.where(t[:, 3] - t[:, 2] == 2, buf.take(t[:, 2] + 1), 0).astype(np.uint8)
        alt1 = np.where(t[:, 4] - t[:, 3] == 2, buf.take(t[:, 3] + 1), 0).astype(np.uint8)
        fl = t[:, 6] - t[:, 5] - 1
        f0 = t[:, 5] + 1
        is_pass = (
            (fl == 4)
            & (buf.take(f0) == 80)
            & (buf[1:].take(f0) == 65)
            & (buf[2:].take(f0) == 83)
            & (buf[3:].take(f0) == 83)
        )
        passed = np.where(is_pass | ((fl == 1) & (buf.take(f0) == 46)), 1, 0).astype(np.int8)
        i0 = t[:, 6] + 1  # INFO "AA=X;..." or "AA=X"
        simple_aa = (
            (buf.take(i0) == 65)
            & (buf[1:].take(i0) == 65)
            & (buf[2:].take(i0) == 61)
            & np.isin(buf[4:].take(i0), (59, 9))
        )
        aa1 = np.where(simple_aa, buf[3:].take(i0), 0).astype(np.uint8)
        return {
            "ref1": upper_codes(ref1),
            "alt1": upper_codes(alt1),
            "pass": passed,
            "aa1": upper_codes(aa1),
        }

    def _uniform_format(self) -> bytes | None:
        """The FORMAT of every record when they all have the same one, else None."""
        t, buf = self._tabs, self._buf
        w = t[:, 8] - t[:, 7] - 1
        if not w.size or np.any(w != w[0]):
            return None
        f0 = self._data[int(t[0, 7]) + 1 : int(t[0, 8])]
        idx = t[:, 7, None] + 1 + np.arange(w[0])
        if not np.all(buf.take(idx) == np.frombuffer(f0, np.uint8)):
            return None
        return f0

    def allele_counts(
        self, rows: np.ndarray, cols: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
        """Per-sample copies of allele 1 and called copies (alleles 0 or 1), GT only.

        The vectorised path for biallelic counting: returns ``alt``, ``called`` (r, s)
        int8 and ``ok`` (r,) bool (False: a record with another allele index, ploidy or
        odd GT, to be decoded by :meth:`genotypes`), or None when the records do not all
        have one FORMAT starting with GT.
        """
        f0 = self._uniform_format()
        if f0 is None or not (f0 == b"GT" or f0.startswith(b"GT:")):
            return None
        rows = np.asarray(rows, dtype=np.int64)
        cols = np.asarray(cols, dtype=np.int64)
        full = rows.size == len(self.pos) and rows.size and rows[-1] == rows.size - 1
        tr = self._tabs if full else self._tabs[rows]
        if cols.size and cols[-1] - cols[0] == cols.size - 1:
            t = tr[:, 8 + int(cols[0]) : 9 + int(cols[-1])]
        else:
            t = tr[:, 8 + cols]
        return count_gt_alleles(self._buf, t)  # t: the tab before each sample field

    def info(self, rows: Sequence[int], key: str) -> list[bytes | None]:
        """INFO values of ``key`` (bytes) for some records; None where absent."""
        kb = key.encode() + b"="
        info = self._info
        return [_info_get(info[i], kb) for i in rows]

    def slice(self, a: int, z: int) -> TextBatch:
        """Records ``a`` to ``z - 1`` as a batch of their own (no copy of the text)."""
        out = object.__new__(TextBatch)
        out.__dict__.update(self.__dict__)
        out._tabs, out._nl, out._starts = self._tabs[a:z], self._nl[a:z], self._starts[a:z]
        out.pos = self.pos[a:z]
        for name in TextBatch._LAZY:
            if name in self.__dict__:
                out.__dict__[name] = self.__dict__[name][a:z]
        out.lineno = None if self.lineno is None else self.lineno[a:z]
        return out

    def line(self, i: int) -> bytes:
        """The raw text of record ``i`` (without the newline)."""
        return self._data[int(self._starts[i]) : int(self._nl[i])]

    def _colon_index(self) -> tuple[np.ndarray, Callable[[], np.ndarray]]:
        """Positions of ':' (with sentinels) and a lazy inclusive cumulative count."""
        if self._colons is None:
            buf = self._buf  # not self: no reference cycle keeping batches alive
            colpos = np.concatenate(
                [np.flatnonzero(buf == 58), np.full(16, buf.size + 1, np.int64)]
            )
            cache: dict[str, np.ndarray] = {}

            def cc_fn() -> np.ndarray:
                if "cc" not in cache:
                    cache["cc"] = np.cumsum(buf == 58, dtype=np.int32)
                return cache["cc"]

            self._colons = (colpos, cc_fn)
        return self._colons

    def genotypes(
        self, rows: np.ndarray, cols: np.ndarray, fields: Sequence[str] = (), fast: bool = True
    ) -> GenotypeData:
        """Decode the genotypes of some records: vectorised where possible, the other
        records with pysam (see :meth:`VariantBatch.genotypes`).

        Raises
        ------
        VcfFormatError
            A record without GT, with GT not the first FORMAT key, or that htslib cannot
            parse.
        """
        rows = np.asarray(rows, dtype=np.int64)
        cols = np.asarray(cols, dtype=np.int64)
        r, s = rows.size, cols.size
        f0 = self._uniform_format()
        fmts = [f0] * r if f0 is not None else [self.fmt[i] for i in rows.tolist()]
        firsts = {f: f == b"GT" or f.startswith(b"GT:") for f in set(fmts)}
        gt_first = (
            np.array([firsts[f] for f in fmts], dtype=bool)
            if len(firsts) > 1
            else np.full(r, all(firsts.values()), bool)
        )
        for i in np.flatnonzero(~gt_first).tolist():
            if b"GT" not in fmts[i].split(b":"):
                name, ln = self.where(int(rows[i]))
                raise VcfFormatError(
                    f"{name} has no GT field (FORMAT "
                    f"{fmts[i].decode(errors='replace')}); spectra need "
                    "genotypes",
                    self.path,
                    ln,
                )
            name, ln = self.where(int(rows[i]))
            raise VcfFormatError(
                f"{name}: GT must be the first FORMAT key (VCF specification)", self.path, ln
            )
        alleles = np.full((r, s, 2), -2, np.int8)
        vals = {f: np.full((r, s), -1, np.int32) for f in fields}
        ok = np.zeros(r, bool)
        if fast and r:
            tr = (
                self._tabs
                if rows.size == len(self.pos) and rows[-1] == rows.size - 1
                else self._tabs[rows]
            )
            nlr = self._nl if tr is self._tabs else self._nl[rows]
            if cols.size and cols[-1] - cols[0] == cols.size - 1:  # a run of columns
                c0, c1 = int(cols[0]), int(cols[-1]) + 1
                p = tr[:, 8 + c0 : 8 + c1] + 1
                if c1 < self._n_samples:
                    e = tr[:, 9 + c0 : 9 + c1]
                else:
                    e = np.concatenate([tr[:, 9 + c0 :], nlr[:, None]], axis=1)
            else:
                ext = np.concatenate([tr[:, 9:], nlr[:, None]], axis=1)
                p = tr[:, 8 + cols] + 1
                e = ext[:, cols]
            alleles, ok, hap = decode_gt(self._buf, p, e)
            if fields:
                lazy: dict[str, Any] = {}

                # colon positions: only for layouts read by position
                def colon_info() -> dict[str, Any]:
                    if not lazy:
                        colpos, cc_fn = self._colon_index()
                        first = np.searchsorted(colpos, tr[:, 8])
                        lazy.update(
                            colpos=colpos,
                            cc_fn=cc_fn,
                            first=first,
                            total=np.searchsorted(colpos, nlr) - first,
                        )
                    return lazy

                groups: dict[bytes, list[int]] = {}
                if f0 is not None:
                    groups[f0] = list(range(r))
                else:
                    for i, f in enumerate(fmts):
                        groups.setdefault(f, []).append(i)
                want = {f.encode() for f in fields}
                for f, idx in groups.items():
                    keys = f.split(b":")
                    nk = len(keys)
                    last = max((keys.index(x) for x in want if x in keys), default=0)
                    if last and keys[0] == b"GT" and all(x in want for x in keys[1 : last + 1]):
                        # GT then only wanted integers: read them one after the other
                        sel = np.array(idx) if len(idx) < r else slice(None)
                        st = p[sel] + np.where(hap[sel], 2, 4)
                        ee = e[sel]
                        good = np.ones(st.shape, bool)
                        for k in range(1, last + 1):
                            v, w, okk = scan_uint(self._buf, st, ee)
                            vals[keys[k].decode()][sel] = v
                            good &= okk
                            st = st + w + 1
                        ok[sel] &= good.all(axis=1)
                        continue
                    sel = np.array(idx) if len(idx) < r else slice(None)
                    ci = colon_info()
                    colpos, cc_fn, first = ci["colpos"], ci["cc_fn"], ci["first"]
                    reg = ci["total"][sel] == self._n_samples * (nk - 1)
                    for part, is_reg in ((reg, True), (~reg, False)):
                        if not part.any():
                            continue
                        rr = (
                            np.flatnonzero(part)
                            if isinstance(sel, slice)
                            else np.asarray(idx)[part]
                        )
                        if rr.size == r:
                            rr = slice(None)
                        base = (first[rr, None] + cols * (nk - 1)) if is_reg else None
                        for name in fields:
                            nb = name.encode()
                            if nb not in keys:
                                continue
                            v, okv = decode_int(
                                self._buf, p[rr], e[rr], keys.index(nb), nk, base, colpos, cc_fn
                            )
                            vals[name][rr] = v
                            ok[rr] &= okv
        slow = np.flatnonzero(~ok)
        if slow.size:
            a2, v2 = self._fallback(rows[slow], cols, fields)
            if a2.shape[2] > alleles.shape[2]:
                wide = np.full((r, s, a2.shape[2]), -2, np.int8)
                wide[:, :, : alleles.shape[2]] = alleles
                alleles = wide
            alleles[slow] = -2
            alleles[slow, :, : a2.shape[2]] = a2
            for f in fields:
                vals[f][slow] = v2[f]
        return GenotypeData(alleles, vals, ok)

    def _fallback(
        self, rows: np.ndarray, cols: np.ndarray, fields: Sequence[str]
    ) -> tuple[np.ndarray, dict[str, np.ndarray]]:
        """Decode records with pysam (through a small temporary VCF)."""
        lines = [self.line(i) for i in rows.tolist()]
        for i, ln_text in zip(rows.tolist(), lines):
            if why := gt_index_problem(ln_text.decode("utf-8", "replace"), cols.tolist()):
                name, ln = self.where(int(i))
                raise VcfFormatError(f"{name}: {why}", self.path, ln)
        try:
            records = pysam_parse(self._header.text, lines)
        except RecordParseError as err:
            name, ln = self.where(int(rows[err.index]))
            raise VcfFormatError(
                f"{name}: htslib cannot parse this record ({err}); check its GT and FORMAT values",
                self.path,
                ln,
            ) from None
        try:
            return records_genotypes(records, cols, fields, [self.path])
        except (ValueError, TypeError) as err:
            raise VcfFormatError(
                f"record {self.chrom}: bad FORMAT value ({err})", self.path
            ) from None


def split_text(data: bytes, header: VcfHeader, path: str, lineno0: int | None) -> list[TextBatch]:
    """Split complete record lines (``data`` ends with a newline) into per-chromosome batches.

    ``lineno0`` is the 1-based line number of the first line (None when unknown).

    Raises
    ------
    VcfFormatError
        A record with another number of columns than the header, or a POS that is not a
        positive integer.
    """
    if b"\r" in data:
        data = data.replace(b"\r\n", b"\n")
    raw = np.frombuffer(data, np.uint8)
    # one pass for tabs and newlines: the only bytes below 11 in VCF text
    ctl = np.flatnonzero(raw < 11)
    is_nl = raw[ctl] == 10
    nl = ctl[is_nl]
    starts = np.empty(nl.size, np.int64)
    if nl.size:
        starts[0] = 0
        starts[1:] = nl[:-1] + 1
    lineno = None if lineno0 is None else lineno0 + np.arange(nl.size, dtype=np.int64)
    empty = nl == starts
    tabs: np.ndarray
    if empty.any() or not np.all((raw[ctl] == 9) | is_nl):
        if empty.any():
            lineno = None if lineno is None else lineno[~empty]
            data = b"\n".join(ln for ln in data.split(b"\n") if ln) + b"\n"
            raw = np.frombuffer(data, np.uint8)
        nl = np.flatnonzero(raw == 10)
        starts = np.empty(nl.size, np.int64)
        if nl.size:
            starts[0] = 0
            starts[1:] = nl[:-1] + 1
        tabs = np.flatnonzero(raw == 9)
    else:
        tabs = ctl[~is_nl]
    if nl.size == 0:
        return []
    buf = np.frombuffer(data + _PAD, np.uint8)
    ntab = 8 + len(header.samples)
    per_line = np.diff(np.searchsorted(tabs, nl), prepend=0)
    bad = np.flatnonzero(per_line != ntab)
    if bad.size:
        i = int(bad[0])
        line = data[starts[i] : nl[i]]
        f = line.split(b"\t", 2)
        name = (
            f"record {f[0].decode(errors='replace')}:{f[1].decode(errors='replace')}"
            if len(f) > 2
            else "record"
        )
        ln = None if lineno is None else int(lineno[i])
        last = i == nl.size - 1
        hint = " (truncated file?)" if last and per_line[i] < ntab else ""
        raise VcfFormatError(
            f"{name} has {per_line[i] + 1} columns, the header has "
            f"{ntab + 1} (9 + {len(header.samples)} samples){hint}",
            path,
            ln,
        )
    tabs = tabs.reshape(nl.size, ntab)
    pos, good = parse_pos(buf, tabs[:, 0] + 1, tabs[:, 1] - tabs[:, 0] - 1)
    if not good.all():
        i = int(np.flatnonzero(~good)[0])
        v = data[int(tabs[i, 0]) + 1 : int(tabs[i, 1])]
        raise VcfFormatError(
            f"POS {v.decode(errors='replace')!r} is not a positive integer",
            path,
            None if lineno is None else int(lineno[i]),
        )
    c0 = data[int(starts[0]) : int(tabs[0, 0])]
    clen = tabs[:, 0] - starts
    same = bool(np.all(clen == len(c0)))
    if same and len(c0):
        idx = starts[:, None] + np.arange(len(c0))
        same = bool(np.all(buf.take(idx) == np.frombuffer(c0, np.uint8)))
    if same:
        return [
            TextBatch(
                data, buf, tabs, nl, starts, c0.decode(errors="replace"), pos, lineno, header, path
            )
        ]
    chroms = [data[a:b] for a, b in zip(starts.tolist(), tabs[:, 0].tolist())]
    cut = [0] + [i for i in range(1, len(chroms)) if chroms[i] != chroms[i - 1]] + [len(chroms)]
    out = []
    for a, b in zip(cut[:-1], cut[1:]):
        out.append(
            TextBatch(
                data,
                buf,
                tabs[a:b],
                nl[a:b],
                starts[a:b],
                chroms[a].decode(errors="replace"),
                pos[a:b],
                None if lineno is None else lineno[a:b],
                header,
                path,
            )
        )
    return out
