"""The arrays of a VCF Zarr store, read chunk by chunk.

Zarr's own reader costs about a millisecond per call on top of the decoding (as much as
decoding a chunk of genotypes), takes a quarter of a second to import, and runs an I/O
thread, which makes local worker processes start by ``spawn`` instead of ``fork``.
Counting reads half a dozen arrays per variants chunk, so a store of **Zarr format 2**
(what bio2zarr writes by default) is read here without zarr, as that format's
specification says: the group's ``.zattrs``, each array's ``.zarray`` (shape, chunks,
dtype, fill value, order, dimension separator, numcodecs compressor and filters), and
the bytes of each chunk, from the folder or the zip file, decoded by numcodecs. A store
of **Zarr format 3** is read through zarr (:class:`ZarrArrays`). Both give the same
arrays; the tests read stores of both formats.
"""

from __future__ import annotations

import json
import os
import zipfile
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = ["ChunkReader", "Format2Store", "MissingChunk", "StoreLayoutError", "ZarrArrays"]


class MissingChunk(Exception):
    """A chunk that is not in the store (``key`` names it)."""

    def __init__(self, key: str) -> None:
        super().__init__(key)
        self.key = key


class StoreLayoutError(Exception):
    """Metadata that cannot be read (the message says which file and why)."""


@dataclass
class _Meta:
    """What reading the chunks of one Zarr format 2 array needs."""

    name: str
    shape: tuple[int, ...]
    chunks: tuple[int, ...]
    dtype: np.dtype
    codecs: list[Any]  # filters then compressor; decoded in reverse
    fill: Any
    order: str
    sep: str


class Format2Store:
    """A Zarr format 2 store (a folder or a zip file) read without zarr.

    Parameters
    ----------
    path : str
        The folder, or the zip file.

    Attributes
    ----------
    attrs : dict
        The group's attributes (``.zattrs``).
    arrays : set of str
        The arrays at the top of the group (those with a ``.zarray``).
    """

    def __init__(self, path: str) -> None:
        self.path = path
        self.zf = None if os.path.isdir(path) else zipfile.ZipFile(path)
        if self.zf is not None:
            tail = "/.zarray"
            self.arrays = {
                n[: -len(tail)]
                for n in self.zf.namelist()
                if n.endswith(tail) and n.count("/") == 1
            }
        else:
            self.arrays = {
                d for d in os.listdir(path) if os.path.isfile(os.path.join(path, d, ".zarray"))
            }
        self.attrs = self._json(".zattrs") if self.has(".zattrs") else {}

    @staticmethod
    def is_format2(path: str) -> bool:
        """Whether ``path`` (folder or zip file) holds a Zarr format 2 group."""
        if os.path.isdir(path):
            return os.path.isfile(os.path.join(path, ".zgroup"))
        with zipfile.ZipFile(path) as zf:
            return ".zgroup" in set(zf.namelist())

    def has(self, key: str) -> bool:
        """Whether the store holds the file ``key`` (a path from the store's root)."""
        if self.zf is not None:
            try:
                self.zf.getinfo(key)
            except KeyError:
                return False
            return True
        return os.path.isfile(os.path.join(self.path, *key.split("/")))

    def get(self, key: str) -> bytes:
        """The bytes of ``key``; :class:`MissingChunk` when absent."""
        try:
            if self.zf is not None:
                return self.zf.read(key)
            with open(os.path.join(self.path, *key.split("/")), "rb") as fh:
                return fh.read()
        except (KeyError, FileNotFoundError):
            raise MissingChunk(key) from None

    def _json(self, key: str) -> dict[str, Any]:
        try:
            doc = json.loads(self.get(key))
        except (MissingChunk, ValueError, UnicodeDecodeError) as err:
            raise StoreLayoutError(f"{key} cannot be read as JSON ({err})") from None
        if not isinstance(doc, dict):
            raise StoreLayoutError(f"{key} is not a JSON object")
        return doc

    def meta(self, name: str) -> _Meta:
        """The metadata of array ``name`` (its ``.zarray``)."""
        import numcodecs

        key = f"{name}/.zarray"
        m = self._json(key)
        try:
            codecs = [numcodecs.get_codec(f) for f in (m.get("filters") or [])]
            if m.get("compressor"):
                codecs.append(numcodecs.get_codec(m["compressor"]))
            meta = _Meta(
                name,
                tuple(int(x) for x in m["shape"]),
                tuple(int(x) for x in m["chunks"]),
                np.dtype(m["dtype"]),
                codecs,
                m.get("fill_value"),
                str(m.get("order", "C")),
                str(m.get("dimension_separator", ".")),
            )
        except (KeyError, TypeError, ValueError) as err:
            raise StoreLayoutError(f"{key}: {type(err).__name__}: {err}") from None
        if len(meta.chunks) != len(meta.shape) or min(meta.chunks, default=1) < 1:
            raise StoreLayoutError(f"{key}: chunks {meta.chunks} do not fit shape {meta.shape}")
        return meta

    def close(self) -> None:
        """Close the zip file."""
        if self.zf is not None:
            self.zf.close()


