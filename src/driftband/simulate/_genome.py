"""A reference genome for a simulated study: real codons behind the synthetic site classes.

Every codon of the layout (see :mod:`._layout`) gets a sense codon of the standard
genetic code whose positions have exactly the layout's classes: for example a
``(0fold, 0fold, 4fold)`` codon is one of GCN, GGN, CCN, ACN, GTN or TCN. A position's
class is the number of synonymous changes among its three possible point changes (a
change to a stop codon counts as nonsynonymous): 0 → 0-fold, 3 → 4-fold (common practice).
Each gene is a single-exon CDS on the plus strand, the layout's codons followed by a stop
codon; the bases between genes are random. Classifying this FASTA and GFF3 again gives
back the layout's sites BED exactly.

Where a VCF record's REF is to carry the derived base, the derived base is chosen among
those that leave the classes of the codon's three positions unchanged (so the reference
codon keeps its classes); if none does, the record keeps the ancestral REF.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import IO

import numpy as np

from ._layout import CODON_PATTERNS, GenomeLayout

__all__ = [
    "CODON_POSITION_CLASSES",
    "PATTERN_CODONS",
    "STANDARD_CODE",
    "ReferenceGenome",
    "build_reference",
    "fasta_index",
    "write_fasta",
    "write_gff3",
]

#: NCBI translation table 1 (standard code) as its 64-letter amino-acid string, codons in
#: T, C, A, G order at the first, second and third position; ``*`` is a stop (NCBI
#: "The Genetic Codes" page, from memory; checked against Biopython in the tests).
STANDARD_CODE = "FFLLSSSSYY**CC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG"

BASES = "ACGT"
_TCAG = "TCAG"


def _amino_acids() -> np.ndarray:
    """Amino acid of each codon index 16·b1 + 4·b2 + b3 (A, C, G, T = 0..3)."""
    aa = np.empty(64, dtype="<U1")
    for i in range(64):
        b = (BASES[i // 16], BASES[(i // 4) % 4], BASES[i % 4])
        j = 16 * _TCAG.index(b[0]) + 4 * _TCAG.index(b[1]) + _TCAG.index(b[2])
        aa[i] = STANDARD_CODE[j]
    return aa


_AA = _amino_acids()


def _position_classes() -> np.ndarray:
    out = np.full((64, 3), -1, dtype=np.int8)
    for c in range(64):
        if _AA[c] == "*":
            out[c] = -2
            continue
        digits = [c // 16, (c // 4) % 4, c % 4]
        for k in range(3):
            syn = 0
            for b in range(4):
                if b == digits[k]:
                    continue
                d = list(digits)
                d[k] = b
                syn += _AA[16 * d[0] + 4 * d[1] + d[2]] == _AA[c]
            out[c, k] = 0 if syn == 0 else (1 if syn == 3 else -1)
    return out


#: Class of each position of each codon (index 16·b1 + 4·b2 + b3, A, C, G, T = 0..3):
#: 0 = 0-fold, 1 = 4-fold, −1 = 2- or 3-fold, −2 = stop codon.
CODON_POSITION_CLASSES = _position_classes()

#: Sense codons whose position classes equal each row of :data:`CODON_PATTERNS`
#: (the ``(., ., 4fold)`` row has none: a second codon position is never 4-fold).
PATTERN_CODONS = [
    np.flatnonzero((CODON_POSITION_CLASSES == row).all(axis=1)) for row in CODON_PATTERNS
]

_STOPS = np.flatnonzero(_AA == "*")


@dataclass
class ReferenceGenome:
    """Sequences and genes of a simulated study's reference.

    Attributes
    ----------
    seqs : list of ndarray of uint8
        Base codes (A, C, G, T = 0..3) per chromosome, in layout order.
    phase : list of ndarray of int8
        Position of each base in its sense codon (0, 1, 2), −1 outside sense codons.
    genes : list of (int, int, int)
        ``(chromosome index, start, end)`` of each CDS, 0-based half-open, stop included.
    real_codons : bool
        False if some codons had no real codon with their classes (more 4fold than 0fold
        sites in a block); the FASTA would then not reproduce the BED.
    """

    seqs: list[np.ndarray]
    phase: list[np.ndarray]
    genes: list[tuple[int, int, int]]
    real_codons: bool = True

    def pick_ref_derived(
        self, chrom: int, codon_start: int, k: int, anc: int, rng: np.random.Generator
    ) -> int:
        """A derived base for position ``k`` of a codon that keeps its position classes.

        Returns the base code, or −1 if no other base keeps the classes.
        """
        seq = self.seqs[chrom]
        d = [int(x) for x in seq[codon_start : codon_start + 3]]
        c = 16 * d[0] + 4 * d[1] + d[2]
        ok = []
        for b in range(4):
            if b == anc:
                continue
            e = list(d)
            e[k] = b
            c2 = 16 * e[0] + 4 * e[1] + e[2]
            if np.array_equal(CODON_POSITION_CLASSES[c2], CODON_POSITION_CLASSES[c]):
                ok.append(b)
        return int(rng.choice(ok)) if ok else -1


def build_reference(layout: GenomeLayout, rng: np.random.Generator) -> ReferenceGenome:
    """Random intergenic bases and, for every codon of the layout, a matching real codon.

    Parameters
    ----------
    layout : GenomeLayout
    rng : numpy.random.Generator

    Returns
    -------
    ReferenceGenome
    """
    seqs = [rng.integers(0, 4, int(n)).astype(np.uint8) for n in layout.chrom_lengths]
    phase = [np.full(int(n), -1, dtype=np.int8) for n in layout.chrom_lengths]
    genes: list[tuple[int, int, int]] = []
    real = True
    for b in range(layout.n_blocks):
        ci = int(layout.block_chrom[b])
        seq = seqs[ci]
        start, pat = layout.block_codons(b)
        codon = np.empty(pat.size, dtype=np.int64)
        for t in range(len(CODON_PATTERNS)):
            sel = pat == t
            if not sel.any():
                continue
            choices = PATTERN_CODONS[t]
            if choices.size:
                codon[sel] = choices[rng.integers(0, choices.size, int(sel.sum()))]
            else:
                real = False
                codon[sel] = rng.integers(0, 64, int(sel.sum()))
        seq[start] = codon // 16
        seq[start + 1] = (codon // 4) % 4
        seq[start + 2] = codon % 4
        for k in range(3):
            phase[ci][start + k] = k
        for s, e in layout.gene_intervals(b):
            stop = int(_STOPS[rng.integers(0, _STOPS.size)])
            seq[e : e + 3] = (stop // 16, (stop // 4) % 4, stop % 4)
            genes.append((ci, s, e + 3))
    return ReferenceGenome(seqs, phase, genes, real)


def write_fasta(fh: IO[str], names: list[str], seqs: list[np.ndarray], width: int = 60) -> None:
    """Write sequences (base codes) as FASTA to an open text file."""
    letters = np.frombuffer(BASES.encode(), dtype=np.uint8)
    for name, seq in zip(names, seqs):
        fh.write(f">{name}\n")
        text = letters[seq].tobytes().decode()
        fh.write("\n".join(text[i : i + width] for i in range(0, len(text), width)))
        fh.write("\n")


def write_gff3(
    fh: IO[str],
    names: list[str],
    lengths: list[int],
    ref: ReferenceGenome,
    source: str = "driftband_simulate",
) -> None:
    """Write the genes as GFF3 (gene → mRNA → exon + CDS, plus strand, phase 0)."""
    fh.write("##gff-version 3\n")
    for name, n in zip(names, lengths):
        fh.write(f"##sequence-region {name} 1 {int(n)}\n")
    width = max(5, len(str(len(ref.genes))))
    for g, (ci, s, e) in enumerate(ref.genes, start=1):
        gid = f"gene{g:0{width}d}"
        tid = f"{gid}.t1"
        chrom = names[ci]
        a, b = s + 1, e
        fh.write(f"{chrom}\t{source}\tgene\t{a}\t{b}\t.\t+\t.\tID={gid};Name={gid}\n")
        fh.write(f"{chrom}\t{source}\tmRNA\t{a}\t{b}\t.\t+\t.\tID={tid};Parent={gid}\n")
        fh.write(f"{chrom}\t{source}\texon\t{a}\t{b}\t.\t+\t.\tID={tid}.exon1;Parent={tid}\n")
        fh.write(f"{chrom}\t{source}\tCDS\t{a}\t{b}\t.\t+\t0\tID={tid}.cds;Parent={tid}\n")


def fasta_index(path: str | os.PathLike) -> None:
    """Make the ``.fai`` index of a plain FASTA (pysam)."""
    import pysam

    pysam.faidx(os.fspath(path))
