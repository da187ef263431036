"""Synthetic genome layout of a simulated study: where the sites of each class lie.

The callable sites of the two classes (selected ``0fold`` and neutral ``4fold``) are laid
out on synthetic chromosomes ``chr1``..``chrC`` as coding positions of gene-like stretches:

* the genome is cut into the study's blocks (the bootstrap units), each a contiguous
  region holding its share of the sites of both classes; consecutive blocks share a
  chromosome, ``C`` chromosomes in all;
* a block is a run of genes of up to ``gene_codons`` codons, each gene preceded by
  ``spacer`` non-coding bases;
* each codon has a class pattern over its three positions: ``(0,0,4)``, ``(0,0,.)``,
  ``(.,0,4)``, ``(.,0,.)`` — where ``.`` is a coding position of neither class (a 2-fold
  site, say) — chosen so that the block holds exactly its 0fold and 4fold counts (this
  works whenever a block has at least as many 0fold as 4fold sites, as real genes do;
  otherwise ``(.,.,4)`` codons make up the rest), evenly interleaved along the block.

The layout is deterministic (no random numbers): a site's position follows from its class
and its index in genomic order, so positions never need to be stored.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field

import numpy as np

from ..spectra._types import Block

__all__ = ["CODON_PATTERNS", "GenomeLayout", "codon_pattern_counts", "make_layout"]

#: Class of each codon position per pattern: 0 = first class (0fold), 1 = second (4fold),
#: -1 = neither. Rows: (0,0,4), (0,0,.), (.,0,4), (.,0,.), (.,.,4).
CODON_PATTERNS = np.array(
    [[0, 0, 1], [0, 0, -1], [-1, 0, 1], [-1, 0, -1], [-1, -1, 1]], dtype=np.int8
)


def codon_pattern_counts(m0: int, m4: int) -> np.ndarray:
    """How many codons of each pattern hold exactly ``m0`` 0fold and ``m4`` 4fold sites.

    Returns
    -------
    ndarray of int64, shape (5,)
        Counts of the patterns of :data:`CODON_PATTERNS`.

    Examples
    --------
    >>> codon_pattern_counts(20, 10).tolist()   # ten (0,0,4) codons
    [10, 0, 0, 0, 0]
    >>> codon_pattern_counts(10, 10).tolist()   # ten (.,0,4) codons
    [0, 0, 10, 0, 0]
    """
    m0, m4 = int(m0), int(m4)
    out = np.zeros(5, dtype=np.int64)
    if m0 >= m4:
        x = m0 - m4
        if x >= m4:
            out[0] = m4
            rest = m0 - 2 * m4
            out[1], out[3] = rest // 2, rest % 2
        else:
            out[0], out[2] = x, m4 - x
    else:
        out[2], out[4] = m0, m4 - m0
    return out


def _interleave(counts: np.ndarray) -> np.ndarray:
    """Pattern sequence with each pattern spread evenly along the block."""
    types = np.repeat(np.arange(counts.size), counts)
    keys = (
        np.concatenate([(np.arange(c) + 0.5) / c for c in counts if c > 0])
        if counts.sum()
        else np.empty(0)
    )
    return types[np.argsort(keys, kind="stable")].astype(np.int8)


@dataclass
class GenomeLayout:
    """Where the sites of each class of a simulated study lie (see the module docstring).

    Attributes
    ----------
    class_names : tuple of str
        ``(selected, neutral)`` class names, e.g. ``("0fold", "4fold")``.
    block_sites : ndarray of int64, shape (K, 2)
        Sites of each class per block.
    block_chrom : ndarray of int64, shape (K,)
        Chromosome index of each block.
    block_start, block_end : ndarray of int64, shape (K,)
        0-based, half-open block coordinates.
    chrom_names : list of str
    chrom_lengths : ndarray of int64
    gene_codons, spacer : int
    """

    class_names: tuple[str, str]
    block_sites: np.ndarray
    block_chrom: np.ndarray
    block_start: np.ndarray
    block_end: np.ndarray
    chrom_names: list[str]
    chrom_lengths: np.ndarray
    gene_codons: int = 300
    spacer: int = 300
    _cum: np.ndarray = field(init=False, repr=False)

    def __post_init__(self) -> None:
        self._cum = np.vstack([np.zeros((1, 2), np.int64), np.cumsum(self.block_sites, axis=0)])

    @property
    def n_blocks(self) -> int:
        """Number of blocks K."""
        return int(self.block_sites.shape[0])

    def block_of(self, class_index: int, site_index: np.ndarray) -> np.ndarray:
        """Block of each site (sites of a class are numbered 0..L−1 in genomic order)."""
        return np.searchsorted(self._cum[:, class_index], site_index, side="right") - 1

    def _genes(self, b: int) -> np.ndarray:
        ncod = int(codon_pattern_counts(*self.block_sites[b]).sum())
        ng = max(1, -(-ncod // self.gene_codons))
        return np.array([len(x) for x in np.array_split(np.arange(ncod), ng)], np.int64)

    def block_codons(self, b: int) -> tuple[np.ndarray, np.ndarray]:
        """Codons of block ``b``: 0-based start positions and pattern indices.

        Returns
        -------
        start : ndarray of int64, shape (codons,)
        pattern : ndarray of int8, shape (codons,)
            Row of :data:`CODON_PATTERNS`.
        """
        pat = _interleave(codon_pattern_counts(*self.block_sites[b]))
        sizes = self._genes(b)
        gene_of = np.repeat(np.arange(sizes.size), sizes)
        q = np.arange(pat.size, dtype=np.int64)
        return self.block_start[b] + (gene_of + 1) * self.spacer + 3 * q, pat

    def block_positions(self, b: int) -> tuple[np.ndarray, np.ndarray]:
        """0-based positions and classes of every coding position of block ``b``.

        Returns
        -------
        pos : ndarray of int64, shape (3·codons,)
        label : ndarray of int8, shape (3·codons,)
            0 (first class), 1 (second class) or −1 (neither).
        """
        start, pat = self.block_codons(b)
        pos = (start[:, None] + np.arange(3)).reshape(-1)
        return pos, CODON_PATTERNS[pat].reshape(-1)

    def gene_intervals(self, b: int) -> list[tuple[int, int]]:
        """0-based, half-open coding intervals of the genes of block ``b``."""
        sizes = self._genes(b)
        out, x = [], int(self.block_start[b])
        for n in sizes.tolist():
            x += self.spacer
            out.append((x, x + 3 * n))
            x += 3 * n
        return out

    def site_positions(self, class_index: int, site_index: np.ndarray) -> np.ndarray:
        """0-based positions of sites of a class given their indices in genomic order.

        Returns
        -------
        ndarray of int64, same shape as ``site_index``; the chromosome is
        ``block_chrom[block_of(class_index, site_index)]``.
        """
        site_index = np.asarray(site_index, dtype=np.int64)
        out = np.empty(site_index.shape, dtype=np.int64)
        blk = self.block_of(class_index, site_index)
        for b in np.unique(blk).tolist():
            sel = blk == b
            pos, lab = self.block_positions(b)
            cls_pos = pos[lab == class_index]
            out[sel] = cls_pos[site_index[sel] - self._cum[b, class_index]]
        return out

    def bed_rows(self) -> Iterator[tuple[str, int, int, str]]:
        """BED4 rows (chrom, start, end, class) of every site, merged into runs, in order."""
        for b in range(self.n_blocks):
            chrom = self.chrom_names[int(self.block_chrom[b])]
            pos, lab = self.block_positions(b)
            keep = lab >= 0
            pos, lab = pos[keep], lab[keep]
            if not pos.size:
                continue
            brk = np.flatnonzero((np.diff(pos) != 1) | (np.diff(lab) != 0)) + 1
            starts = np.concatenate([[0], brk])
            ends = np.concatenate([brk, [pos.size]])
            for s, e in zip(starts.tolist(), ends.tolist()):
                yield chrom, int(pos[s]), int(pos[e - 1]) + 1, self.class_names[int(lab[s])]

    def blocks(self) -> list[Block]:
        """The blocks as spectra-schema :class:`~driftband.spectra.Block` objects."""
        return [
            Block(self.chrom_names[int(c)], int(s), int(e), f"block{b + 1}")
            for b, (c, s, e) in enumerate(zip(self.block_chrom, self.block_start, self.block_end))
        ]


def make_layout(
    sites: tuple[int, int],
    blocks: int,
    chromosomes: int,
    class_names: tuple[str, str] = ("0fold", "4fold"),
    gene_codons: int = 300,
    spacer: int = 300,
) -> GenomeLayout:
    """Lay out ``sites = (L_selected, L_neutral)`` sites in ``blocks`` equal blocks.

    Each class is split into blocks of equal size (the first ``L mod K`` blocks get one
    site more); blocks are placed contiguously on ``chromosomes`` chromosomes.
    """
    K = int(blocks)
    C = max(1, min(int(chromosomes), K))
    bs = np.empty((K, 2), dtype=np.int64)
    for ci, L in enumerate(sites):
        bs[:, ci] = L // K + (np.arange(K) < L % K)
    block_chrom = (np.arange(K) * C) // K
    lengths = np.empty(K, dtype=np.int64)
    tmp = GenomeLayout(
        class_names,
        bs,
        block_chrom,
        np.zeros(K, np.int64),
        np.zeros(K, np.int64),
        [],
        np.zeros(C, np.int64),
        gene_codons,
        spacer,
    )
    for b in range(K):
        sizes = tmp._genes(b)
        lengths[b] = sizes.size * spacer + 3 * int(sizes.sum())
    starts = np.zeros(K, dtype=np.int64)
    chrom_len = np.zeros(C, dtype=np.int64)
    for b in range(K):
        c = block_chrom[b]
        starts[b] = chrom_len[c]
        chrom_len[c] += lengths[b]
    chrom_len += spacer
    names = [f"chr{i + 1}" for i in range(C)]
    return GenomeLayout(
        class_names,
        bs,
        block_chrom,
        starts,
        starts + lengths,
        names,
        chrom_len,
        gene_codons,
        spacer,
    )
