"""VCF headers: sample names, ``##contig`` names and lengths, declared INFO and FORMAT IDs,
read from the text of a VCF or from a BCF's header (pysam)."""

from __future__ import annotations

import re
from dataclasses import dataclass

import pysam

from ..exceptions import VcfFormatError
from .streams import ByteReader, read_bytes

__all__ = ["VcfHeader", "header_from_pysam", "parse_header", "read_header"]


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
_BOM = (
    "the file starts with a byte-order mark (BOM, bytes EF BB BF) before ##fileformat; "
    "VCF allows none: save it without one (e.g. sed -i '1s/^\\xEF\\xBB\\xBF//' FILE)"
)
_LEN = re.compile(r"[<,]length=(\d+)")


def parse_header(text: str, path: str) -> VcfHeader:
    """Parse the header text of a VCF (``##`` lines and the ``#CHROM`` line).

    Raises
    ------
    VcfFormatError
        No ``##fileformat=VCF`` line, no ``#CHROM`` line, or no sample columns.
    """
    if text.startswith("\ufeff"):
        raise VcfFormatError(_BOM, path, 1)
    lines = text.splitlines()
    if not lines or not lines[0].startswith("##fileformat=VCF"):
        raise VcfFormatError(
            "not a VCF file (the first line must be ##fileformat=VCFv4.x)", path, 1
        )
    contigs: list[str] = []
    lengths: dict[str, int] = {}
    info: set[str] = set()
    formats: set[str] = set()
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
            raise VcfFormatError(
                "header line does not start with ## (or the #CHROM line is missing)", path, ln
            )
    if chrom_line is None:
        raise VcfFormatError("no #CHROM header line (truncated file, or not a VCF)", path)
    ln, line = chrom_line
    cols = line.rstrip("\r").split("\t")
    if len(cols) < 10 or cols[8] != "FORMAT":
        raise VcfFormatError(
            "the VCF has no sample columns (a FORMAT column and at least "
            "one sample are needed for spectra)",
            path,
            ln,
        )
    return VcfHeader(cols[9:], contigs, lengths, info, formats, text, len(lines))


def read_header(fh: ByteReader, path: str, chunk: int) -> tuple[VcfHeader, bytes]:
    """Read the header from a binary stream, ``chunk`` bytes at a time.

    Returns
    -------
    header : VcfHeader
    rest : bytes
        The bytes read after the header (the start of the records).

    Raises
    ------
    VcfFormatError
        An empty file, a file that is not VCF, a header that is not UTF-8 or has no
        ``#CHROM`` line (see also :func:`parse_header`).
    """
    buf = b""
    while True:
        k = 0 if buf.startswith(b"#CHROM") else buf.find(b"\n#CHROM")
        if k >= 0:
            e = buf.find(b"\n", k + 1)
            if e >= 0:
                text = buf[: e + 1]
                try:
                    header = parse_header(text.decode("utf-8"), path)
                except UnicodeDecodeError:
                    raise VcfFormatError(
                        "the header is not UTF-8 text (not a VCF?)", path
                    ) from None
                return header, buf[e + 1 :]
        more = read_bytes(fh, chunk, path)
        if not more:
            if not buf:
                raise VcfFormatError("empty file (no VCF header)", path)
            if not buf.startswith(b"##fileformat=VCF"):
                raise VcfFormatError(
                    "not a VCF file (the first line must be ##fileformat=VCFv4.x)", path, 1
                )
            raise VcfFormatError("no #CHROM header line (truncated file, or not a VCF)", path)
        buf += more
        if buf.startswith(b"\xef\xbb\xbf"):
            raise VcfFormatError(_BOM, path, 1)
        if len(buf) >= 16 and not buf.startswith(b"##"):
            raise VcfFormatError(
                "not a VCF file (the first line must be ##fileformat=VCFv4.x)", path, 1
            )


def header_from_pysam(h: pysam.VariantHeader, path: str) -> VcfHeader:
    """The header of a BCF opened by pysam (``pysam.VariantFile(...).header``).

    Raises
    ------
    VcfFormatError
        The BCF has no sample columns.
    """
    text = str(h)
    samples = [str(s) for s in h.samples]
    if not samples:
        raise VcfFormatError("the BCF has no sample columns (genotypes are needed)", path)
    contigs = [str(c) for c in h.contigs]
    lengths: dict[str, int] = {}
    for c in contigs:
        if n := h.contigs[c].length:
            lengths[c] = n
    return VcfHeader(
        samples, contigs, lengths, set(h.info.keys()), set(h.formats.keys()), text, text.count("\n")
    )
