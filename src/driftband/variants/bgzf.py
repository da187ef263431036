"""Reading BGZF (bgzip) files block by block.

When the system's libdeflate can be loaded (through ctypes) the BGZF blocks are read and
inflated here, each checked against its CRC32; otherwise, or with the environment variable
``DRIFTBAND_INFLATE=htslib``, htslib's BGZF reader (pysam's ``BGZFile``) inflates them. In
both cases seeks take htslib virtual offsets, so htslib (pysam's ``TabixFile``) still reads
the index and finds where a region starts.
"""

from __future__ import annotations

import contextlib
import os
from typing import TYPE_CHECKING, cast

from pysam import libcbgzf

from ..exceptions import VcfFormatError
from .streams import quiet_htslib

if TYPE_CHECKING:
    import ctypes

__all__ = ["BGZF_EOF", "DeflateBGZF", "Libdeflate", "QuietBGZFile", "check_bgzf_eof", "open_bgzf"]

BGZF_EOF = bytes.fromhex("1f8b08040000000000ff0600424302001b0003000000000000000000")


def check_bgzf_eof(path: str) -> None:
    """Check that a BGZF file ends with the BGZF end-of-file block.

    Raises
    ------
    VcfFormatError
        The block is missing: the file is truncated.
    """
    with open(path, "rb") as fh:
        fh.seek(0, os.SEEK_END)
        size = fh.tell()
        fh.seek(max(0, size - len(BGZF_EOF)))
        tail = fh.read()
    if tail != BGZF_EOF:
        raise VcfFormatError(
            "the file is truncated (no BGZF end-of-file block); was it "
            "copied or written completely?",
            path,
        )


class Libdeflate:
    """The system's libdeflate (the inflater Debian's own htslib is built with), if any."""

    _lib: tuple[ctypes.CDLL, int] | None = None
    _tried = False

    @classmethod
    def get(cls) -> tuple[ctypes.CDLL, int] | None:
        """The library and a decompressor handle, or None (not installed, or
        ``DRIFTBAND_INFLATE=htslib``). The library is looked up once per process."""
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
                    ctypes.c_void_p,
                    ctypes.c_void_p,
                    ctypes.c_size_t,
                    ctypes.c_void_p,
                    ctypes.c_size_t,
                    ctypes.POINTER(ctypes.c_size_t),
                ]
                lib.libdeflate_deflate_decompress.restype = ctypes.c_int
                lib.libdeflate_crc32.argtypes = [ctypes.c_uint32, ctypes.c_void_p, ctypes.c_size_t]
                lib.libdeflate_crc32.restype = ctypes.c_uint32
                cls._lib = (lib, lib.libdeflate_alloc_decompressor())
            except (OSError, AttributeError):
                cls._lib = None
        return cls._lib


class DeflateBGZF:
    """Sequential BGZF reading with libdeflate; ``seek`` takes htslib virtual offsets
    (``TabixFile.tell()``), so htslib still opens, indexes and seeks.

    Parameters
    ----------
    path : str
        The BGZF file.
    lib : tuple
        The library and decompressor handle from :meth:`Libdeflate.get`.
    """

    def __init__(self, path: str, lib: tuple[ctypes.CDLL, int]) -> None:
        self._fh = open(path, "rb")
        self._lib, self._dec = lib
        self._cbuf = b""
        self._skip = 0
        self._consumed = 0

    def seek(self, voffset: int) -> None:
        """Go to a virtual offset (compressed block offset << 16 | offset in the block)."""
        self._fh.seek(voffset >> 16)
        self._cbuf = b""
        self._skip = voffset & 0xFFFF

    def _blocks(self, want: int) -> list[tuple[int, int, int, int]]:
        """Whole blocks of the compressed buffer: (data offset, data length, isize, crc)."""
        out: list[tuple[int, int, int, int]] = []
        off, total = 0, 0
        cb = self._cbuf
        while total < want:
            if (
                len(cb) - off < 18
                or len(cb) - off < int.from_bytes(cb[off + 16 : off + 18], "little") + 1
            ):
                more = self._fh.read(max(1 << 20, want // 2))
                if not more:
                    if off < len(cb):
                        raise OSError("truncated BGZF block")
                    break
                cb = cb + more  # keep the offsets of the blocks found so far
                self._cbuf = cb
                continue
            if cb[off : off + 4] != b"\x1f\x8b\x08\x04" or cb[off + 12 : off + 14] != b"BC":
                raise OSError("not a BGZF block")
            xlen = int.from_bytes(cb[off + 10 : off + 12], "little")
            bsize = int.from_bytes(cb[off + 16 : off + 18], "little") + 1
            crc = int.from_bytes(cb[off + bsize - 8 : off + bsize - 4], "little")
            isize = int.from_bytes(cb[off + bsize - 4 : off + bsize], "little")
            out.append((off + 12 + xlen, bsize - 20 - xlen, isize, crc))
            total += isize
            off += bsize
        self._consumed = off
        return out

    def read(self, n: int) -> bytes:
        """At least ``n`` bytes (whole blocks) unless the file ends; empty at the end.

        Raises
        ------
        OSError
            A truncated or corrupt block (not BGZF, inflate or CRC check failed).
        """
        import ctypes

        blocks = self._blocks(n + self._skip)
        if not blocks:
            return b""
        total = sum(b[2] for b in blocks)
        out = bytearray(total)
        dst = ctypes.addressof((ctypes.c_char * max(total, 1)).from_buffer(out)) if total else 0
        src = cast(int, ctypes.cast(ctypes.c_char_p(self._cbuf), ctypes.c_void_p).value)
        got = ctypes.c_size_t()
        pos = 0
        for off, clen, isize, crc in blocks:
            if isize:
                r = self._lib.libdeflate_deflate_decompress(
                    self._dec, src + off, clen, dst + pos, isize, ctypes.byref(got)
                )
                if (
                    r != 0
                    or got.value != isize
                    or self._lib.libdeflate_crc32(0, dst + pos, isize) != crc
                ):
                    raise OSError("corrupt BGZF block (inflate or CRC check failed)")
            pos += isize
        self._cbuf = self._cbuf[self._consumed :]
        data = bytes(out)
        if self._skip:
            data, self._skip = data[self._skip :], 0
        return data

    def close(self) -> None:
        """Close the file."""
        self._fh.close()

    def __enter__(self) -> DeflateBGZF:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


class QuietBGZFile:
    """htslib's BGZF reader (pysam's ``BGZFile``) whose close() does not raise after a read
    error (already reported)."""

    def __init__(self, path: str) -> None:
        self._fh = libcbgzf.BGZFile(path, mode="rb", index=None)

    def read(self, n: int) -> bytes:
        """Up to ``n`` inflated bytes; empty at the end."""
        return self._fh.read(n)

    def seek(self, voffset: int) -> None:
        """Go to an htslib virtual offset."""
        self._fh.seek(voffset)

    def close(self) -> None:
        """Close the file, quietly."""
        with contextlib.suppress(OSError), quiet_htslib():
            self._fh.close()

    def __enter__(self) -> QuietBGZFile:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def open_bgzf(path: str) -> DeflateBGZF | QuietBGZFile:
    """A BGZF reader: libdeflate when available (faster), else htslib's (pysam)."""
    lib = Libdeflate.get()
    if lib is not None:
        return DeflateBGZF(path, lib)
    return QuietBGZFile(path)
