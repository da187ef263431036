"""Reference FASTA files: opened through pysam, indexed on first use, checked.

A plain or bgzip-compressed FASTA is opened with :class:`pysam.FastaFile`; a missing
``.fai`` (and ``.gzi``) is made beside it. A gzip file that is not BGZF, an unwritable
folder for the index, unequal line lengths or no sequence at all are refused with one line
naming the file and the fix.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from typing import TYPE_CHECKING

from .._io import add_inputs
from ..exceptions import InputError

if TYPE_CHECKING:
    import pysam

__all__ = ["open_fasta"]


def _is_bgzf(head: bytes) -> bool:
    # BGZF: a gzip member with the FEXTRA flag and a 'BC' extra subfield (SAM spec 4.1).
    return (
        len(head) >= 14 and head[:2] == b"\x1f\x8b" and bool(head[3] & 4) and head[12:14] == b"BC"
    )


def open_fasta(path: str | os.PathLike) -> pysam.FastaFile:
    """Open a reference FASTA with pysam, creating its ``.fai`` (and ``.gzi``) if absent.

    Parameters
    ----------
    path : path-like
        Plain FASTA, or bgzip-compressed FASTA.

    Returns
    -------
    pysam.FastaFile

    Raises
    ------
    InputError
        If the file is missing, gzip- but not bgzip-compressed, or has no index and cannot
        be indexed (unwritable folder, unequal line lengths, duplicate names, ...).
    """
    import pysam

    p = os.fspath(path)
    if not os.path.isfile(p):
        raise InputError("file not found", p)
    with open(p, "rb") as fh:
        head = fh.read(18)
    if head[:2] == b"\x1f\x8b" and not _is_bgzf(head):
        raise InputError(
            "FASTA is gzip-compressed but not with bgzip, so it cannot be "
            "indexed; recompress it with 'zcat FILE | bgzip > FILE.bgz' or "
            "decompress it",
            p,
        )
    need = [p + ".fai"] + ([p + ".gzi"] if head[:2] == b"\x1f\x8b" else [])
    if not all(os.path.exists(x) for x in need):
        folder = os.path.dirname(os.path.abspath(p))
        if not os.access(folder, os.W_OK):
            raise InputError(
                f"FASTA has no index ({', '.join(os.path.basename(x) for x in need)})"
                f" and its folder {folder} is not writable; index it where it "
                "can be written or copy the FASTA to a writable folder",
                p,
            )
    old = pysam.set_verbosity(0)  # keep htslib's own messages off stderr
    try:
        fa = pysam.FastaFile(p)
    except (OSError, ValueError) as err:
        raise InputError(
            f"cannot be read or indexed as FASTA ({err}); check that it is "
            "FASTA with equal-length lines within each record and unique "
            "names",
            p,
        ) from None
    finally:
        pysam.set_verbosity(old)
    add_inputs(*(x for x in (p + ".fai", p + ".gzi") if os.path.exists(x)))
    if fa.nreferences == 0:
        fa.close()
        raise InputError("FASTA holds no sequences", p)
    if _count_records(p, head[:2] == b"\x1f\x8b") != fa.nreferences:
        fa.close()
        name, line = _first_duplicate(p, head[:2] == b"\x1f\x8b")
        raise InputError(
            f"sequence {name!r} appears twice (its name is also on an earlier line); "
            "every sequence name must be unique",
            p,
            line,
        )
    return fa


def _chunks(path: str, gz: bool) -> Iterator[bytes]:
    import gzip

    with gzip.open(path, "rb") if gz else open(path, "rb") as fh:
        while block := fh.read(1 << 24):
            yield block


def _count_records(path: str, gz: bool) -> int:
    """The number of ``>`` header lines (one fast pass; htslib ignores repeated names)."""
    n, prev = 0, b"\n"
    for block in _chunks(path, gz):
        n += block.count(b"\n>") + (prev == b"\n" and block[:1] == b">")
        prev = block[-1:]
    return n


def _first_duplicate(path: str, gz: bool) -> tuple[str, int | None]:
    """The first sequence name seen twice and the line of its second header."""
    seen: set[str] = set()
    for ln, line in enumerate(b"".join(_chunks(path, gz)).split(b"\n"), start=1):
        if line.startswith(b">"):
            name = line[1:].split(None, 1)[0].decode("utf-8", "replace") if line[1:] else ""
            if name in seen:
                return name, ln
            seen.add(name)
    return "?", None
