"""Batches of VCF records, and records decoded by pysam.

:class:`VariantBatch` is what readers hand to counting code: records of one chromosome
with their fixed columns and a genotype decoder. :class:`RecordBatch` holds pysam records
(BCF input); the VCF text batches are in :mod:`.textbatch`. pysam's own decoding of GT and
integer FORMAT subfields (:func:`records_genotypes`) serves BCF input and the records the
vectorised text decoder does not handle.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pysam

from ..exceptions import VcfFormatError
from .decode import upper_codes
from .streams import quiet_htslib

__all__ = [
    "GenotypeData",
    "RecordBatch",
    "RecordParseError",
    "VariantBatch",
    "bcf_batches",
    "gt_index_problem",
    "pysam_parse",
    "records_genotypes",
]


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
    ref: list[bytes]
    alt: list[bytes]
    filt: list[bytes]
    fmt: list[bytes]
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
        return {
            "ref1": upper_codes(ref1),
            "alt1": upper_codes(alt1),
            "pass": passed,
            "aa1": np.zeros(len(self), np.uint8),
        }

    def genotypes(
        self, rows: np.ndarray, cols: np.ndarray, fields: Sequence[str] = (), fast: bool = True
    ) -> GenotypeData:
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


# ---------------------------------------------------------------------------- pysam


def _gt_tuple_to_row(gt: tuple[int | None, ...], width: int, out: np.ndarray) -> None:
    out[:] = -2
    for k, a in enumerate(gt[:width]):
        out[k] = -1 if a is None else a


def gt_index_problem(line: str, cols: Sequence[int]) -> str | None:
    r"""What is wrong with the GT allele indices of a VCF record line, or None.

    htslib reads an allele index beyond the ALT count as missing; the specification makes
    it an error, so driftband checks the text itself.

    Parameters
    ----------
    line : str
        The record line (tab-separated, GT the first FORMAT key).
    cols : sequence of int
        The sample columns used (0-based, after FORMAT).

    Returns
    -------
    str or None
        A message naming the GT and the ALT count, or None when every index is in range.

    Examples
    --------
    >>> gt_index_problem("c\t5\t.\tA\tC\t.\t.\t.\tGT\t0/12\t1/1", [0, 1])
    "GT '0/12' of sample #1 has allele index 12 but the record has 1 ALT allele(s)"
    >>> gt_index_problem("c\t5\t.\tA\tC,G\t.\t.\t.\tGT\t0/2\t./.", [0, 1]) is None
    True
    """
    f = line.rstrip("\r\n").split("\t")
    if len(f) < 10:
        return None
    n_alts = 0 if f[4] == "." else len(f[4].split(","))
    for c in cols:
        if 9 + c >= len(f):
            continue
        gt = f[9 + c].split(":", 1)[0]
        for tok in gt.replace("|", "/").split("/"):
            if tok != "." and not (tok.isascii() and tok.isdigit()):
                return (
                    f"GT {gt!r} of sample #{c + 1}: {tok!r} is not an allele index "
                    "(a number or '.')"
                )
            if tok != "." and int(tok) > n_alts:
                return (
                    f"GT {gt!r} of sample #{c + 1} has allele index {tok} but the record "
                    f"has {n_alts} ALT allele(s)"
                )
    return None


def records_genotypes(
    records: Sequence[Any], cols: np.ndarray, fields: Sequence[str], names: Sequence[str]
) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Genotypes of pysam records (the fallback, and the BCF path).

    Returns ``alleles`` (r, s, p) int8 as in :class:`GenotypeData` and the integer
    ``fields`` (r, s) int32; ``names[0]`` is the file named in messages.

    Raises
    ------
    VcfFormatError
        A record without GT, or with GT not the first FORMAT key.
    """
    r, s = len(records), len(cols)
    gts = []
    ploidy = 2
    vals = {f: np.full((r, s), -1, np.int32) for f in fields}
    for i, rec in enumerate(records):
        if "GT" not in rec.format:
            raise VcfFormatError(
                f"record {rec.chrom}:{rec.pos} has no GT field "
                f"(FORMAT {':'.join(rec.format.keys()) or '.'})",
                names[0],
            )
        smp = rec.samples
        row = []
        missing = False
        for j, c in enumerate(cols.tolist()):
            call = smp[c]
            gt = call["GT"]
            if gt == () and list(rec.format.keys())[0] != "GT":
                raise VcfFormatError(
                    f"record {rec.chrom}:{rec.pos}: GT must be the first "
                    "FORMAT key (VCF specification)",
                    names[0],
                )
            missing |= None in gt
            row.append(gt)
            ploidy = max(ploidy, len(gt))
            for f in fields:
                if f in rec.format:
                    v = call[f]
                    if isinstance(v, tuple):
                        v = v[0] if v else None
                    if v is not None:
                        vals[f][i, j] = int(v)
        if missing and (why := gt_index_problem(str(rec), cols.tolist())):
            raise VcfFormatError(f"record {rec.chrom}:{rec.pos}: {why}", names[0])
        gts.append(row)
    alleles = np.full((r, s, ploidy), -2, np.int8)
    for i, row in enumerate(gts):
        for j, gt in enumerate(row):
            _gt_tuple_to_row(gt, ploidy, alleles[i, j])
    return alleles, vals


