"""Genetic codes and codon-position degeneracy (driftband.sites.codes).

References: Biopython's ``Bio.Data.CodonTable`` (a general-purpose reference library that
carries NCBI's translation tables), and facts of the trade about the standard code.
"""

import doctest

import numpy as np
import pytest
from Bio.Data import CodonTable

from driftband.exceptions import OptionError
from driftband.sites import codes
from driftband.sites.codes import (
    DEGENERACY_NAMES,
    NCBI_TABLES,
    codon_index,
    genetic_code,
)

BASES = "ACGT"
ALL_CODONS = [a + b + c for a in BASES for b in BASES for c in BASES]


def biopython_class(table_id: int, codon: str, position: int) -> str | None:
    """Degeneracy class straight from Biopython's table: count the synonymous changes
    among the three other bases at ``position``; a change to a stop is nonsynonymous.
    None for a stop codon."""
    t = CodonTable.unambiguous_dna_by_id[table_id]
    if codon in t.stop_codons:
        return None
    aa = t.forward_table[codon]
    syn = 0
    for b in BASES:
        if b == codon[position]:
            continue
        other = codon[:position] + b + codon[position + 1 :]
        if other not in t.stop_codons and t.forward_table[other] == aa:
            syn += 1
    return {0: "0fold", 1: "2fold", 2: "3fold", 3: "4fold"}[syn]


@pytest.mark.parametrize("table_id", [1, 2, 11])
def test_every_position_of_all_64_codons_matches_biopython(table_id):
    # Source: Biopython Bio.Data.CodonTable.unambiguous_dna_by_id (NCBI tables 1, 2, 11).
    code = genetic_code(table_id)
    for codon in ALL_CODONS:
        for p in range(3):
            assert code.position_class(codon, p) == biopython_class(table_id, codon, p), (
                table_id,
                codon,
                p,
            )


@pytest.mark.parametrize("table_id", sorted(NCBI_TABLES))
def test_every_supported_table_matches_biopython(table_id):
    # Source: Biopython Bio.Data.CodonTable; each of our 64-letter strings (written from
    # memory of NCBI's Genetic Codes page) must give Biopython's amino acid and stops.
    t = CodonTable.unambiguous_dna_by_id[table_id]
    code = genetic_code(table_id)
    for codon in ALL_CODONS:
        expected = "*" if codon in t.stop_codons else t.forward_table[codon]
        assert code.translate(codon) == expected, (table_id, codon)
    deg = code.degeneracy
    for codon in ALL_CODONS:
        for p in range(3):
            want = biopython_class(table_id, codon, p)
            got = (
                None
                if deg[codon_index(codon), p] < 0
                else DEGENERACY_NAMES[deg[codon_index(codon), p]]
            )
            assert got == want, (table_id, codon, p)


def test_required_tables_are_supported():
    # The NCBI translation tables in common use, at least (NCBI's numbering, common
    # practice): standard; vertebrate, yeast, mould and invertebrate mitochondrial;
    # ciliate nuclear; echinoderm and flatworm mitochondrial; euplotid nuclear;
    # bacterial and plastid; alternative yeast nuclear.
    for n in (1, 2, 3, 4, 5, 6, 9, 10, 11, 12):
        assert genetic_code(n).number == n


def test_standard_code_has_eight_fourfold_boxes():
    # Common practice (textbook fact): the standard code has eight fourfold-degenerate
    # codon boxes: Leu CTN, Val GTN, Ser TCN, Pro CCN, Thr ACN, Ala GCN, Arg CGN, Gly GGN.
    boxes = genetic_code(1).fourfold_boxes()
    assert sorted(boxes) == sorted(["CT", "GT", "TC", "CC", "AC", "GC", "CG", "GG"])
    deg = genetic_code(1).degeneracy
    assert int((deg[:, 2] == 3).sum()) == 32  # 8 boxes x 4 codons, third position
    assert int((deg[:, :2] == 3).sum()) == 0  # never at first or second position


def test_standard_code_facts():
    # Common practice: in the standard code Met (ATG) and Trp (TGG) are 0-fold at every
    # position; the third position of Ile (ATT, ATC, ATA) is the only threefold site; the
    # first position of Leu TTA/TTG/CTA/CTG and Arg AGA/AGG/CGA/CGG is twofold.
    code = genetic_code(1)
    for codon in ("ATG", "TGG"):
        assert [code.position_class(codon, p) for p in range(3)] == ["0fold"] * 3
    three = [(c, p) for c in ALL_CODONS for p in range(3) if code.position_class(c, p) == "3fold"]
    assert three == [("ATA", 2), ("ATC", 2), ("ATT", 2)]
    for codon in ("TTA", "TTG", "CTA", "CTG", "AGA", "AGG", "CGA", "CGG"):
        assert code.position_class(codon, 0) == "2fold", codon
    assert code.is_stop.sum() == 3
    assert code.position_class("TAA", 0) is None


def test_vertebrate_mitochondrial_differences():
    # NCBI table 2 (from memory, and checked against Biopython above): TGA = Trp,
    # ATA = Met, AGA/AGG = stop. So Trp TGG becomes twofold at the third position and
    # the Ile box ATT/ATC becomes twofold.
    code = genetic_code(2)
    assert code.translate("TGA") == "W" and code.translate("ATA") == "M"
    assert code.translate("AGA") == "*" and code.translate("AGG") == "*"
    assert code.position_class("TGG", 2) == "2fold"
    assert code.position_class("ATT", 2) == "2fold"
    # Ser AGT/AGC: AGA/AGG are stops, so the third position is twofold (AGT<->AGC).
    assert code.position_class("AGC", 2) == "2fold"


def test_codon_index_order_and_errors():
    assert [codon_index(c) for c in ALL_CODONS] == list(range(64))
    assert codon_index("atg") == codon_index("ATG")
    with pytest.raises(ValueError, match="codon"):
        codon_index("ANG")


def test_unknown_table_is_an_option_error():
    with pytest.raises(OptionError, match="--code 7"):
        genetic_code(7)  # table 7 was withdrawn by NCBI (merged into 4)
    with pytest.raises(OptionError):
        genetic_code("x")


def test_degeneracy_table_is_read_only_and_shaped():
    deg = genetic_code(1).degeneracy
    assert deg.shape == (64, 3) and deg.dtype == np.int8
    with pytest.raises(ValueError):
        deg[0, 0] = 1


def test_doctests():
    assert doctest.testmod(codes).failed == 0
