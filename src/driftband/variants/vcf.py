"""Reading VCF and BCF through htslib (pysam), with a vectorised genotype decoder.

Accepted inputs: bgzipped VCF with a tabix (``.tbi``) or CSI (``.csi``) index, read region
by region; bgzipped or gzipped VCF without an index, plain VCF and ``-`` (standard input,
plain or compressed), read as one stream; BCF (indexed or not, also on standard input)
through pysam's record objects.

For text VCF, htslib (pysam's ``TabixFile``/``BGZFile``) opens, seeks and inflates; the
records of about a megabyte of text at a time are split with numpy and the GT subfield (and
integer subfields such as DP and GQ, when asked for) of every sample of thousands of records
is decoded in one pass (the *fast path*). A record the fast path does not handle (a
polyploid or multi-digit GT, an odd value) is decoded by pysam instead, record by record
(the *fallback*), so both give the same answer; the tests check this on every fixture.

Genotypes are returned as allele indices, shape (records, samples, copies), int8: ``-1`` a
missing copy (``.``), ``-2`` no such copy (a haploid call in a diploid-width array).
No model code here.
"""

from __future__ import annotations

import contextlib
import gzip
import os
import re
import sys
import tempfile
import zlib
from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import numpy as np
import pysam
from pysam import libcbgzf

from ..exceptions import InputError, VcfFormatError

__all__ = [
    "GenotypeData",
    "VariantBatch",
    "VcfHeader",
    "VcfSource",
    "open_vcf",
]

BGZF_EOF = bytes.fromhex("1f8b08040000000000ff0600424302001b0003000000000000000000")
BATCH_BYTES = 1 << 20
_PAD = b"\0" * 24


# ---------------------------------------------------------------------------- header

@dataclass
class VcfHeader:
    """What driftband needs from a VCF header.

    Attributes
    ----------
    samples : list of str
        Sample columns, in order.
    contigs : list of str
        ``##contig`` IDs, in order.
    contig_lengths : dict of str to int
        Lengths given in ``##contig`` lines.
    info, formats : set of str
        Declared INFO and FORMAT IDs.
    text : str
        The header text (``##`` lines and the ``#CHROM`` line), for the pysam fallback.
    n_lines : int
        Number of header lines (record ``i``, 0-based, is on line ``n_lines + i + 1``).
    """

    samples: list[str]
    contigs: list[str]
    contig_lengths: dict[str, int]
    info: set[str]
    formats: set[str]
    text: str
    n_lines: int


_ID = re.compile(r"<ID=([^,>]+)")
_LEN = re.compile(r"[<,]length=(\d+)")


def parse_header(text: str, path: str) -> VcfHeader:
    """Parse the header text of a VCF (``##`` lines and the ``#CHROM`` line).

    Raises
    ------
    VcfFormatError
        No ``##fileformat=VCF`` line, no ``#CHROM`` line, or no sample columns.
    """
    lines = text.splitlines()
    if not lines or not lines[0].startswith("##fileformat=VCF"):
        raise VcfFormatError("not a VCF file (the first line must be ##fileformat=VCFv4.x)",
                             path, 1)
    contigs, lengths, info, formats = [], {}, set(), set()
    chrom_line = None
    for ln, line in enumerate(lines, start=1):
        if line.startswith("##contig="):
            m = _ID.search(line)
            if m:
                contigs.append(m.group(1))
                lm = _LEN.search(line)
                if lm:
                    lengths[m.group(1)] = int(lm.group(1))
        elif line.startswith("##INFO="):
            m = _ID.search(line)
            if m:
                info.add(m.group(1))
        elif line.startswith("##FORMAT="):
            m = _ID.search(line)
            if m:
                formats.add(m.group(1))
        elif line.startswith("#CHROM"):
            chrom_line = (ln, line)
        elif not line.startswith("##"):
            raise VcfFormatError("header line does not start with ## (or the #CHROM line "
                                 "is missing)", path, ln)
    if chrom_line is None:
        raise VcfFormatError("no #CHROM header line (truncated file, or not a VCF)", path)
    ln, line = chrom_line
    cols = line.rstrip("\r").split("\t")
    if len(cols) < 10 or cols[8] != "FORMAT":
        raise VcfFormatError("the VCF has no sample columns (a FORMAT column and at least "
                             "one sample are needed for spectra)", path, ln)
    return VcfHeader(cols[9:], contigs, lengths, info, formats, text, len(lines))


# ---------------------------------------------------------------------------- genotypes

@dataclass
class GenotypeData:
    """Decoded genotypes of some records of a batch.

    Attributes
    ----------
    alleles : ndarray of int8, shape (r, s, p)
        Allele index per copy; -1 missing copy, -2 no such copy; ``p >= 2``.
    fields : dict of str to ndarray of int32, shape (r, s)
        Integer FORMAT subfields asked for (e.g. DP, GQ); -1 where missing.
    fast : ndarray of bool, shape (r,)
        Which records the vectorised decoder handled (the rest went through pysam).
    """

    alleles: np.ndarray
    fields: dict[str, np.ndarray]
    fast: np.ndarray


def _gt_tuple_to_row(gt, width: int, out: np.ndarray) -> None:
    out[:] = -2
    for k, a in enumerate(gt[:width]):
        out[k] = -1 if a is None else a


