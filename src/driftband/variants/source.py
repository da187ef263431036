"""Opening VCF and BCF files: the kind of input, its header and index, and reading records
region by region or as one stream, in per-chromosome batches.

Accepted inputs: bgzipped VCF with a tabix (``.tbi``) or CSI (``.csi``) index, read region
by region; bgzipped or gzipped VCF without an index, plain VCF and ``-`` (standard input,
plain or compressed), read as one stream; BCF (indexed or not, also on standard input)
through pysam's record objects (:class:`.batches.RecordBatch`). VCF Zarr stores are read
by :mod:`.vcz`; :func:`open_variants` opens either kind.

For bgzipped VCF, htslib (pysam's ``TabixFile``) reads the index and finds the first record
of a region; the BGZF blocks are then read and inflated by :mod:`.bgzf` (with libdeflate
when the system has it, else with htslib's BGZF reader). gzip files and standard input are
inflated by Python's :mod:`gzip`. The text is split into batches of about
:data:`BATCH_BYTES` (:mod:`.textbatch`) and decoded vectorised (:mod:`.decode`).
No model code here.
"""

from __future__ import annotations

import contextlib
import gzip
import io
import os
import sys
import tempfile
import zlib
from collections.abc import Iterator

import numpy as np
import pysam

from .._io import add_inputs
from ..exceptions import InputError, VcfFormatError
from .batches import VariantBatch, bcf_batches
from .bgzf import DeflateBGZF, QuietBGZFile, check_bgzf_eof, open_bgzf
from .header import header_from_pysam, read_header
from .streams import ByteReader, Prefixed, line_blocks, quiet_htslib, read_bytes
from .textbatch import split_text
from .vcz import VczSource, is_vcz

__all__ = ["BATCH_BYTES", "VariantSource", "VcfSource", "open_variants", "open_vcf"]

BATCH_BYTES = 1 << 20
"""Bytes of VCF text read and decoded together (about; whole lines)."""


