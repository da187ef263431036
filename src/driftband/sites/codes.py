"""Genetic codes by NCBI translation-table number, and the degeneracy of codon positions.

Each table is built from NCBI's 64-letter amino-acid string (the ``AAs`` line of the NCBI
"Genetic Codes" page), whose codons run in the order T, C, A, G at the first, second and
third position (``TTT, TTC, TTA, TTG, TCT, ...``); ``*`` is a stop. The strings below are
written from memory of that page and are checked codon by codon against Biopython's
``Bio.Data.CodonTable`` in ``tests/test_codes.py`` and ``reference_checks/``.

Inside driftband codons are indexed in A, C, G, T order: ``index = 16*b1 + 4*b2 + b3``
with A=0, C=1, G=2, T=3, so that a base code array turns into codon indices by arithmetic.

Degeneracy of a position of a sense codon is the number of the three possible point
changes at that position that are synonymous (a change to a stop codon is nonsynonymous):
0 → ``0fold``, 1 → ``2fold``, 2 → ``3fold``, 3 → ``4fold`` (an n-fold degenerate site is
one where n of the four bases code the same amino acid; common practice).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cache

import numpy as np

from ..exceptions import OptionError

__all__ = [
    "DEGENERACY_NAMES",
    "NCBI_TABLES",
    "GeneticCode",
    "codon_index",
    "genetic_code",
]

#: NCBI codon order of the 64-letter strings: first, second and third base over T, C, A, G.
_NCBI_ORDER = "TCAG"
#: driftband's base codes.
BASES = "ACGT"

#: Class names by number of synonymous changes (0..3) at a position.
DEGENERACY_NAMES = ("0fold", "2fold", "3fold", "4fold")

#: NCBI translation tables: number -> (name, 64-letter amino-acid string in TCAG order).
#: Tables 27, 28 and 31, whose stop codons are read as sense codons depending on context,
#: are left out on purpose: a site's degeneracy is not defined by the table alone there.
NCBI_TABLES: dict[int, tuple[str, str]] = {
    1: ("Standard", "FFLLSSSSYY**CC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG"),
    2: (
        "Vertebrate Mitochondrial",
        "FFLLSSSSYY**CCWWLLLLPPPPHHQQRRRRIIMMTTTTNNKKSS**VVVVAAAADDEEGGGG",
    ),
    3: ("Yeast Mitochondrial", "FFLLSSSSYY**CCWWTTTTPPPPHHQQRRRRIIMMTTTTNNKKSSRRVVVVAAAADDEEGGGG"),
    4: (
        "Mold, Protozoan and Coelenterate Mitochondrial; Mycoplasma; Spiroplasma",
        "FFLLSSSSYY**CCWWLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    5: (
        "Invertebrate Mitochondrial",
        "FFLLSSSSYY**CCWWLLLLPPPPHHQQRRRRIIMMTTTTNNKKSSSSVVVVAAAADDEEGGGG",
    ),
    6: (
        "Ciliate, Dasycladacean and Hexamita Nuclear",
        "FFLLSSSSYYQQCC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    9: (
        "Echinoderm and Flatworm Mitochondrial",
        "FFLLSSSSYY**CCWWLLLLPPPPHHQQRRRRIIIMTTTTNNNKSSSSVVVVAAAADDEEGGGG",
    ),
    10: ("Euplotid Nuclear", "FFLLSSSSYY**CCCWLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG"),
    11: (
        "Bacterial, Archaeal and Plant Plastid",
        "FFLLSSSSYY**CC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    12: (
        "Alternative Yeast Nuclear",
        "FFLLSSSSYY**CC*WLLLSPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    13: (
        "Ascidian Mitochondrial",
        "FFLLSSSSYY**CCWWLLLLPPPPHHQQRRRRIIMMTTTTNNKKSSGGVVVVAAAADDEEGGGG",
    ),
    14: (
        "Alternative Flatworm Mitochondrial",
        "FFLLSSSSYYY*CCWWLLLLPPPPHHQQRRRRIIIMTTTTNNNKSSSSVVVVAAAADDEEGGGG",
    ),
    16: (
        "Chlorophycean Mitochondrial",
        "FFLLSSSSYY*LCC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    21: (
        "Trematode Mitochondrial",
        "FFLLSSSSYY**CCWWLLLLPPPPHHQQRRRRIIMMTTTTNNNKSSSSVVVVAAAADDEEGGGG",
    ),
    22: (
        "Scenedesmus obliquus Mitochondrial",
        "FFLLSS*SYY*LCC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    23: (
        "Thraustochytrium Mitochondrial",
        "FF*LSSSSYY**CC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    24: (
        "Rhabdopleuridae Mitochondrial",
        "FFLLSSSSYY**CCWWLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSSKVVVVAAAADDEEGGGG",
    ),
    25: (
        "Candidate Division SR1 and Gracilibacteria",
        "FFLLSSSSYY**CCGWLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    26: (
        "Pachysolen tannophilus Nuclear",
        "FFLLSSSSYY**CC*WLLLAPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    29: ("Mesodinium Nuclear", "FFLLSSSSYYYYCC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG"),
    30: ("Peritrich Nuclear", "FFLLSSSSYYEECC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG"),
    32: (
        "Balanophoraceae Plastid",
        "FFLLSSSSYY*WCC*WLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSRRVVVVAAAADDEEGGGG",
    ),
    33: (
        "Cephalodiscidae Mitochondrial",
        "FFLLSSSSYYY*CCWWLLLLPPPPHHQQRRRRIIIMTTTTNNKKSSSKVVVVAAAADDEEGGGG",
    ),
}


def codon_index(codon: str) -> int:
    """Index (0..63, A/C/G/T order) of a codon such as ``"ATG"`` (case-insensitive).

    Examples
    --------
    >>> codon_index("AAA"), codon_index("ATG"), codon_index("TTT")
    (0, 14, 63)
    """
    c = codon.upper()
    if len(c) != 3 or any(b not in BASES for b in c):
        raise ValueError(f"`codon` must be three of A, C, G, T; got {codon!r}")
    return 16 * BASES.index(c[0]) + 4 * BASES.index(c[1]) + BASES.index(c[2])


def _codon_str(i: int) -> str:
    return BASES[i // 16] + BASES[(i // 4) % 4] + BASES[i % 4]


@dataclass(frozen=True)
class GeneticCode:
    """A genetic code: the amino acid of each of the 64 codons, and derived tables.

    Attributes
    ----------
    number : int
        NCBI translation-table number.
    name : str
        NCBI's name of the table.
    amino_acids : str
        64 letters in driftband's A/C/G/T codon order; ``*`` marks a stop.
    """

    number: int
    name: str
    amino_acids: str
    _deg: np.ndarray = field(init=False, repr=False, compare=False)
    _stop: np.ndarray = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        aa = np.frombuffer(self.amino_acids.encode("ascii"), dtype=np.uint8)
        deg = np.zeros((64, 3), dtype=np.int8)
        for c in range(64):
            if self.amino_acids[c] == "*":
                deg[c, :] = -1
                continue
            for p, weight in enumerate((16, 4, 1)):
                base = (c // weight) % 4
                others = [c + (b - base) * weight for b in range(4) if b != base]
                deg[c, p] = int(np.sum(aa[others] == aa[c]))
        deg.setflags(write=False)
        stop = np.array([a == "*" for a in self.amino_acids])
        stop.setflags(write=False)
        object.__setattr__(self, "_deg", deg)
        object.__setattr__(self, "_stop", stop)

    @classmethod
    def from_ncbi(cls, number: int, name: str, ncbi_string: str) -> GeneticCode:
        """Build a code from NCBI's 64-letter string (codons in T, C, A, G order)."""
        if len(ncbi_string) != 64:
            raise ValueError(f"`ncbi_string` must have 64 letters, got {len(ncbi_string)}")
        letters = []
        for c in range(64):
            codon = _codon_str(c)
            k = sum(_NCBI_ORDER.index(b) * w for b, w in zip(codon, (16, 4, 1)))
            letters.append(ncbi_string[k])
        return cls(number, name, "".join(letters))

    @property
    def degeneracy(self) -> np.ndarray:
        """Synonymous changes per codon position.

        Returns
        -------
        ndarray of int8, shape (64, 3)
            Entry ``[c, p]`` is how many of the three other bases at position ``p``
            (0-based) of codon ``c`` leave the amino acid unchanged (0..3); a change to a
            stop counts as nonsynonymous. Rows of stop codons are -1. Read-only.
        """
        return self._deg

    @property
    def is_stop(self) -> np.ndarray:
        """Boolean array of shape (64,): which codons are stops (read-only)."""
        return self._stop

    def translate(self, codon: str) -> str:
        """Amino acid (one letter, ``*`` for stop) of a codon such as ``"TGA"``."""
        return self.amino_acids[codon_index(codon)]

    def position_class(self, codon: str, position: int) -> str | None:
        """Degeneracy class of one position (0, 1 or 2) of a codon, None for a stop.

        Examples
        --------
        >>> code = genetic_code(1)
        >>> code.position_class("CTG", 2), code.position_class("ATG", 0)
        ('4fold', '0fold')
        """
        k = int(self._deg[codon_index(codon), position])
        return None if k < 0 else DEGENERACY_NAMES[k]

    def fourfold_boxes(self) -> list[str]:
        """Codon boxes ``XYN`` whose four codons all code one amino acid (e.g. ``"GC"``)."""
        out = []
        for first in range(4):
            for second in range(4):
                box = self.amino_acids[16 * first + 4 * second : 16 * first + 4 * second + 4]
                if box[0] != "*" and len(set(box)) == 1:
                    out.append(BASES[first] + BASES[second])
        return out


@cache
def genetic_code(number: int) -> GeneticCode:
    """The genetic code of an NCBI translation-table number.

    Parameters
    ----------
    number : int
        NCBI table number, e.g. 1 (standard), 2 (vertebrate mitochondrial), 11 (bacterial,
        archaeal and plant plastid).

    Returns
    -------
    GeneticCode

    Raises
    ------
    OptionError
        For a number that is not one of :data:`NCBI_TABLES`.

    Examples
    --------
    >>> genetic_code(2).translate("TGA")
    'W'
    """
    try:
        number = int(number)
        name, aas = NCBI_TABLES[number]
    except (KeyError, ValueError, TypeError):
        known = ", ".join(str(k) for k in NCBI_TABLES)
        raise OptionError(
            f"--code {number!r}: not a supported NCBI translation table; use one of {known}"
        ) from None
    return GeneticCode.from_ncbi(number, name, aas)