class ZarrArrays:
    """A store read through zarr (Zarr format 3): attributes, arrays and the opened
    arrays (:meth:`array`)."""

    def __init__(self, path: str) -> None:
        import zarr

        self._zip: Any = None
        if os.path.isdir(path):
            store: Any = zarr.storage.LocalStore(path, read_only=True)
        else:
            store = self._zip = zarr.storage.ZipStore(path, mode="r")
        self.root = zarr.open_group(store=store, mode="r")
        self.attrs = dict(self.root.attrs)
        self.arrays = set(self.root.array_keys())

    def array(self, name: str) -> Any:
        """The zarr array ``name``."""
        return self.root[name]

    def close(self) -> None:
        """Close the zip file."""
        if self._zip is not None:
            self._zip.close()


class ChunkReader:
    """Reads variants chunks of one array, for a range of columns of its second dimension.

    Parameters
    ----------
    store : Format2Store or ZarrArrays
    name : str
        The array (variants first).
    """

    def __init__(self, store: Format2Store | ZarrArrays, name: str) -> None:
        self.name = name
        self.f2 = store if isinstance(store, Format2Store) else None
        if self.f2 is not None:
            self.m: _Meta | None = self.f2.meta(name)
            self.shape, self.chunks = self.m.shape, self.m.chunks
        else:
            assert isinstance(store, ZarrArrays)
            self.m = None
            self.arr = store.array(name)
            self.shape = tuple(int(x) for x in self.arr.shape)
            self.chunks = tuple(int(x) for x in self.arr.chunks)

    def _key(self, coords: tuple[int, ...]) -> str:
        assert self.m is not None
        return f"{self.name}/{self.m.sep.join(str(c) for c in coords)}"

    def _decode(self, coords: tuple[int, ...], missing_ok: bool) -> np.ndarray:
        m, f2 = self.m, self.f2
        assert m is not None and f2 is not None
        try:
            b: Any = f2.get(self._key(coords))
        except MissingChunk:
            if not missing_ok:
                raise
            obj = m.dtype.kind == "O"
            fill = m.fill if m.fill is not None else ("" if obj else 0)
            return np.full(m.chunks, fill, object if obj else m.dtype)
        for codec in reversed(m.codecs):
            b = codec.decode(b)
        if m.dtype.kind == "O":
            return np.asarray(b, dtype=object).reshape(m.chunks, order=m.order)  # type: ignore[call-overload]
        return np.frombuffer(b, m.dtype).reshape(m.chunks, order=m.order)  # type: ignore[call-overload]

    def exists(self, k: int) -> bool:
        """Whether the store holds the first chunk of variants chunk ``k``."""
        if self.f2 is not None:
            return self.f2.has(self._key((k,) + (0,) * (len(self.shape) - 1)))
        from zarr.core.sync import sync

        key = self.arr.metadata.encode_chunk_key((k,) + (0,) * (len(self.shape) - 1))
        return bool(sync(self.arr.store.exists(f"{self.arr.path}/{key}")))

    def read_all(self) -> np.ndarray:
        """The whole array (for the small ones: samples, contigs, the region index)."""
        if self.f2 is None:
            return np.asarray(self.arr[...])
        n = -(-self.shape[0] // self.chunks[0]) if self.shape and self.shape[0] else 0
        parts = [self.read(k, None, True) for k in range(n)]
        if not parts:
            return np.zeros(self.shape, object if self.m and self.m.dtype.kind == "O" else None)
        return np.concatenate(parts)

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
        rows = slice(k * self.chunks[0], min((k + 1) * self.chunks[0], n))
        if self.f2 is None:
            if not missing_ok and not self.exists(k):
                raise MissingChunk(f"{self.name} chunk {k}")
            sel: Any = rows if cols is None or len(self.shape) < 2 else (rows, slice(*cols))
            return np.asarray(self.arr[sel])
        if len(self.shape) == 1:
            out = self._decode((k,), missing_ok)
        else:
            lo, hi = (0, self.shape[1]) if cols is None else cols
            c1 = self.chunks[1]
            grid = [range(-(-s // c)) for s, c in zip(self.shape[2:], self.chunks[2:])]
            parts = []
            for j in range(lo // c1, -(-hi // c1)):
                parts.append(self._assemble((k, j), grid, missing_ok))
            whole = parts[0] if len(parts) == 1 else np.concatenate(parts, axis=1)
            a = (lo // c1) * c1
            out = whole[:, lo - a : hi - a]
        out = out[: rows.stop - rows.start]
        trim = tuple(slice(0, s) for s in self.shape[2:])
        return out[(slice(None), slice(None)) + trim] if trim else out

    def _assemble(self, head: tuple[int, int], grid: list[range], missing_ok: bool) -> np.ndarray:
        """The chunks ``head + (i, ...)`` over the dimensions past the second, joined."""
        if not grid:
            return self._decode(head, missing_ok)
        if all(len(g) == 1 for g in grid):
            return self._decode(head + (0,) * len(grid), missing_ok)
        import itertools

        blocks = {idx: self._decode(head + idx, missing_ok) for idx in itertools.product(*grid)}

        def join(prefix: tuple[int, ...], axis: int) -> np.ndarray:
            if axis == len(grid):
                return blocks[prefix]
            return np.concatenate(
                [join(prefix + (i,), axis + 1) for i in grid[axis]], axis=axis + 2
            )

        return join((), 0)
