"""VCF Zarr input: a ``.vcz`` store (a directory, or a zip file) read chunk by chunk.

:class:`VczSource` offers what counting needs from :class:`.source.VcfSource` -- a header
(:class:`.header.VcfHeader`: samples, contigs and their lengths, the fields present), the
chromosomes, and :meth:`VczSource.fetch` of the records of one region -- so that site
classes, filters, polarisation, projection and blocks are the same code for both inputs.
Each variants chunk that a region needs (found from the store's ``region_index``, or
else from ``variant_contig``/``variant_position``) becomes one
:class:`.vczbatch.VczBatch`, and its arrays are read only when counting asks for them:
``call_genotype`` (negative values are the missing calls and the padding of lower
ploidy, as the mask ``call_genotype_mask`` says), ``variant_allele``,
``variant_filter``, ``variant_AA`` and the per-call ``call_DP``/``call_GQ``. Memory is
bounded by one chunk.

Stores of VCF Zarr versions :data:`VCZ_VERSIONS` are read (as written by ``bio2zarr``),
in Zarr format 2 by :mod:`.vczchunks` with numcodecs, in format 3 through zarr; both are
in the optional extra ``vcz`` (``pip install 'driftband[vcz]'``).

A chunk absent from the store is what Zarr writes for a chunk holding only the fill
value, so it is read as such; only the arrays that can never be all fill
(``variant_position``, ``variant_allele``) must have every chunk that is read.
"""

from __future__ import annotations

import os
import zipfile
from collections.abc import Iterator

import numpy as np

from ..exceptions import InputError, VcfFormatError
from .header import VcfHeader
from .vczbatch import VczBatch
from .vczchunks import ChunkReader, Format2Store, MissingChunk, StoreLayoutError, ZarrArrays

__all__ = ["VCZ_VERSIONS", "VczBatch", "VczSource", "is_vcz"]

#: The ``vcf_zarr_version`` values read.
VCZ_VERSIONS = ("0.4", "0.5")
_REQUIRED = ("variant_position", "variant_contig", "variant_allele", "sample_id", "contig_id")
_NEVER_FILL = ("variant_position", "variant_allele")


def is_vcz(path: str | os.PathLike) -> bool:
    """Whether ``path`` is to be read as a VCF Zarr store: a directory, or a zip file."""
    p = os.fspath(path)
    if os.path.isdir(p):
        return True
    if p.endswith((".vcz", ".vcz.zip", ".zip")) and os.path.isfile(p):
        with open(p, "rb") as fh:
            return fh.read(4) == b"PK\x03\x04"
    return False


_EXTRA = "pip install 'driftband[vcz]' (or pip install zarr)"


def _open_store(path: str) -> Format2Store | ZarrArrays:
    """The store at ``path``: Zarr format 2 read directly, format 3 through zarr."""
    try:
        if Format2Store.is_format2(path):
            try:
                import numcodecs  # noqa: F401  (the codecs of the chunks)
            except ImportError:
                raise InputError(f"reading VCF Zarr needs numcodecs: {_EXTRA}", path) from None
            return Format2Store(path)
        if os.path.isdir(path):
            three = os.path.isfile(os.path.join(path, "zarr.json"))
        else:
            with zipfile.ZipFile(path) as zf:
                three = "zarr.json" in zf.namelist()
    except StoreLayoutError as err:
        raise InputError(f"the store's metadata cannot be read: {err}", path) from None
    except (OSError, zipfile.BadZipFile) as err:
        raise InputError(f"cannot read the store ({err})", path) from None
    if not three:
        raise InputError(
            "not a Zarr store (no .zgroup or zarr.json at its top); convert the VCF with "
            "vcf2zarr convert (bio2zarr)",
            path,
        )
    try:
        import zarr  # noqa: F401
    except ImportError:
        raise InputError(f"reading a Zarr format 3 store needs zarr: {_EXTRA}", path) from None
    try:
        return ZarrArrays(path)
    except Exception as err:  # zarr's own errors for a store it cannot open
        raise InputError(
            f"zarr cannot open the store ({type(err).__name__}: {err})", path
        ) from None


def _stop_zarr_threads() -> None:
    """Stop the I/O thread (and pool) zarr starts on first use (a Zarr format 3 store);
    zarr starts them again when it is used next. A process with no other threads starts
    its local workers by fork (at once) rather than spawn."""
    try:
        from zarr.core.sync import cleanup_resources
    except ImportError:  # another zarr: its threads stay, and workers are spawned
        return
    cleanup_resources()