def _records_genotypes(records: Sequence, cols: np.ndarray, fields: Sequence[str],
                       names: Sequence[str]) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Genotypes of pysam records (the fallback, and the BCF path)."""
    r, s = len(records), len(cols)
    gts = []
    ploidy = 2
    vals = {f: np.full((r, s), -1, np.int32) for f in fields}
    for i, rec in enumerate(records):
        if "GT" not in rec.format:
            raise VcfFormatError(f"record {rec.chrom}:{rec.pos} has no GT field "
                                 f"(FORMAT {':'.join(rec.format.keys()) or '.'})", names[0])
        smp = rec.samples
        row = []
        for j, c in enumerate(cols.tolist()):
            call = smp[c]
            gt = call["GT"]
            if gt == () and list(rec.format.keys())[0] != "GT":
                raise VcfFormatError(f"record {rec.chrom}:{rec.pos}: GT must be the first "
                                     "FORMAT key (VCF specification)", names[0])
            row.append(gt)
            ploidy = max(ploidy, len(gt))
            for f in fields:
                if f in rec.format:
                    v = call[f]
                    if isinstance(v, tuple):
                        v = v[0] if v else None
                    if v is not None:
                        vals[f][i, j] = int(v)
        gts.append(row)
    alleles = np.full((r, s, ploidy), -2, np.int8)
    for i, row in enumerate(gts):
        for j, gt in enumerate(row):
            _gt_tuple_to_row(gt, ploidy, alleles[i, j])
    return alleles, vals


_LUT_ALLELE = np.full(256, -100, np.int8)   # digit -> allele index, '.' -> -1
_LUT_ALLELE[48:58] = np.arange(10)
_LUT_ALLELE[46] = -1
_LUT_END = np.zeros(256, bool)              # bytes that end a subfield
_LUT_END[[58, 9, 10, 0]] = True


_LUT_COUNT = np.zeros(256, np.uint8)       # bit 0: allele 1, bit 1: called 0/1, bit 2: valid
_LUT_COUNT[48] = 6
_LUT_COUNT[49] = 7
_LUT_COUNT[46] = 4
_LUT_SEP = np.full(256, 2, np.int8)        # 0: '/' or '|', 1: end of the GT subfield
_LUT_SEP[[47, 124]] = 0
_LUT_SEP[[58, 9, 10, 0]] = 1


def _decode_gt(buf: np.ndarray, p: np.ndarray, e: np.ndarray
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Vectorised GT decoding of sample fields ``buf[p:e]`` (GT first), shape (r, s).

    Handles haploid and diploid calls with single-digit allele indices and ``.``; returns
    ``alleles`` (r, s, 2) int8, ``ok`` (r,) bool for the records fully handled, and
    ``hap`` (r, s) bool, True where the GT has one character (haploid or ``.``).
    """
    a0 = _LUT_ALLELE.take(buf.take(p))
    sep = _LUT_SEP.take(buf[1:].take(p))      # shifted views: no index arithmetic
    a2 = _LUT_ALLELE.take(buf[2:].take(p))
    hap = sep == 1
    ok = (a0 > -100) & (hap | ((sep == 0) & _LUT_END.take(buf[3:].take(p)) & (a2 > -100)))
    alleles = np.empty(p.shape + (2,), np.int8)
    alleles[..., 0] = a0
    alleles[..., 1] = np.where(hap, np.int8(-2), a2)
    return alleles, ok.all(axis=1), hap


