"""The records of a VCF Zarr store in one variants chunk, as counting reads them.

:class:`VczBatch` is the :class:`.batches.VariantBatch` of :mod:`.vcz`: the fixed columns
come from ``variant_allele``, ``variant_filter`` and ``variant_AA``, the genotypes from
``call_genotype`` (negative values: missing copies and the padding of a lower ploidy) and
``call_DP``/``call_GQ``, each read from the store the first time counting asks for it.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from .batches import GenotypeData, VariantBatch
from .decode import upper_codes

if TYPE_CHECKING:
    from .vcz import VczSource

__all__ = ["VczBatch"]


def _pair_tables() -> tuple[np.ndarray, np.ndarray]:
    """ALT copies and called copies (alleles 0 or 1) of a diploid call, indexed by its two
    int8 allele indices read together as one native uint16."""
    both = np.arange(1 << 16, dtype=np.uint16).view(np.int8).reshape(-1, 2)
    alt = (both == 1).sum(axis=1).astype(np.int8)
    return alt, (alt + (both == 0).sum(axis=1)).astype(np.int8)


_ALT2, _CALLED2 = _pair_tables()


def _strings(a: Any) -> np.ndarray:
    """A string array that :func:`numpy.char.str_len` takes (object arrays, as numcodecs
    decodes strings, as fixed-width unicode)."""
    a = np.asarray(a)
    return a.astype("U") if a.dtype.kind == "O" else a


class VczBatch(VariantBatch):
    """The records of one region in one variants chunk of a store; arrays are read when
    first asked for.

    Parameters
    ----------
    src : VczSource
    chunk : int
        The variants chunk.
    a, z : int
        The records (global variant indices ``a`` to ``z - 1``).
    chrom : str
    pos : ndarray of int64
        Their positions.
    """

    def __init__(
        self, src: VczSource, chunk: int, a: int, z: int, chrom: str, pos: np.ndarray
    ) -> None:
        self._src, self._chunk, self._a, self._z = src, chunk, a, z
        self.chrom = chrom
        self.pos = pos
        self.lineno = None
        self.path = src.path
        self._cache: dict[Any, np.ndarray] = {}

    def _get(self, name: str, cols: tuple[int, int] | None = None) -> np.ndarray:
        key = (name, cols)
        if key not in self._cache:
            sl = None if cols is None else slice(*cols)
            self._cache[key] = self._src.read(name, slice(self._a, self._z), sl)
        return self._cache[key]

    def where(self, i: int) -> tuple[str, int | None]:
        """A name for record ``i`` in messages (the store has no line numbers)."""
        return f"record {self.chrom}:{int(self.pos[i])} (variant {self._a + i})", None

    def slice(self, a: int, z: int) -> VczBatch:
        """Records ``a`` to ``z - 1`` as a batch of their own."""
        return VczBatch(self._src, self._chunk, self._a + a, self._a + z, self.chrom, self.pos[a:z])

    def __getattr__(self, name: str) -> list[bytes]:  # the columns as bytes, when asked for
        if name not in ("ref", "alt", "filt", "fmt"):
            raise AttributeError(name)
        al = _strings(self._get("variant_allele"))
        self.__dict__["ref"] = [s.encode() for s in al[:, 0].tolist()]
        self.__dict__["alt"] = [
            b",".join(x.encode() for x in row if x) or b"." for row in al[:, 1:].tolist()
        ]
        ok = self._pass()
        self.__dict__["filt"] = [b"PASS" if x else b"FILTERED" for x in ok.tolist()]
        self.__dict__["fmt"] = [b"GT"] * len(self)
        return self.__dict__[name]

    def _pass(self) -> np.ndarray:
        """FILTER is PASS or missing (no filter set)."""
        if not self._src.has("variant_filter"):
            return np.ones(len(self), bool)
        f = self._get("variant_filter").astype(bool).reshape(len(self), -1)
        n = f.sum(axis=1)
        ids = self._src.filters
        if "PASS" in ids:
            return (n == 0) | ((n == 1) & f[:, ids.index("PASS")])
        return n == 0

    def codes(self) -> dict[str, np.ndarray]:
        """Vectorised view of the common cases (see :meth:`VariantBatch.codes`)."""
        al = _strings(self._get("variant_allele"))
        r = len(self)
        length = np.char.str_len(al)
        first = np.zeros(al.shape, np.uint8)
        one = length == 1
        if one.any():
            first[one] = np.frombuffer(
                "".join(al[one].tolist()).encode("latin-1", "replace"), np.uint8
            )
        ref1 = np.where(length[:, 0] == 1, first[:, 0], 0).astype(np.uint8)
        n_alt = (length[:, 1:] > 0).sum(axis=1)
        if al.shape[1] > 1:
            alt1 = np.where(n_alt == 0, 46, np.where((n_alt == 1) & one[:, 1], first[:, 1], 0))
        else:
            alt1 = np.full(r, 46)
        aa1 = np.zeros(r, np.uint8)
        if self._src.has("variant_AA"):
            aa = _strings(self._get("variant_AA")).reshape(r, -1)[:, 0]
            sel = np.char.str_len(aa) == 1
            if sel.any():
                aa1[sel] = np.frombuffer(
                    "".join(aa[sel].tolist()).encode("latin-1", "replace"), np.uint8
                )
        return {
            "ref1": upper_codes(ref1),
            "alt1": upper_codes(alt1.astype(np.uint8)),
            "pass": self._pass().astype(np.int8),
            "aa1": upper_codes(aa1),
        }

    def info(self, rows: Sequence[int], key: str) -> list[bytes | None]:
        """Values of ``variant_KEY`` (bytes, the first when several) for some records;
        None where absent or empty."""
        name = f"variant_{key}"
        if not self._src.has(name):
            return [None] * len(rows)
        v = np.asarray(self._get(name)).reshape(len(self), -1)[:, 0]
        out: list[bytes | None] = []
        for i in rows:
            x = str(v[i])
            out.append(x.encode() if x else None)
        return out

    def _calls(self, name: str, cols: np.ndarray) -> np.ndarray:
        """Per-call array ``name`` of the records at sample columns ``cols``."""
        if not cols.size:
            return np.zeros((len(self), 0, *self._src.shape(name)[2:]), np.int8)
        lo, hi = int(cols[0]), int(cols[-1]) + 1
        block = self._get(name, (lo, hi))
        if cols.size == hi - lo:
            return block
        return block[:, cols - lo]

    def genotypes(
        self, rows: np.ndarray, cols: np.ndarray, fields: Sequence[str] = (), fast: bool = True
    ) -> GenotypeData:
        """Decode the genotypes of some records (see :meth:`VariantBatch.genotypes`):
        ``call_genotype``, padded to ploidy 2, and ``call_DP``/``call_GQ``."""
        rows = np.asarray(rows, dtype=np.int64)
        cols = np.asarray(cols, dtype=np.int64)
        g = self._calls("call_genotype", cols)[rows].astype(np.int8)
        if g.shape[2] < 2:
            pad = np.full(g.shape[:2] + (2 - g.shape[2],), -2, np.int8)
            g = np.concatenate([g, pad], axis=2)
        vals = {}
        for f in fields:
            if self._src.has(f"call_{f}"):
                v = self._calls(f"call_{f}", cols)[rows].reshape(rows.size, cols.size, -1)[..., 0]
                vals[f] = np.where(v < 0, -1, v).astype(np.int32)
            else:
                vals[f] = np.full((rows.size, cols.size), -1, np.int32)
        return GenotypeData(g, vals, np.ones(rows.size, bool))

    def allele_counts(
        self, rows: np.ndarray, cols: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Per-sample copies of allele 1 and called copies (alleles 0 or 1), as
        :meth:`.textbatch.TextBatch.allele_counts`; ``ok`` is False for records with
        another allele index."""
        rows = np.asarray(rows, dtype=np.int64)
        g = self._calls("call_genotype", np.asarray(cols, dtype=np.int64))
        if rows.size != len(self) or (rows.size and rows[-1] != rows.size - 1):
            g = g[rows]
        if g.dtype == np.int8 and g.ndim == 3 and g.shape[2] == 2 and g.strides[2] == 1:
            pair = g.view(np.uint16)[..., 0]  # both copies of a call as one number
            alt, called = _ALT2.take(pair), _CALLED2.take(pair)
        else:
            alt = (g[..., 0] == 1).view(np.int8).copy()
            called = (g[..., 0] == 0).view(np.int8).copy()  # REF copies, ALT ones added
            for j in range(1, g.shape[2]):
                alt += (g[..., j] == 1).view(np.int8)
                called += (g[..., j] == 0).view(np.int8)
            called += alt
        if not g.size or g.max() <= 1:
            return alt, called, np.ones(g.shape[0], bool)
        return alt, called, g.reshape(g.shape[0], -1).max(axis=1) <= 1