class VczSource:
    """An open VCF Zarr store (see the module docstring).

    Parameters
    ----------
    path : str or path-like
        A store directory, or a zip file of one.

    Attributes
    ----------
    path : str
    kind : str
        ``"vcz"``.
    header : VcfHeader
        Samples, contigs and lengths; ``info`` holds ``AA`` when the store has
        ``variant_AA``, ``formats`` holds ``GT``, ``DP``, ``GQ`` for ``call_genotype``,
        ``call_DP``, ``call_GQ``.
    version : str
        The store's ``vcf_zarr_version``.

    Raises
    ------
    InputError
        numcodecs (or zarr) not installed, not a Zarr store, another format version,
        unreadable metadata, or a required array
        missing (``call_genotype``, ``contig_id``, ...).
    """

    kind = "vcz"
    stdin = False
    indexed = True
    index_path = None

    def __init__(self, path: str | os.PathLike) -> None:
        self.path = os.fspath(path)
        if not os.path.exists(self.path):
            raise InputError("VCF Zarr store not found", self.path)
        self._readers: dict[str, ChunkReader] = {}
        self._store = _open_store(self.path)
        try:
            self._setup()
        except BaseException:
            self.close()
            raise

    def _setup(self) -> None:
        self.version = str(self._store.attrs.get("vcf_zarr_version", ""))
        if not self.version:
            raise InputError(
                "not a VCF Zarr store (its attributes have no vcf_zarr_version); "
                "convert the VCF with vcf2zarr convert (bio2zarr)",
                self.path,
            )
        if self.version not in VCZ_VERSIONS:
            raise InputError(
                f"VCF Zarr version {self.version} is not read (versions "
                f"{', '.join(VCZ_VERSIONS)} are); convert the VCF again with bio2zarr",
                self.path,
            )
        names = set(self._store.arrays)
        if "call_genotype" not in names:
            raise InputError(
                "the store has no call_genotype array; spectra need genotypes "
                "(convert a VCF with FORMAT/GT)",
                self.path,
            )
        for key in _REQUIRED:
            if key not in names:
                raise InputError(
                    f"the store has no {key} array; convert the VCF again with bio2zarr",
                    self.path,
                )
        self._names = names
        pos = self._reader("variant_position")
        self.chunk = pos.chunks[0]
        self.n_variants = pos.shape[0]
        if any(self._reader(a).shape[0] != self.n_variants for a in _REQUIRED[1:3]) or (
            self._reader("call_genotype").shape[0] != self.n_variants
        ):
            raise InputError(
                "call_genotype, variant_allele, variant_contig and variant_position have "
                "different numbers of variants; the store is damaged: convert the VCF again",
                self.path,
            )
        samples = [str(s) for s in self._read_all("sample_id")]
        contigs = [str(c) for c in self._read_all("contig_id")]
        if not contigs:
            raise InputError("the store's contig_id array is empty", self.path)
        lengths: dict[str, int] = {}
        if "contig_length" in names:
            ln = self._read_all("contig_length")
            lengths = {c: int(x) for c, x in zip(contigs, ln.tolist()) if int(x) > 0}
        fields = {"GT"} | {k for k in ("DP", "GQ") if f"call_{k}" in names}
        info = {"AA"} if "variant_AA" in names else set()
        self.header = VcfHeader(samples, contigs, lengths, info, fields, "", 0)
        self._filters = (
            [str(f) for f in self._read_all("filter_id")] if "filter_id" in names else []
        )
        self._table = self._chunk_table()
        if isinstance(self._store, ZarrArrays):
            _stop_zarr_threads()

    # -- opening
    def _reader(self, name: str) -> ChunkReader:
        r = self._readers.get(name)
        if r is None:
            try:
                r = self._readers[name] = ChunkReader(self._store, name)
            except StoreLayoutError as err:
                raise InputError(
                    f"array {name}: its metadata cannot be read ({err}); the store is "
                    "damaged: convert the VCF again",
                    self.path,
                ) from None
        return r

    def _read_all(self, name: str) -> np.ndarray:
        """A small array (samples, contigs, filters, the region index) whole."""
        r = self._reader(name)
        try:
            return r.read_all()
        except Exception as err:  # a corrupt chunk: codec errors of any kind
            raise self._corrupt(name, None, err) from None

    def _corrupt(self, name: str, chunk: int | None, err: Exception) -> VcfFormatError:
        where = "" if chunk is None else f", variants chunk {chunk}"
        return VcfFormatError(
            f"array {name}{where} cannot be read ({type(err).__name__}: {err}); the "
            "store is corrupt: convert the VCF again",
            self.path,
        )

    def _chunk(self, name: str, k: int, cols: tuple[int, int] | None = None) -> np.ndarray:
        """Variants chunk ``k`` of array ``name`` (sample columns ``cols``); a missing chunk
        of an array in ``_NEVER_FILL`` or an unreadable one reported."""
        try:
            return self._reader(name).read(k, cols, missing_ok=name not in _NEVER_FILL)
        except MissingChunk:
            raise VcfFormatError(
                f"array {name}, variants chunk {k}: the chunk is missing from the store; "
                "convert the VCF again",
                self.path,
            ) from None
        except Exception as err:  # a corrupt chunk: codec errors of any kind
            raise self._corrupt(name, k, err) from None

    def _chunk_table(self) -> np.ndarray:
        """Rows ``chunk, contig, first POS, last POS`` per chunk and contig (int64)."""
        ri = self._reader("region_index") if "region_index" in self._names else None
        if ri is not None and len(ri.shape) == 2 and ri.shape[1] >= 4:
            t = self._read_all("region_index").astype(np.int64)[:, :4]
        else:  # no region index: from the positions, one chunk at a time
            rows = []
            for k in range(-(-self.n_variants // self.chunk)):
                c = self._chunk("variant_contig", k).astype(np.int64)
                p = self._chunk("variant_position", k).astype(np.int64)
                cut = np.flatnonzero(np.diff(c)) + 1
                for a, z in zip(np.r_[0, cut].tolist(), np.r_[cut, c.size].tolist()):
                    rows.append((k, c[a], p[a:z].min(), p[a:z].max()))
            t = np.array(rows, np.int64).reshape(-1, 4)
        bad = (t[:, 1] < 0) | (t[:, 1] >= len(self.header.contigs))
        if bad.any():
            raise InputError(
                f"variants chunk {int(t[bad][0, 0])} refers to contig #{int(t[bad][0, 1])}, "
                f"but contig_id lists {len(self.header.contigs)} contig(s); the store is "
                "damaged: convert the VCF again",
                self.path,
            )
        return t

    @property
    def chroms(self) -> list[str]:
        """Contigs of the store (``contig_id``), in order."""
        return list(self.header.contigs)

    @property
    def filters(self) -> list[str]:
        """The FILTER IDs of ``variant_filter``'s columns (``filter_id``)."""
        return list(self._filters)

    def close(self) -> None:
        """Close the store (a zip file)."""
        self._store.close()

    def __enter__(self) -> VczSource:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # -- reading
    def fetch(self, chrom: str, start: int, end: int, batch_bytes: int = 0) -> Iterator[VczBatch]:
        """Records with ``start <= POS - 1 < end`` (0-based, half-open) on ``chrom``, one
        batch per variants chunk (``batch_bytes`` has no effect: a chunk is the unit)."""
        if chrom not in self.header.contigs:
            return
        cid = self.header.contigs.index(chrom)
        t = self._table
        hit = (t[:, 1] == cid) & (t[:, 2] <= end) & (t[:, 3] >= start + 1)
        last = -1
        for k in np.unique(t[hit, 0]).tolist():
            a0 = k * self.chunk
            c = self._chunk("variant_contig", k)
            p = self._chunk("variant_position", k).astype(np.int64)
            sel = np.flatnonzero((c == cid) & (p - 1 >= start) & (p - 1 < end))
            if not sel.size:
                continue
            a, z = int(sel[0]), int(sel[-1]) + 1
            pos = p[a:z]
            if sel.size != z - a or np.any(np.diff(np.r_[last, pos]) < 0):
                raise VcfFormatError(
                    f"variants chunk {k}: the records of {chrom} are not sorted by position; "
                    "convert a sorted, indexed VCF (bcftools sort)",
                    self.path,
                )
            last = int(pos[-1])
            yield VczBatch(self, k, a0 + a, a0 + z, chrom, pos)

    def read(self, name: str, rows: slice, cols: slice | None = None) -> np.ndarray:
        """Rows (variants) ``rows`` of array ``name``, and for per-call arrays the sample
        columns ``cols``; one chunk at a time (one, when the array is chunked like
        ``variant_position``)."""
        c0 = self._reader(name).chunks[0]
        c = None if cols is None else (int(cols.start), int(cols.stop))
        a, z = int(rows.start), int(rows.stop)
        parts = [
            self._chunk(name, k, c)[max(a - k * c0, 0) : z - k * c0]
            for k in range(a // c0, -(-z // c0))
        ]
        return parts[0] if len(parts) == 1 else np.concatenate(parts)

    def shape(self, name: str) -> tuple[int, ...]:
        """The shape of array ``name``."""
        return self._reader(name).shape

    def has(self, name: str) -> bool:
        """Whether the store holds array ``name``."""
        return name in self._names
