"""Vectorised decoding of VCF text: GT, integer FORMAT subfields (DP, GQ ...) and POS.

Each function works on the bytes of a batch of records as one uint8 array ``buf`` (padded
with NULs at the end, so that reading a few bytes past a field stays inside it) and on
arrays of field start and end offsets, and decodes every sample field of thousands of
records in a few numpy passes (the *fast path*). What it cannot decode (polyploid or
multi-digit GT, odd values) is flagged, never guessed: the caller decodes those records
with pysam instead.

Allele indices are int8: ``-1`` a missing copy (``.``), ``-2`` no such copy (a haploid call
in a diploid-width array). No file reading here.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import cast

import numpy as np

__all__ = [
    "count_gt_alleles",
    "decode_gt",
    "decode_int",
    "parse_pos",
    "parse_uint",
    "scan_uint",
    "upper_codes",
]

_LUT_ALLELE = np.full(256, -100, np.int8)  # digit -> allele index, '.' -> -1
_LUT_ALLELE[48:58] = np.arange(10)
_LUT_ALLELE[46] = -1
_LUT_END = np.zeros(256, bool)  # bytes that end a subfield
_LUT_END[[58, 9, 10, 0]] = True


_LUT_COUNT = np.zeros(256, np.uint8)  # bit 0: allele 1, bit 1: called 0/1, bit 2: valid
_LUT_COUNT[48] = 6
_LUT_COUNT[49] = 7
_LUT_COUNT[46] = 4
_LUT_SEP = np.full(256, 2, np.int8)  # 0: '/' or '|', 1: end of the GT subfield
_LUT_SEP[[47, 124]] = 0
_LUT_SEP[[58, 9, 10, 0]] = 1


def upper_codes(c: np.ndarray) -> np.ndarray:
    """ASCII upper case of byte codes (uint8)."""
    return np.where((c >= 97) & (c <= 122), c - 32, c).astype(np.uint8)


def decode_gt(
    buf: np.ndarray, p: np.ndarray, e: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Vectorised GT decoding of sample fields ``buf[p:e]`` (GT first), shape (r, s).

    Handles haploid and diploid calls with single-digit allele indices and ``.``; returns
    ``alleles`` (r, s, 2) int8, ``ok`` (r,) bool for the records fully handled, and
    ``hap`` (r, s) bool, True where the GT has one character (haploid or ``.``).
    """
    a0 = _LUT_ALLELE.take(buf.take(p))
    sep = _LUT_SEP.take(buf[1:].take(p))  # shifted views: no index arithmetic
    a2 = _LUT_ALLELE.take(buf[2:].take(p))
    hap = sep == 1
    ok = (a0 > -100) & (hap | ((sep == 0) & _LUT_END.take(buf[3:].take(p)) & (a2 > -100)))
    alleles = np.empty(p.shape + (2,), np.int8)
    alleles[..., 0] = a0
    alleles[..., 1] = np.where(hap, np.int8(-2), a2)
    return alleles, ok.all(axis=1), hap


def count_gt_alleles(buf: np.ndarray, t: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Copies of allele 1 and called copies (alleles 0 or 1) of the GTs after the tabs
    ``t`` (r, s) (sample fields that start with GT).

    Returns ``alt``, ``called`` (r, s) int8 and ``ok`` (r,) bool: False for a record with
    another allele index, ploidy or an odd GT (its counts are not to be used).
    """
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


def parse_uint(buf: np.ndarray, s: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
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


def scan_uint(
    buf: np.ndarray, s: np.ndarray, e: np.ndarray
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
        w = D0.view(np.uint8) * (1 + D1.view(np.uint8) * (1 + D2.view(np.uint8)))
        v16 = np.where(
            w == 3,
            d0.astype(np.int16) * 100 + d1.astype(np.int16) * 10 + d2,
            np.where(w == 2, d0.astype(np.int16) * 10 + d1, d0),
        )
        dot = present & (w == 0) & (b0 == 46)
        wd = w + dot.view(np.uint8)  # '.' takes one character
        end = np.where(
            wd == 0,
            _LUT_END.take(b0),
            np.where(
                wd == 1, _LUT_END.take(b1), np.where(wd == 2, _LUT_END.take(b2), _LUT_END.take(b3))
            ),
        )
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


def decode_int(
    buf: np.ndarray,
    p: np.ndarray,
    e: np.ndarray,
    k: int,
    nkeys: int,
    base: np.ndarray | None,
    colpos: np.ndarray,
    cc_fn: Callable[[], np.ndarray],
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
    if base is None:
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
    val, good = parse_uint(buf, s, w)
    return val, cast(np.ndarray, good.all(axis=1))


def parse_pos(buf: np.ndarray, s: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
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