def _sniff(path: str) -> tuple[str, bytes]:
    """Kind of a file: 'bcf', 'bgzf', 'gzip' or 'plain', and its first bytes.

    A BGZF file must end with the BGZF end-of-file block (else it is truncated).
    """
    with open(path, "rb") as fh:
        head = fh.read(18)
    if head[:2] == b"\x1f\x8b":
        is_bgzf = len(head) >= 16 and bool(head[3] & 4) and head[12:14] == b"BC"
        if is_bgzf:
            check_bgzf_eof(path)
        try:
            with gzip.open(path, "rb") as gz:
                inner = gz.read(5)
        except (OSError, EOFError, zlib.error) as err:
            raise VcfFormatError(
                f"cannot decompress the file ({err}); it is truncated or corrupt", path
            ) from None
        if inner.startswith(b"BCF"):
            return "bcf", inner
        return ("bgzf" if is_bgzf else "gzip"), inner
    if head.startswith(b"BCF"):
        return "bcf", head
    return "plain", head


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
        self._tabix: pysam.TabixFile | None = None
        self._bgzf: DeflateBGZF | QuietBGZFile | None = None
        self._spool: tempfile.TemporaryDirectory[str] | None = None
        self._stream_fh: ByteReader | None = None
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
                add_inputs(self.index_path)
                break
        if self.index_path is not None:
            if os.path.getmtime(self.index_path) < os.path.getmtime(self.path):
                raise InputError(
                    f"the index {self.index_path} is older than the file; "
                    "rebuild it (tabix -f -p vcf FILE, or bcftools index -f "
                    "FILE)",
                    self.path,
                )
        if self.kind == "bcf":
            self._open_bcf()
        else:
            if self.index_path is not None and self.kind != "bgzf":
                self.index_path = None  # an index is only usable with BGZF compression
            with self._open_text_stream() as fh:
                self.header, _ = read_header(fh, self.path, BATCH_BYTES)
            if self.index_path is not None:
                try:
                    with quiet_htslib():
                        self._tabix = pysam.TabixFile(self.path, index=self.index_path)
                except (OSError, ValueError) as err:
                    raise InputError(
                        f"cannot read the index {self.index_path} ({err}); "
                        "rebuild it with tabix -f -p vcf",
                        self.path,
                    ) from None
                self.index_chroms = list(self._tabix.contigs)

    # -- opening
    def _open_bcf(self, path: str | None = None) -> None:
        p = path or self.path
        self._bcf_path = p
        try:
            with quiet_htslib():
                self._vf = pysam.VariantFile(p)
        except (OSError, ValueError) as err:
            raise VcfFormatError(f"cannot read this BCF ({err})", self.path) from None
        self.header = header_from_pysam(self._vf.header, self.path)
        self.kind = "bcf"
        if path is None and self.index_path is not None:
            self.index_chroms = [c for c in self.header.contigs if self._bcf_has(c)]

    def _bcf_has(self, chrom: str) -> bool:
        try:
            with quiet_htslib():
                next(self._vf.fetch(chrom))
            return True
        except (StopIteration, ValueError):
            return False

    def _open_stdin(self) -> None:
        raw = sys.stdin.buffer
        head = raw.peek(18)[:18] if hasattr(raw, "peek") else b""
        fh: ByteReader
        if head[:2] == b"\x1f\x8b":
            fh = gzip.GzipFile(fileobj=raw, mode="rb")
            self.kind = "gzip"
        else:
            fh = raw
            self.kind = "plain"
        first = read_bytes(fh, 5, "-")
        if first.startswith(b"BCF"):
            # htslib needs a file for BCF: spool standard input to a temporary one.
            self._spool = tempfile.TemporaryDirectory(prefix="driftband-stdin-")
            p = os.path.join(self._spool.name, "stdin.bcf")
            with open(p, "wb") as out:
                out.write(first)
                while block := read_bytes(fh, 1 << 22, "-"):
                    out.write(block)
            self._open_bcf(p)
            return
        self._stream_fh = fh
        self.header, self._stream_rest = read_header(Prefixed(first, fh), "-", BATCH_BYTES)

    def _open_text_stream(self) -> io.BufferedReader | gzip.GzipFile | DeflateBGZF | QuietBGZFile:
        if self.kind == "plain":
            return open(self.path, "rb")
        if self.kind == "gzip":
            return gzip.open(self.path, "rb")
        return open_bgzf(self.path)

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

    def __exit__(self, *exc: object) -> None:
        self.close()

    # -- reading
    def fetch(
        self, chrom: str, start: int, end: int, batch_bytes: int = BATCH_BYTES
    ) -> Iterator[VariantBatch]:
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
        assert self._tabix is not None  # opened with the index
        with quiet_htslib():
            try:
                it = self._tabix.fetch(chrom, start, end)
                first = next(it)
            except StopIteration:
                return
            except (OSError, ValueError) as err:
                raise self._index_mismatch(chrom, str(err)) from None
            if first.split("\t", 1)[0] != chrom:
                raise self._index_mismatch(chrom, "it points at a record of another chromosome")
            voff = self._tabix.tell()
        if self._bgzf is None:
            self._bgzf = open_bgzf(self.path)
        self._bgzf.seek(voff)
        last = -1
        for block in line_blocks(self._bgzf, first.encode() + b"\n", self.path, batch_bytes):
            done = False
            for b in split_text(block, self.header, self.path, None):
                if b.chrom != chrom:
                    done = True
                    break
                sel = (b.pos - 1 >= start) & (b.pos - 1 < end)
                if b.pos.size and b.pos[-1] - 1 >= end:
                    done = True
                if b.pos.size and (b.pos[0] < last or np.any(np.diff(b.pos) < 0)):
                    i = int(np.flatnonzero(np.diff(np.r_[last, b.pos]) < 0)[0])
                    raise VcfFormatError(
                        f"{b.where(i)[0]} is out of order (positions must "
                        "increase; sort the file with bcftools sort)",
                        self.path,
                    )
                last = int(b.pos[-1]) if b.pos.size else last
                if sel.all():
                    yield b
                elif sel.any():
                    idx = np.flatnonzero(sel)  # positions are sorted: a contiguous run
                    yield b.slice(int(idx[0]), int(idx[-1]) + 1)
            if done:
                return

    def _fetch_bcf(self, chrom: str, start: int, end: int) -> Iterator[VariantBatch]:
        if chrom not in self.index_chroms:
            return
        try:
            with quiet_htslib():
                it = self._vf.fetch(chrom, start, end)
            for b in bcf_batches(it, self.path):
                keep = np.flatnonzero(b.pos - 1 >= start)
                if keep.size == len(b):
                    yield b
                elif keep.size:
                    yield b.slice(int(keep[0]), len(b))
        except (OSError, ValueError) as err:
            raise self._index_mismatch(chrom, str(err)) from None

    def _index_mismatch(self, chrom: str, why: str) -> VcfFormatError:
        """The error for an index that cannot be used with this file."""
        return VcfFormatError(
            f"the index {self.index_path} does not fit this file (reading {chrom}: {why}); "
            "it may belong to another file: rebuild it (tabix -f -p vcf FILE, or "
            "bcftools index -f FILE)",
            self.path,
        )

    def stream(self, batch_bytes: int = BATCH_BYTES) -> Iterator[VariantBatch]:
        """All records in file order, in per-chromosome batches; checks the sort order.

        Raises
        ------
        VcfFormatError
            A chromosome that reappears after another, or a position that decreases.
        """
        seen: set[str] = set()
        chrom: str | None = None
        last = 0
        for b in self._stream_batches(batch_bytes):
            if b.chrom != chrom:
                if b.chrom in seen:
                    name, ln = b.where(0)
                    raise VcfFormatError(
                        f"{name}: chromosome {b.chrom} appears again after "
                        "another one; the file is not sorted (bcftools "
                        "sort)",
                        b.path,
                        ln,
                    )
                seen.add(b.chrom)
                chrom, last = b.chrom, 0
            d = np.diff(np.r_[last, b.pos])
            if np.any(d < 0):
                i = int(np.flatnonzero(d < 0)[0])
                name, ln = b.where(i)
                prev = last if i == 0 else int(b.pos[i - 1])
                raise VcfFormatError(
                    f"{name} comes after position {prev}; the file is not sorted (bcftools sort)",
                    b.path,
                    ln,
                )
            last = int(b.pos[-1])
            yield b

    def _stream_batches(self, batch_bytes: int) -> Iterator[VariantBatch]:
        if self.kind == "bcf":
            try:
                with quiet_htslib():
                    vf = pysam.VariantFile(self._bcf_path)  # a fresh handle: from the start
            except (OSError, ValueError) as err:
                raise VcfFormatError(f"cannot read this BCF ({err})", self.path) from None
            try:
                yield from bcf_batches(iter(vf), self.path)
            finally:
                vf.close()
            return
        opened = None
        fh: ByteReader
        if self.stdin:
            assert self._stream_fh is not None  # text on standard input: set when opened
            fh, rest = self._stream_fh, self._stream_rest
        else:
            fh = opened = self._open_text_stream()
            _, rest = read_header(fh, self.path, batch_bytes)
        try:
            lineno = self.header.n_lines + 1
            for block in line_blocks(fh, rest, self.path, batch_bytes):
                batches = split_text(block, self.header, self.path, lineno)
                yield from batches
                if batches:
                    last = batches[-1]
                    lineno = int(last.lineno[-1]) + 1 if last.lineno is not None else lineno
        finally:
            if opened is not None:
                opened.close()


def open_vcf(path: str | os.PathLike) -> VcfSource:
    """Open a VCF/BCF (see :class:`VcfSource`)."""
    return VcfSource(path)


VariantSource = VcfSource | VczSource
"""An open input of variant calls: a VCF/BCF or a VCF Zarr store."""


def open_variants(path: str | os.PathLike) -> VariantSource:
    """Open variant calls: a VCF Zarr store (a directory or a zip file, see
    :class:`.vcz.VczSource`), else a VCF/BCF (:class:`VcfSource`)."""
    if os.fspath(path) != "-" and is_vcz(path):
        return VczSource(path)
    return VcfSource(path)
