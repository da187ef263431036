"""Whole chunks of the arrays of a VCF Zarr store, decoded straight from their bytes.

Zarr's own reader costs about a millisecond per call on top of the decoding, as much as
decoding a chunk of genotypes; counting reads half a dozen arrays per variants chunk. For
arrays of Zarr format 2 in C order (what bio2zarr writes by default), :class:`ChunkReader`
reads the bytes of a chunk from the folder or the zip file and decodes them with the
array's numcodecs compressor and filters; every other layout (Zarr format 3, sharding,
Fortran order, chunked beyond the first two dimensions) goes through zarr. Both give the
same arrays; the tests read stores of both formats.
"""

from __future__ import annotations

import os
import zipfile
from typing import Any

import numpy as np

__all__ = ["ChunkReader", "MissingChunk"]


class MissingChunk(Exception):
    """A chunk that is not in the store (``key`` names it)."""

    def __init__(self, key: str) -> None:
        super().__init__(key)
        self.key = key


def _native(dtype: Any) -> np.dtype:
    return dtype.to_native_dtype() if hasattr(dtype, "to_native_dtype") else np.dtype(dtype)


class ChunkReader:
    """Reads variants chunks of one array, for a range of sample columns.

    Parameters
    ----------
    arr : zarr.Array
        The array (variants first).
    root : str
        The store: a folder, or a zip file.
    zf : zipfile.ZipFile or None
        The open zip file, for a zip store.
    """

    def __init__(self, arr: Any, root: str, zf: zipfile.ZipFile | None) -> None:
        self.arr = arr
        self.root, self.zf = root, zf
        self.shape = tuple(int(x) for x in arr.shape)
        md = arr.metadata
        self.direct = (
            getattr(md, "zarr_format", None) == 2
            and getattr(md, "order", "C") == "C"
            and all(int(c) >= s for c, s in zip(md.chunks[2:], self.shape[2:]))
        )
        if self.direct:
            self.chunks = tuple(int(c) for c in md.chunks)
            self.codecs = [*(md.filters or ()), *([md.compressor] if md.compressor else [])]
            self.dtype = _native(md.dtype)
            self.fill = md.fill_value

    def _key(self, coords: tuple[int, ...]) -> str:
        return f"{self.arr.path}/{self.arr.metadata.encode_chunk_key(coords)}"

    def _bytes(self, key: str) -> bytes:
        try:
            if self.zf is not None:
                return self.zf.read(key)
            with open(os.path.join(self.root, *key.split("/")), "rb") as fh:
                return fh.read()
        except (KeyError, FileNotFoundError):
            raise MissingChunk(key) from None

    def _decode(self, coords: tuple[int, ...], missing_ok: bool) -> np.ndarray:
        try:
            b: Any = self._bytes(self._key(coords))
        except MissingChunk:
            if not missing_ok:
                raise
            return self._filled()
        for codec in reversed(self.codecs):
            b = codec.decode(b)
        if self.dtype.kind in "OT" or (isinstance(b, np.ndarray) and b.dtype == object):
            return np.asarray(b, dtype=object).reshape(self.chunks)
        return np.frombuffer(b, self.dtype).reshape(self.chunks)

    def _filled(self) -> np.ndarray:
        if self.dtype.kind in "OT":
            return np.full(self.chunks, self.fill if self.fill is not None else "", object)
        return np.full(self.chunks, self.fill if self.fill is not None else 0, self.dtype)

    def exists(self, k: int) -> bool:
        """Whether the store holds the first chunk of variants chunk ``k``."""
        try:
            self._bytes(self._key((k,) + (0,) * (len(self.shape) - 1)))
        except MissingChunk:
            return False
        return True

    def read(self, k: int, cols: tuple[int, int] | None, missing_ok: bool) -> np.ndarray:
        """Variants chunk ``k`` (its variants in the array), columns ``cols`` of the second
        dimension (all when None).

        Raises
        ------
        MissingChunk
            A chunk absent from the store, unless ``missing_ok`` (then the fill value).
        Exception
            Whatever the codecs raise on a corrupt chunk.
        """
        n = self.shape[0]
        c0 = self.chunks[0] if self.direct else int(self.arr.chunks[0])
        rows = slice(k * c0, min((k + 1) * c0, n))
        if not self.direct:
            if not missing_ok and not self.exists(k):
                raise MissingChunk(self._key((k,) + (0,) * (len(self.shape) - 1)))
            sel: Any = rows if cols is None or len(self.shape) < 2 else (rows, slice(*cols))
            return np.asarray(self.arr[sel])
        rest = (0,) * max(len(self.shape) - 2, 0)
        if len(self.shape) == 1:
            out = self._decode((k,), missing_ok)
        else:
            lo, hi = (0, self.shape[1]) if cols is None else cols
            c1 = self.chunks[1]
            parts = [self._decode((k, j, *rest), missing_ok) for j in range(lo // c1, -(-hi // c1))]
            whole = parts[0] if len(parts) == 1 else np.concatenate(parts, axis=1)
            a = (lo // c1) * c1
            out = whole[:, lo - a : hi - a]
        out = out[: rows.stop - rows.start]
        trim = tuple(slice(0, s) for s in self.shape[2:])
        return out[(slice(None), slice(None)) + trim] if trim else out
