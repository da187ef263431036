"""Byte streams of VCF text: reads that report a corrupt file as bad input, blocks of
complete lines, bytes put back in front of a stream, and htslib kept quiet while reading."""

from __future__ import annotations

import contextlib
import zlib
from collections.abc import Iterator
from typing import Protocol

import pysam

from ..exceptions import VcfFormatError

__all__ = ["ByteReader", "Prefixed", "line_blocks", "quiet_htslib", "read_bytes"]


class ByteReader(Protocol):
    """Anything with ``read(n) -> bytes`` (files, gzip and BGZF readers, standard input)."""

    def read(self, n: int, /) -> bytes:
        """Up to ``n`` bytes; empty at the end."""
        ...


@contextlib.contextmanager
def quiet_htslib() -> Iterator[None]:
    """Silence htslib's own stderr messages (errors are reported by driftband)."""
    old = pysam.set_verbosity(0)
    try:
        yield
    finally:
        pysam.set_verbosity(old)


def read_bytes(fh: ByteReader, n: int, path: str) -> bytes:
    """Read up to ``n`` bytes from ``fh``.

    Raises
    ------
    VcfFormatError
        The compressed data cannot be inflated (truncated or corrupt file).
    """
    try:
        with quiet_htslib():
            return fh.read(n)
    except (OSError, EOFError, zlib.error) as err:
        raise VcfFormatError(
            f"cannot decompress the file ({err}); it is truncated or corrupt", path
        ) from None


def line_blocks(fh: ByteReader, first: bytes, path: str, chunk: int) -> Iterator[bytes]:
    """Blocks of complete lines from a binary stream (a final line gets its newline).

    ``first`` is text already read from the stream (it starts the first block); blocks are
    read ``chunk`` bytes at a time.
    """
    carry = first
    while True:
        more = read_bytes(fh, chunk, path)
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


class Prefixed:
    """A read-only stream with some bytes put back in front."""

    def __init__(self, first: bytes, fh: ByteReader) -> None:
        self._first, self._fh = first, fh

    def read(self, n: int) -> bytes:
        """Up to about ``n`` bytes: the bytes put back first, then the stream's."""
        if self._first:
            out, self._first = self._first, b""
            return out + self._fh.read(max(n - len(out), 0))
        return self._fh.read(n)