class RecordParseError(Exception):
    """A record line htslib cannot parse; ``index`` is its place in the lines given."""

    def __init__(self, index: int, msg: str) -> None:
        super().__init__(msg)
        self.index = index


def pysam_parse(header_text: str, lines: list[bytes]) -> list[Any]:
    """Parse VCF record lines with pysam; returns the records (kept alive by a list).

    Raises
    ------
    RecordParseError
        A line htslib cannot parse.
    """
    with tempfile.TemporaryDirectory(prefix="driftband-") as d:
        p = os.path.join(d, "records.vcf")
        with open(p, "wb") as fh:
            fh.write(header_text.encode())
            if not header_text.endswith("\n"):
                fh.write(b"\n")
            for ln in lines:
                fh.write(ln + b"\n")
        out = []
        with quiet_htslib(), pysam.VariantFile(p) as vf:
            it = iter(vf)
            for i in range(len(lines)):
                try:
                    rec = next(it)
                except (OSError, ValueError, StopIteration) as err:
                    raise RecordParseError(i, str(err) or type(err).__name__) from None
                out.append(rec)
        return out


class RecordBatch(VariantBatch):
    """Records decoded by pysam (BCF input).

    Parameters
    ----------
    records : list of pysam.VariantRecord
        Records of one chromosome (at least one).
    path : str
        The file, for messages.
    """

    def __init__(self, records: list[Any], path: str) -> None:
        self._records = records
        self.chrom = records[0].chrom
        self.pos = np.fromiter((r.pos for r in records), np.int64, len(records))
        self.ref = [r.ref.encode() for r in records]
        self.alt = [",".join(r.alts).encode() if r.alts else b"." for r in records]
        self.filt = [";".join(r.filter.keys()).encode() or b"." for r in records]
        self.fmt = [":".join(r.format.keys()).encode() or b"." for r in records]
        self.lineno = None
        self.path = path

    def slice(self, a: int, z: int) -> RecordBatch:
        """Records ``a`` to ``z - 1`` as a batch of their own."""
        return RecordBatch(self._records[a:z], self.path)

    def info(self, rows: Sequence[int], key: str) -> list[bytes | None]:
        """INFO values of ``key`` (bytes, the first when several) for some records; None
        where absent."""
        out: list[bytes | None] = []
        for i in rows:
            v = self._records[i].info.get(key)
            if isinstance(v, tuple):
                v = v[0] if v else None
            out.append(None if v is None else str(v).encode())
        return out

    def genotypes(
        self, rows: np.ndarray, cols: np.ndarray, fields: Sequence[str] = (), fast: bool = True
    ) -> GenotypeData:
        """Decode the genotypes of some records with pysam (see
        :meth:`VariantBatch.genotypes`; ``fast`` has no effect here)."""
        rows = np.asarray(rows, dtype=np.int64)
        recs = [self._records[i] for i in rows.tolist()]
        alleles, vals = records_genotypes(recs, np.asarray(cols, np.int64), fields, [self.path])
        return GenotypeData(alleles, vals, np.zeros(rows.size, bool))


def bcf_batches(it: Iterator[Any], path: str, n: int = 2000) -> Iterator[RecordBatch]:
    """Per-chromosome batches of up to ``n`` pysam records from a record iterator.

    Raises
    ------
    VcfFormatError
        htslib cannot read on (a truncated or corrupt BCF).
    """
    held = None
    ended = False
    while True:
        recs: list[Any] = [] if held is None else [held]
        held = None
        with quiet_htslib():
            try:
                while len(recs) < n:
                    rec = next(it)
                    if recs and rec.chrom != recs[0].chrom:
                        held = rec
                        break
                    recs.append(rec)
            except StopIteration:
                ended = True
            except OSError as err:
                raise VcfFormatError(
                    f"cannot read the BCF ({err}); truncated or corrupt?", path
                ) from None
        if recs:
            yield RecordBatch(recs, path)
        if ended:
            return