def _parse_uint(buf: np.ndarray, s: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Decode the unsigned integers ``buf[s:s+w]`` (shape of ``s``); ``.`` or empty -> -1.

    Returns the values (int32) and ``good`` (bool): False where the text is neither an
    integer of at most 9 digits nor ``.``.
    """
    wmax = int(w.max()) if w.size else 0
    val = np.zeros(s.shape, np.int32)
    bad = w > 9
    for j in range(min(wmax, 9)):
        d = buf[j:].take(s) - np.uint8(48)  # wraps below '0'
        inr = w > j
        bad |= (d > 9) & inr
        val = np.where(inr, val * 10 + d, val)
    miss = (w == 0) | ((w == 1) & (buf.take(s) == 46))
    val[miss] = -1
    good = ~bad | miss
    val[~good] = -1
    return val, good


def _scan_uint(buf: np.ndarray, s: np.ndarray, e: np.ndarray
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Read the unsigned integer subfields starting at ``s`` (sample fields end at ``e``).

    Digits are read up to the next non-digit, which must end the subfield (':', tab or
    newline). Returns values (int32; -1 for ``.``, an empty or an absent subfield), the
    text widths, and ``good`` (False where the text is not an integer of <= 9 digits).
    """
    present = s < e
    # values of up to 3 digits (DP, GQ ...) in one go; longer ones by the loop below
    b0, b1, b2, b3 = (buf[k:].take(s) for k in range(4))
    d0, d1, d2 = b0 - np.uint8(48), b1 - np.uint8(48), b2 - np.uint8(48)
    D0, D1, D2 = d0 <= 9, d1 <= 9, d2 <= 9
    if not np.any(D0 & D1 & D2 & (b3 - np.uint8(48) <= 9)):
        w = (D0.view(np.uint8) * (1 + D1.view(np.uint8) * (1 + D2.view(np.uint8))))
        v16 = np.where(w == 3, d0.astype(np.int16) * 100 + d1.astype(np.int16) * 10 + d2,
                       np.where(w == 2, d0.astype(np.int16) * 10 + d1, d0))
        dot = present & (w == 0) & (b0 == 46)
        wd = w + dot.view(np.uint8)                 # '.' takes one character
        end = np.where(wd == 0, _LUT_END.take(b0),
                       np.where(wd == 1, _LUT_END.take(b1),
                                np.where(wd == 2, _LUT_END.take(b2), _LUT_END.take(b3))))
        good = end | ~present
        val = np.where(present & (w > 0), v16, -1).astype(np.int32)
        return val, wd.astype(np.int64), good
    val = np.zeros(s.shape, np.int32)
    w = np.zeros(s.shape, np.int64)
    active = present.copy()
    for j in range(10):
        d = buf[j:].take(s) - np.uint8(48)
        isd = d <= 9
        stop = active & ~isd
        w[stop] = j
        active &= isd
        if not active.any():
            break
        val = np.where(active, val * 10 + d, val)
    good = ~active & (w <= 9)
    c0 = buf.take(s)
    miss = present & (w == 0)
    dot = miss & (c0 == 46)
    w[dot] = 1
    good &= _LUT_END.take(buf.take(s + w)) | ~present
    val[miss | ~present] = -1
    good |= ~present
    return val, w, good


def _decode_int(buf: np.ndarray, p: np.ndarray, e: np.ndarray, k: int, nkeys: int,
                base: np.ndarray | None, colpos: np.ndarray, cc_fn
                ) -> tuple[np.ndarray, np.ndarray]:
    """Vectorised decoding of the integer subfield ``k`` (0-based) of sample fields.

    ``p``/``e`` are the starts/ends of the sample fields (r, s); ``colpos`` the positions
    of ':' in ``buf`` (with sentinels at the end). In the usual layout every sample field
    has ``nkeys - 1`` colons and ``base`` (r, s) is the index in ``colpos`` of the first
    colon of each field; records with dropped trailing subfields (``base`` None) count
    colons with an inclusive cumulative count (``cc_fn()``) instead. Returns values (r, s)
    int32 (-1 missing or absent) and ``ok`` (r,) bool.
    """
    lim = colpos.size - 1
    regular = base is not None
    if not regular:
        base = cc_fn()[p - 1].astype(np.int64)  # colons before each field
    if k == 0:
        s = p
        has = np.ones(p.shape, bool)
    else:
        c1 = colpos.take(np.minimum(base + (k - 1), lim) if not regular else base + (k - 1))
        has = (c1 >= p) & (c1 < e)
        s = c1 + 1
    if regular and k < nkeys - 1:
        en = colpos.take(base + k)
    else:
        en = np.minimum(colpos.take(np.minimum(base + k, lim)), e)
    w = en - s
    if not regular:
        w = np.where(has, w, 0)
    elif k > 0 and not has.all():
        return np.full(p.shape, -1, np.int32), np.zeros(p.shape[0], bool)
    val, good = _parse_uint(buf, s, w)
    return val, good.all(axis=1)


# ---------------------------------------------------------------------------- batches

class VariantBatch:
    """Records of one chromosome read together.

    Attributes
    ----------
    chrom : str
    pos : ndarray of int64, shape (k,)
        1-based positions.
    ref, alt, filt, fmt : list of bytes
        REF, ALT, FILTER and FORMAT columns (bytes, as in the file).
    lineno : ndarray of int64 or None
        1-based line numbers (streams only).
    path : str
        The file, for messages.
    """

    chrom: str
    pos: np.ndarray
    ref: list
    alt: list
    filt: list
    fmt: list
    lineno: np.ndarray | None
    path: str

    def __len__(self) -> int:
        return int(self.pos.size)

    def where(self, i: int) -> tuple[str, int | None]:
        """A name for record ``i`` in messages, and its line number when known."""
        ln = None if self.lineno is None else int(self.lineno[i])
        return f"record {self.chrom}:{int(self.pos[i])}", ln

    def info(self, rows: Sequence[int], key: str) -> list[bytes | None]:
        """INFO values of ``key`` (bytes) for some records; None where absent."""
        raise NotImplementedError

    def slice(self, a: int, z: int) -> VariantBatch:
        """Records ``a`` to ``z - 1`` as a batch of their own (no copy of the text)."""
        raise NotImplementedError

    def codes(self) -> dict[str, np.ndarray]:
        """Vectorised view of the common cases, uint8 byte codes (upper case) per record:
        ``ref1``/``alt1`` the REF/ALT base when one character (else 0), ``aa1`` the INFO/AA
        value when INFO starts with a one-character AA (else 0: look it up with
        :meth:`info`), and ``pass`` (int8) 1 when FILTER is PASS or ``.``."""
        one = [r if len(r) == 1 else b"\0" for r in self.ref]
        ref1 = np.frombuffer(b"".join(one), np.uint8) if one else np.zeros(0, np.uint8)
        one = [a if len(a) == 1 else b"\0" for a in self.alt]
        alt1 = np.frombuffer(b"".join(one), np.uint8) if one else np.zeros(0, np.uint8)
        passed = np.array([f in (b"PASS", b".") for f in self.filt], np.int8)
        return {"ref1": _upper(ref1), "alt1": _upper(alt1), "pass": passed,
                "aa1": np.zeros(len(self), np.uint8)}

    def genotypes(self, rows: np.ndarray, cols: np.ndarray, fields: Sequence[str] = (),
                  fast: bool = True) -> GenotypeData:
        """Decode the genotypes of some records.

        Parameters
        ----------
        rows : ndarray of int, shape (r,)
            Records of the batch.
        cols : ndarray of int64, shape (s,)
            Sample columns (0-based, in VCF order).
        fields : sequence of str
            Integer FORMAT subfields to decode as well (e.g. ``("DP", "GQ")``).
        fast : bool
            Use the vectorised decoder where possible (False: pysam for every record).
        """
        raise NotImplementedError


def _upper(c: np.ndarray) -> np.ndarray:
    """ASCII upper case of byte codes."""
    return np.where((c >= 97) & (c <= 122), c - 32, c).astype(np.uint8)


def _info_get(info: bytes, key: bytes) -> bytes | None:
    if info.startswith(key):
        v = info[len(key):]
    else:
        k = info.find(b";" + key)
        if k < 0:
            return None
        v = info[k + len(key) + 1:]
    e = v.find(b";")
    return v if e < 0 else v[:e]


class TextBatch(VariantBatch):
    """Records of VCF text: the raw bytes, the tab positions, and the fixed columns (split
    per line only when asked for; the common cases are decoded vectorised)."""

    _LAZY = ("ref", "alt", "filt", "_info", "fmt")

    def __init__(self, data: bytes, buf: np.ndarray, tabs: np.ndarray, nl: np.ndarray,
                 starts: np.ndarray, chrom: str, pos: np.ndarray,
                 lineno: np.ndarray | None, header: VcfHeader, path: str) -> None:
        self._data, self._buf, self._tabs, self._nl, self._starts = data, buf, tabs, nl, starts
        self.chrom = chrom
        self.pos = pos
        self.lineno = lineno
        self._header = header
        self.path = path
        self._colons = None
        self._fixed = None
        self._n_samples = len(header.samples)

    def __getattr__(self, name):  # the lazily split fixed columns
        if name in TextBatch._LAZY:
            self._split_fixed()
            return self.__dict__[name]
        raise AttributeError(name)

    def _split_fixed(self) -> None:
        d = self._data
        fixed = [d[a:b].split(b"\t") for a, b in zip(self._starts.tolist(),
                                                      self._tabs[:, 8].tolist())]
        cols = tuple(zip(*fixed)) if fixed else ((),) * 9
        _, _, _, ref, alt, _, filt, info, fmt = (list(c) for c in cols)
        self.__dict__.update(ref=ref, alt=alt, filt=filt, _info=info, fmt=fmt)

    def codes(self) -> dict[str, np.ndarray]:
        buf, t, k = self._buf, self._tabs, len(self.pos)
        ref1 = np.where(t[:, 3] - t[:, 2] == 2, buf.take(t[:, 2] + 1), 0).astype(np.uint8)
        alt1 = np.where(t[:, 4] - t[:, 3] == 2, buf.take(t[:, 3] + 1), 0).astype(np.uint8)
        fl = t[:, 6] - t[:, 5] - 1
        f0 = t[:, 5] + 1
        is_pass = (fl == 4) & (buf.take(f0) == 80) & (buf[1:].take(f0) == 65) & \
            (buf[2:].take(f0) == 83) & (buf[3:].take(f0) == 83)
        passed = np.where(is_pass | ((fl == 1) & (buf.take(f0) == 46)), 1, 0).astype(np.int8)
        i0 = t[:, 6] + 1          # INFO "AA=X;..." or "AA=X"
        simple_aa = (buf.take(i0) == 65) & (buf[1:].take(i0) == 65) & \
            (buf[2:].take(i0) == 61) & np.isin(buf[4:].take(i0), (59, 9))
        aa1 = np.where(simple_aa, buf[3:].take(i0), 0).astype(np.uint8)
        del k
        return {"ref1": _upper(ref1), "alt1": _upper(alt1), "pass": passed,
                "aa1": _upper(aa1)}

    def _uniform_format(self) -> bytes | None:
        """The FORMAT of every record when they all have the same one, else None."""
        t, buf = self._tabs, self._buf
        w = t[:, 8] - t[:, 7] - 1
        if not w.size or np.any(w != w[0]):
            return None
        f0 = self._data[int(t[0, 7]) + 1:int(t[0, 8])]
        idx = t[:, 7, None] + 1 + np.arange(w[0])
        if not np.all(buf.take(idx) == np.frombuffer(f0, np.uint8)):
            return None
        return f0

    def allele_counts(self, rows: np.ndarray, cols: np.ndarray
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
            t = tr[:, 8 + int(cols[0]):9 + int(cols[-1])]
        else:
            t = tr[:, 8 + cols]
        buf = self._buf            # t: the tab before each sample field
        k0 = _LUT_COUNT.take(buf[1:].take(t))
        sep = _LUT_SEP.take(buf[2:].take(t))
        k2 = _LUT_COUNT.take(buf[3:].take(t))
        hap = sep == 1
        dip = (sep == 0) & _LUT_END.take(buf[4:].take(t))
        ok = ((k0 >= 4) & (hap | (dip & (k2 >= 4)))).all(axis=1)
        k2 = k2 * dip.view(np.uint8)
        alt = (k0 & 1) + (k2 & 1)
        called = ((k0 >> 1) & 1) + ((k2 >> 1) & 1)
        return alt.view(np.int8), called.view(np.int8), ok

    def info(self, rows, key):
        kb = key.encode() + b"="
        info = self._info
        return [_info_get(info[i], kb) for i in rows]

    def slice(self, a, z):
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
        return self._data[int(self._starts[i]):int(self._nl[i])]

    def _colon_index(self):
        """Positions of ':' (with sentinels) and a lazy inclusive cumulative count."""
        if self._colons is None:
            buf = self._buf   # not self: no reference cycle keeping batches alive
            colpos = np.concatenate([np.flatnonzero(buf == 58),
                                     np.full(16, buf.size + 1, np.int64)])
            cache: dict[str, np.ndarray] = {}

            def cc_fn() -> np.ndarray:
                if "cc" not in cache:
                    cache["cc"] = np.cumsum(buf == 58, dtype=np.int32)
                return cache["cc"]

            self._colons = (colpos, cc_fn)
        return self._colons

    def genotypes(self, rows, cols, fields=(), fast=True):
        rows = np.asarray(rows, dtype=np.int64)
        cols = np.asarray(cols, dtype=np.int64)
        r, s = rows.size, cols.size
        f0 = self._uniform_format()
        fmts = [f0] * r if f0 is not None else [self.fmt[i] for i in rows.tolist()]
        firsts = {f: f == b"GT" or f.startswith(b"GT:") for f in set(fmts)}
        gt_first = np.array([firsts[f] for f in fmts], dtype=bool) if len(firsts) > 1 \
            else np.full(r, all(firsts.values()), bool)
        for i in np.flatnonzero(~gt_first).tolist():
            if b"GT" not in fmts[i].split(b":"):
                name, ln = self.where(int(rows[i]))
                raise VcfFormatError(f"{name} has no GT field (FORMAT "
                                     f"{fmts[i].decode(errors='replace')}); spectra need "
                                     "genotypes", self.path, ln)
            name, ln = self.where(int(rows[i]))
            raise VcfFormatError(f"{name}: GT must be the first FORMAT key (VCF "
                                 "specification)", self.path, ln)
        alleles = np.full((r, s, 2), -2, np.int8)
        vals = {f: np.full((r, s), -1, np.int32) for f in fields}
        ok = np.zeros(r, bool)
        if fast and r:
            tr = self._tabs if rows.size == len(self.pos) and rows[-1] == rows.size - 1 \
                else self._tabs[rows]
            nlr = self._nl if tr is self._tabs else self._nl[rows]
            if cols.size and cols[-1] - cols[0] == cols.size - 1:   # a run of columns
                c0, c1 = int(cols[0]), int(cols[-1]) + 1
                p = tr[:, 8 + c0:8 + c1] + 1
                if c1 < self._n_samples:
                    e = tr[:, 9 + c0:9 + c1]
                else:
                    e = np.concatenate([tr[:, 9 + c0:], nlr[:, None]], axis=1)
            else:
                ext = np.concatenate([tr[:, 9:], nlr[:, None]], axis=1)
                p = tr[:, 8 + cols] + 1
                e = ext[:, cols]
            alleles, ok, hap = _decode_gt(self._buf, p, e)
            if fields:
                lazy: dict[str, np.ndarray] = {}

                def colon_info():   # colon positions: only for layouts read by position
                    if not lazy:
                        colpos, cc_fn = self._colon_index()
                        first = np.searchsorted(colpos, tr[:, 8])
                        lazy.update(colpos=colpos, cc_fn=cc_fn, first=first,
                                    total=np.searchsorted(colpos, nlr) - first)
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
                    if last and keys[0] == b"GT" and all(x in want for x in keys[1:last + 1]):
                        # GT then only wanted integers: read them one after the other
                        sel = np.array(idx) if len(idx) < r else slice(None)
                        st = p[sel] + np.where(hap[sel], 2, 4)
                        ee = e[sel]
                        good = np.ones(st.shape, bool)
                        for k in range(1, last + 1):
                            v, w, okk = _scan_uint(self._buf, st, ee)
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
                        rr = (np.flatnonzero(part) if isinstance(sel, slice)
                              else np.asarray(idx)[part])
                        if rr.size == r:
                            rr = slice(None)
                        base = (first[rr, None] + cols * (nk - 1)) if is_reg else None
                        for name in fields:
                            nb = name.encode()
                            if nb not in keys:
                                continue
                            v, okv = _decode_int(self._buf, p[rr], e[rr], keys.index(nb),
                                                 nk, base, colpos, cc_fn)
                            vals[name][rr] = v
                            ok[rr] &= okv
        slow = np.flatnonzero(~ok)
        if slow.size:
            a2, v2 = self._fallback(rows[slow], cols, fields)
            if a2.shape[2] > alleles.shape[2]:
                wide = np.full((r, s, a2.shape[2]), -2, np.int8)
                wide[:, :, :alleles.shape[2]] = alleles
                alleles = wide
            alleles[slow] = -2
            alleles[slow, :, :a2.shape[2]] = a2
            for f in fields:
                vals[f][slow] = v2[f]
        return GenotypeData(alleles, vals, ok)

    def _fallback(self, rows: np.ndarray, cols: np.ndarray, fields: Sequence[str]):
        """Decode records with pysam (through a small temporary VCF)."""
        lines = [self.line(i) for i in rows.tolist()]
        try:
            records = _pysam_parse(self._header.text, lines)
        except _ParseError as err:
            name, ln = self.where(int(rows[err.index]))
            raise VcfFormatError(f"{name}: htslib cannot parse this record ({err}); check "
                                 "its GT and FORMAT values", self.path, ln) from None
        try:
            return _records_genotypes(records, cols, fields, [self.path])
        except (ValueError, TypeError) as err:
            raise VcfFormatError(f"record {self.chrom}: bad FORMAT value ({err})",
                                 self.path) from None


class _ParseError(Exception):
    def __init__(self, index: int, msg: str) -> None:
        super().__init__(msg)
        self.index = index


@contextlib.contextmanager
def _quiet_htslib():
    """Silence htslib's own stderr messages (errors are reported by driftband)."""
    old = pysam.set_verbosity(0)
    try:
        yield
    finally:
        pysam.set_verbosity(old)


def _pysam_parse(header_text: str, lines: list[bytes]) -> list:
    """Parse VCF record lines with pysam; returns the records (kept alive by a list)."""
    with tempfile.TemporaryDirectory(prefix="driftband-") as d:
        p = os.path.join(d, "records.vcf")
        with open(p, "wb") as fh:
            fh.write(header_text.encode())
            if not header_text.endswith("\n"):
                fh.write(b"\n")
            for ln in lines:
                fh.write(ln + b"\n")
        out = []
        with _quiet_htslib(), pysam.VariantFile(p) as vf:
            it = iter(vf)
            for i in range(len(lines)):
                try:
                    rec = next(it)
                except (OSError, ValueError, StopIteration) as err:
                    raise _ParseError(i, str(err) or type(err).__name__) from None
                out.append(rec)
        return out


class RecordBatch(VariantBatch):
    """Records decoded by pysam (BCF input)."""

    def __init__(self, records: list, path: str) -> None:
        self._records = records
        self.chrom = records[0].chrom
        self.pos = np.fromiter((r.pos for r in records), np.int64, len(records))
        self.ref = [r.ref.encode() for r in records]
        self.alt = [",".join(r.alts).encode() if r.alts else b"." for r in records]
        self.filt = [";".join(r.filter.keys()).encode() or b"." for r in records]
        self.fmt = [":".join(r.format.keys()).encode() or b"." for r in records]
        self.lineno = None
        self.path = path

    def slice(self, a, z):
        return RecordBatch(self._records[a:z], self.path)

    def info(self, rows, key):
        out = []
        for i in rows:
            v = self._records[i].info.get(key)
            if isinstance(v, tuple):
                v = v[0] if v else None
            out.append(None if v is None else str(v).encode())
        return out

    def genotypes(self, rows, cols, fields=(), fast=True):
        rows = np.asarray(rows, dtype=np.int64)
        recs = [self._records[i] for i in rows.tolist()]
        alleles, vals = _records_genotypes(recs, np.asarray(cols, np.int64), fields,
                                           [self.path])
        return GenotypeData(alleles, vals, np.zeros(rows.size, bool))


# ---------------------------------------------------------------------------- text parsing

def _parse_text(data: bytes, header: VcfHeader, path: str,
                lineno0: int | None) -> list[TextBatch]:
    """Split complete record lines (``data`` ends with a newline) into per-chromosome batches.

    ``lineno0`` is the 1-based line number of the first line (None when unknown).
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
        line = data[starts[i]:nl[i]]
        f = line.split(b"\t", 2)
        name = (f"record {f[0].decode(errors='replace')}:{f[1].decode(errors='replace')}"
                if len(f) > 2 else "record")
        ln = None if lineno is None else int(lineno[i])
        last = i == nl.size - 1
        hint = " (truncated file?)" if last and per_line[i] < ntab else ""
        raise VcfFormatError(f"{name} has {per_line[i] + 1} columns, the header has "
                             f"{ntab + 1} (9 + {len(header.samples)} samples){hint}", path, ln)
    tabs = tabs.reshape(nl.size, ntab)
    pos, good = _parse_pos(buf, tabs[:, 0] + 1, tabs[:, 1] - tabs[:, 0] - 1)
    if not good.all():
        i = int(np.flatnonzero(~good)[0])
        v = data[int(tabs[i, 0]) + 1:int(tabs[i, 1])]
        raise VcfFormatError(f"POS {v.decode(errors='replace')!r} is not a positive integer",
                             path, None if lineno is None else int(lineno[i]))
    c0 = data[int(starts[0]):int(tabs[0, 0])]
    clen = tabs[:, 0] - starts
    same = bool(np.all(clen == len(c0)))
    if same and len(c0):
        idx = starts[:, None] + np.arange(len(c0))
        same = bool(np.all(buf.take(idx) == np.frombuffer(c0, np.uint8)))
    if same:
        return [TextBatch(data, buf, tabs, nl, starts, c0.decode(errors="replace"), pos,
                          lineno, header, path)]
    chroms = [data[a:b] for a, b in zip(starts.tolist(), tabs[:, 0].tolist())]
    cut = [0] + [i for i in range(1, len(chroms)) if chroms[i] != chroms[i - 1]] + [len(chroms)]
    out = []
    for a, b in zip(cut[:-1], cut[1:]):
        out.append(TextBatch(data, buf, tabs[a:b], nl[a:b], starts[a:b],
                             chroms[a].decode(errors="replace"),
                             pos[a:b], None if lineno is None else lineno[a:b], header, path))
    return out


def _parse_pos(buf: np.ndarray, s: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """POS columns ``buf[s:s+w]`` as int64; ``good`` False unless 1-18 digits, > 0."""
    wmax = int(w.max()) if w.size else 0
    val = np.zeros(s.shape, np.int64)
    good = (w >= 1) & (w <= 18)
    for j in range(min(wmax, 18)):
        d = buf[j:].take(s) - np.uint8(48)
        inr = w > j
        good &= (d <= 9) | ~inr
        val = np.where(inr, val * 10 + d, val)
    return val, good & (val > 0)


def _read_header(fh, path: str, chunk: int) -> tuple[VcfHeader, bytes]:
    """Read the header from a binary stream; returns it and the bytes after it."""
    buf = b""
    while True:
        k = 0 if buf.startswith(b"#CHROM") else buf.find(b"\n#CHROM")
        if k >= 0:
            e = buf.find(b"\n", k + 1)
            if e >= 0:
                text = buf[:e + 1]
                try:
                    header = parse_header(text.decode("utf-8"), path)
                except UnicodeDecodeError:
                    raise VcfFormatError("the header is not UTF-8 text (not a VCF?)",
                                         path) from None
                return header, buf[e + 1:]
        more = _read(fh, chunk, path)
        if not more:
            if not buf:
                raise VcfFormatError("empty file (no VCF header)", path)
            if not buf.startswith(b"##fileformat=VCF"):
                raise VcfFormatError("not a VCF file (the first line must be "
                                     "##fileformat=VCFv4.x)", path, 1)
            raise VcfFormatError("no #CHROM header line (truncated file, or not a VCF)", path)
        buf += more
        if len(buf) >= 16 and not buf.startswith(b"##"):
            raise VcfFormatError("not a VCF file (the first line must be "
                                 "##fileformat=VCFv4.x)", path, 1)


def _read(fh, n: int, path: str) -> bytes:
    try:
        with _quiet_htslib():
            return fh.read(n)
    except (OSError, EOFError, zlib.error) as err:
        raise VcfFormatError(f"cannot decompress the file ({err}); it is truncated or "
                             "corrupt", path) from None


def _line_blocks(fh, first: bytes, path: str, chunk: int) -> Iterator[bytes]:
    """Blocks of complete lines from a binary stream (a final line gets its newline)."""
    carry = first
    while True:
        more = _read(fh, chunk, path)
        if not more:
            if carry:
                yield carry if carry.endswith(b"\n") else carry + b"\n"
            return
        data = carry + more
        cut = data.rfind(b"\n") + 1
        if cut == 0:
            carry = data
            continue
        carry = data[cut:]
        yield data[:cut]



# ---------------------------------------------------------------------------- inflating

class _Libdeflate:
    """The system's libdeflate (the inflater Debian's own htslib is built with), if any."""

    _lib = None
    _tried = False

    @classmethod
    def get(cls):
        if os.environ.get("DRIFTBAND_INFLATE", "").lower() == "htslib":
            return None
        if not cls._tried:
            cls._tried = True
            import ctypes.util

            name = ctypes.util.find_library("deflate")
            try:
                lib = ctypes.CDLL(name or "libdeflate.so.0")
                lib.libdeflate_alloc_decompressor.restype = ctypes.c_void_p
                lib.libdeflate_deflate_decompress.argtypes = [
                    ctypes.c_void_p, ctypes.c_void_p, ctypes.c_size_t, ctypes.c_void_p,
                    ctypes.c_size_t, ctypes.POINTER(ctypes.c_size_t)]
                lib.libdeflate_deflate_decompress.restype = ctypes.c_int
                lib.libdeflate_crc32.argtypes = [ctypes.c_uint32, ctypes.c_void_p,
                                                 ctypes.c_size_t]
                lib.libdeflate_crc32.restype = ctypes.c_uint32
                cls._lib = (lib, lib.libdeflate_alloc_decompressor())
            except (OSError, AttributeError):
                cls._lib = None
        return cls._lib


class _DeflateBGZF:
    """Sequential BGZF reading with libdeflate; ``seek`` takes htslib virtual offsets
    (``TabixFile.tell()``), so htslib still opens, indexes and seeks."""

    def __init__(self, path: str, lib) -> None:
        self._fh = open(path, "rb")
        self._lib, self._dec = lib
        self._cbuf = b""
        self._skip = 0

    def seek(self, voffset: int) -> None:
        self._fh.seek(voffset >> 16)
        self._cbuf = b""
        self._skip = voffset & 0xFFFF

    def _blocks(self, want: int) -> list[tuple[int, int, int, int]]:
        """Whole blocks of the compressed buffer: (data offset, data length, isize, crc)."""
        out, off, total = [], 0, 0
        cb = self._cbuf
        while total < want:
            if len(cb) - off < 18 or len(cb) - off < int.from_bytes(cb[off + 16:off + 18],
                                                                    "little") + 1:
                more = self._fh.read(max(1 << 20, want // 2))
                if not more:
                    if off < len(cb):
                        raise OSError("truncated BGZF block")
                    break
                cb = cb + more   # keep the offsets of the blocks found so far
                self._cbuf = cb
                continue
            if cb[off:off + 4] != b"\x1f\x8b\x08\x04" or cb[off + 12:off + 14] != b"BC":
                raise OSError("not a BGZF block")
            xlen = int.from_bytes(cb[off + 10:off + 12], "little")
            bsize = int.from_bytes(cb[off + 16:off + 18], "little") + 1
            crc = int.from_bytes(cb[off + bsize - 8:off + bsize - 4], "little")
            isize = int.from_bytes(cb[off + bsize - 4:off + bsize], "little")
            out.append((off + 12 + xlen, bsize - 20 - xlen, isize, crc))
            total += isize
            off += bsize
        self._consumed = off
        return out

    def read(self, n: int) -> bytes:
        import ctypes

        blocks = self._blocks(n + self._skip)
        if not blocks:
            return b""
        total = sum(b[2] for b in blocks)
        out = bytearray(total)
        dst = ctypes.addressof((ctypes.c_char * max(total, 1)).from_buffer(out)) if total \
            else 0
        src = ctypes.cast(ctypes.c_char_p(self._cbuf), ctypes.c_void_p).value
        got = ctypes.c_size_t()
        pos = 0
        for off, clen, isize, crc in blocks:
            if isize:
                r = self._lib.libdeflate_deflate_decompress(self._dec, src + off, clen,
                                                            dst + pos, isize,
                                                            ctypes.byref(got))
                if r != 0 or got.value != isize or \
                        self._lib.libdeflate_crc32(0, dst + pos, isize) != crc:
                    raise OSError("corrupt BGZF block (inflate or CRC check failed)")
            pos += isize
        self._cbuf = self._cbuf[self._consumed:]
        data = bytes(out)
        if self._skip:
            data, self._skip = data[self._skip:], 0
        return data

    def close(self) -> None:
        self._fh.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _open_bgzf(path: str):
    """A BGZF reader: libdeflate when available (faster), else htslib's (pysam)."""
    lib = _Libdeflate.get()
    if lib is not None:
        return _DeflateBGZF(path, lib)
    return _QuietClose(libcbgzf.BGZFile(path))


# ---------------------------------------------------------------------------- sources

def _sniff(path: str) -> tuple[str, bytes]:
    """Kind of a file: 'bcf', 'bgzf', 'gzip' or 'plain', and its first bytes.

    A BGZF file must end with the BGZF end-of-file block (else it is truncated).
    """
    with open(path, "rb") as fh:
        head = fh.read(18)
    if head[:2] == b"\x1f\x8b":
        is_bgzf = len(head) >= 16 and bool(head[3] & 4) and head[12:14] == b"BC"
        if is_bgzf:
            _check_eof(path)
        try:
            with gzip.open(path, "rb") as gz:
                inner = gz.read(5)
        except (OSError, EOFError, zlib.error) as err:
            raise VcfFormatError(f"cannot decompress the file ({err}); it is truncated or "
                                 "corrupt", path) from None
        if inner.startswith(b"BCF"):
            return "bcf", inner
        return ("bgzf" if is_bgzf else "gzip"), inner
    if head.startswith(b"BCF"):
        return "bcf", head
    return "plain", head


def _check_eof(path: str) -> None:
    with open(path, "rb") as fh:
        fh.seek(0, os.SEEK_END)
        size = fh.tell()
        fh.seek(max(0, size - len(BGZF_EOF)))
        tail = fh.read()
    if tail != BGZF_EOF:
        raise VcfFormatError("the file is truncated (no BGZF end-of-file block); was it "
                             "copied or written completely?", path)


class VcfSource:
    """An open VCF or BCF: its kind, header, index and readers.

    Parameters
    ----------
    path : str or path-like
        A file, or ``-`` for standard input.

    Attributes
    ----------
    path : str
    kind : {"bgzf", "gzip", "plain", "bcf"}
    stdin : bool
    index_path : str or None
        The ``.tbi``/``.csi`` index, when there is one (random access is then possible).
    header : VcfHeader
    index_chroms : list of str
        Chromosomes with records, from the index (empty without one).

    Raises
    ------
    InputError
        Missing file, stale index, truncated BGZF, or a header that is not VCF.
    """

    def __init__(self, path: str | os.PathLike) -> None:
        self.path = os.fspath(path)
        self.stdin = self.path == "-"
        self.index_path: str | None = None
        self.index_chroms: list[str] = []
        self._tabix = None
        self._bgzf = None
        self._spool: tempfile.TemporaryDirectory | None = None
        self._stream_fh = None
        self._stream_rest = b""
        if self.stdin:
            self._open_stdin()
            return
        if not os.path.exists(self.path):
            raise InputError("VCF file not found", self.path)
        if os.path.isdir(self.path):
            raise InputError("is a directory, not a VCF file", self.path)
        self.kind, _ = _sniff(self.path)
        for ext in (".tbi", ".csi"):
            if os.path.exists(self.path + ext):
                self.index_path = self.path + ext
                break
        if self.index_path is not None:
            if os.path.getmtime(self.index_path) < os.path.getmtime(self.path):
                raise InputError(f"the index {self.index_path} is older than the file; "
                                 "rebuild it (tabix -f -p vcf FILE, or bcftools index -f "
                                 "FILE)", self.path)
        if self.kind == "bcf":
            self._open_bcf()
        else:
            if self.index_path is not None and self.kind != "bgzf":
                self.index_path = None  # an index is only usable with BGZF compression
            with self._open_text_stream() as fh:
                self.header, _ = _read_header(fh, self.path, BATCH_BYTES)
            if self.index_path is not None:
                try:
                    with _quiet_htslib():
                        self._tabix = pysam.TabixFile(self.path, index=self.index_path)
                except (OSError, ValueError) as err:
                    raise InputError(f"cannot read the index {self.index_path} ({err}); "
                                     "rebuild it with tabix -f -p vcf", self.path) from None
                self.index_chroms = list(self._tabix.contigs)

    # -- opening
    def _open_bcf(self, path: str | None = None) -> None:
        p = path or self.path
        self._bcf_path = p
        try:
            with _quiet_htslib():
                self._vf = pysam.VariantFile(p)
        except (OSError, ValueError) as err:
            raise VcfFormatError(f"cannot read this BCF ({err})", self.path) from None
        h = self._vf.header
        text = str(h)
        samples = list(h.samples)
        if not samples:
            raise VcfFormatError("the BCF has no sample columns (genotypes are needed)",
                                 self.path)
        contigs = list(h.contigs)
        lengths = {c: h.contigs[c].length for c in contigs if h.contigs[c].length}
        self.header = VcfHeader(samples, contigs, lengths, set(h.info.keys()),
                                set(h.formats.keys()), text, text.count("\n"))
        self.kind = "bcf"
        if path is None and self.index_path is not None:
            self.index_chroms = [c for c in contigs if self._bcf_has(c)]

    def _bcf_has(self, chrom: str) -> bool:
        try:
            with _quiet_htslib():
                next(self._vf.fetch(chrom))
            return True
        except (StopIteration, ValueError):
            return False

    def _open_stdin(self) -> None:
        raw = sys.stdin.buffer
        head = raw.peek(18)[:18] if hasattr(raw, "peek") else b""
        if head[:2] == b"\x1f\x8b":
            fh = gzip.GzipFile(fileobj=raw, mode="rb")
            self.kind = "gzip"
        else:
            fh = raw
            self.kind = "plain"
        first = _read(fh, 5, "-")
        if first.startswith(b"BCF"):
            # htslib needs a file for BCF: spool standard input to a temporary one.
            self._spool = tempfile.TemporaryDirectory(prefix="driftband-stdin-")
            p = os.path.join(self._spool.name, "stdin.bcf")
            with open(p, "wb") as out:
                out.write(first)
                while block := _read(fh, 1 << 22, "-"):
                    out.write(block)
            self._open_bcf(p)
            return
        self._stream_fh = fh
        self.header, self._stream_rest = _read_header(_Prefixed(first, fh), "-", BATCH_BYTES)

    def _open_text_stream(self):
        if self.kind == "plain":
            return open(self.path, "rb")
        if self.kind == "gzip":
            return gzip.open(self.path, "rb")
        return _open_bgzf(self.path)

    @property
    def indexed(self) -> bool:
        """True when records can be fetched by region."""
        return self.index_path is not None and not self.stdin

    @property
    def chroms(self) -> list[str]:
        """Chromosomes the VCF knows: ``##contig`` lines, then index names."""
        return list(dict.fromkeys([*self.header.contigs, *self.index_chroms]))

    def close(self) -> None:
        """Close the files."""
        for h in (self._tabix, self._bgzf, getattr(self, "_vf", None)):
            if h is not None:
                with contextlib.suppress(Exception):
                    h.close()
        if self._spool is not None:
            self._spool.cleanup()

    def __enter__(self) -> VcfSource:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # -- reading
    def fetch(self, chrom: str, start: int, end: int,
              batch_bytes: int = BATCH_BYTES) -> Iterator[VariantBatch]:
        """Records with ``start <= POS - 1 < end`` (0-based, half-open) on ``chrom``.

        Needs an index. Batches hold about ``batch_bytes`` of text.
        """
        if not self.indexed:
            raise ValueError(f"{self.path} has no index; read it with stream()")
        if self.kind == "bcf":
            yield from self._fetch_bcf(chrom, start, end)
            return
        if chrom not in self.index_chroms:
            return
        with _quiet_htslib():
            it = self._tabix.fetch(chrom, start, end)
            try:
                first = next(it)
            except StopIteration:
                return
            except OSError as err:
                raise VcfFormatError(f"cannot read records of {chrom} ({err})",
                                     self.path) from None
            voff = self._tabix.tell()
        if self._bgzf is None:
            self._bgzf = _open_bgzf(self.path)
        self._bgzf.seek(voff)
        last = -1
        for block in _line_blocks(self._bgzf, first.encode() + b"\n", self.path, batch_bytes):
            done = False
            for b in _parse_text(block, self.header, self.path, None):
                if b.chrom != chrom:
                    done = True
                    break
                sel = (b.pos - 1 >= start) & (b.pos - 1 < end)
                if b.pos.size and b.pos[-1] - 1 >= end:
                    done = True
                if b.pos.size and (b.pos[0] < last or np.any(np.diff(b.pos) < 0)):
                    i = int(np.flatnonzero(np.diff(np.r_[last, b.pos]) < 0)[0])
                    raise VcfFormatError(f"{b.where(i)[0]} is out of order (positions must "
                                         "increase; sort the file with bcftools sort)",
                                         self.path)
                last = int(b.pos[-1]) if b.pos.size else last
                if sel.all():
                    yield b
                elif sel.any():
                    idx = np.flatnonzero(sel)  # positions are sorted: a contiguous run
                    yield b.slice(int(idx[0]), int(idx[-1]) + 1)
            if done:
                return

    def _fetch_bcf(self, chrom, start, end):
        if chrom not in self.index_chroms:
            return
        with _quiet_htslib():
            it = self._vf.fetch(chrom, start, end)
        for b in _bcf_batches(it, self.path):
            keep = np.flatnonzero(b.pos - 1 >= start)
            if keep.size == len(b):
                yield b
            elif keep.size:
                yield b.slice(int(keep[0]), len(b))

    def stream(self, batch_bytes: int = BATCH_BYTES) -> Iterator[VariantBatch]:
        """All records in file order, in per-chromosome batches; checks the sort order.

        Raises
        ------
        VcfFormatError
            A chromosome that reappears after another, or a position that decreases.
        """
        seen: set[str] = set()
        chrom, last = None, 0
        for b in self._stream_batches(batch_bytes):
            if b.chrom != chrom:
                if b.chrom in seen:
                    name, ln = b.where(0)
                    raise VcfFormatError(f"{name}: chromosome {b.chrom} appears again after "
                                         "another one; the file is not sorted (bcftools "
                                         "sort)", b.path, ln)
                seen.add(b.chrom)
                chrom, last = b.chrom, 0
            d = np.diff(np.r_[last, b.pos])
            if np.any(d < 0):
                i = int(np.flatnonzero(d < 0)[0])
                name, ln = b.where(i)
                prev = last if i == 0 else int(b.pos[i - 1])
                raise VcfFormatError(f"{name} comes after position {prev}; the file is not "
                                     "sorted (bcftools sort)", b.path, ln)
            last = int(b.pos[-1])
            yield b

    def _stream_batches(self, batch_bytes):
        if self.kind == "bcf":
            try:
                with _quiet_htslib():
                    vf = pysam.VariantFile(self._bcf_path)  # a fresh handle: from the start
            except (OSError, ValueError) as err:
                raise VcfFormatError(f"cannot read this BCF ({err})", self.path) from None
            try:
                yield from _bcf_batches(iter(vf), self.path)
            finally:
                vf.close()
            return
        if self.stdin:
            fh, rest, close = self._stream_fh, self._stream_rest, False
        else:
            fh = self._open_text_stream()
            _, rest = _read_header(fh, self.path, batch_bytes)
            close = True
        try:
            lineno = self.header.n_lines + 1
            for block in _line_blocks(fh, rest, self.path, batch_bytes):
                batches = _parse_text(block, self.header, self.path, lineno)
                yield from batches
                if batches:
                    last = batches[-1]
                    lineno = int(last.lineno[-1]) + 1 if last.lineno is not None else lineno
        finally:
            if close:
                fh.close()


def _bcf_batches(it, path: str, n: int = 2000) -> Iterator[RecordBatch]:
    """Per-chromosome batches of up to ``n`` pysam records from a record iterator."""
    held = None
    while True:
        recs = [] if held is None else [held]
        held = None
        with _quiet_htslib():
            try:
                while len(recs) < n:
                    rec = next(it)
                    if recs and rec.chrom != recs[0].chrom:
                        held = rec
                        break
                    recs.append(rec)
            except StopIteration:
                it = None
            except OSError as err:
                raise VcfFormatError(f"cannot read the BCF ({err}); truncated or corrupt?",
                                     path) from None
        if recs:
            yield RecordBatch(recs, path)
        if it is None:
            return


class _QuietClose:
    """A BGZFile whose close() does not raise after a read error (already reported)."""

    def __init__(self, fh) -> None:
        self._fh = fh

    def read(self, n: int) -> bytes:
        return self._fh.read(n)

    def seek(self, voffset: int) -> None:
        self._fh.seek(voffset)

    def close(self) -> None:
        with contextlib.suppress(OSError), _quiet_htslib():
            self._fh.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()


class _Prefixed:
    """A read-only stream with some bytes put back in front."""

    def __init__(self, first: bytes, fh) -> None:
        self._first, self._fh = first, fh

    def read(self, n: int) -> bytes:
        if self._first:
            out, self._first = self._first, b""
            return out + self._fh.read(max(n - len(out), 0))
        return self._fh.read(n)


def open_vcf(path: str | os.PathLike) -> VcfSource:
    """Open a VCF/BCF (see :class:`VcfSource`)."""
    return VcfSource(path)
