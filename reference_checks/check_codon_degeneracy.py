"""Reference check: codon-position degeneracy of driftband's genetic codes.

Compares, for every NCBI translation table driftband supports, the class (0-fold, 2-fold,
3-fold, 4-fold, or stop) of each of the three positions of all 64 codons with the class
computed directly from Biopython's codon tables (``Bio.Data.CodonTable``, a general-purpose
reference library carrying NCBI's tables), and checks the textbook fact that the standard
code has eight fourfold-degenerate codon boxes (common practice).

Run ``python reference_checks/check_codon_degeneracy.py``: one PASS/FAIL line per check
with its source; exit status 0 when all pass. ``tests/test_reference_checks_classify.py``
imports it and runs :func:`run_checks`.
"""

from __future__ import annotations

import sys
from typing import NamedTuple

BASES = "ACGT"
CLASS_NAMES = {0: "0fold", 1: "2fold", 2: "3fold", 3: "4fold"}


class Check(NamedTuple):
    """One check: name, outcome, what differed (empty when passed), source."""

    name: str
    passed: bool
    detail: str
    source: str


def biopython_classes(table_id: int) -> dict[tuple[str, int], str | None]:
    """(codon, position) -> class from Biopython's table; None for a stop codon."""
    from Bio.Data import CodonTable

    t = CodonTable.unambiguous_dna_by_id[table_id]
    out: dict[tuple[str, int], str | None] = {}
    for a in BASES:
        for b in BASES:
            for c in BASES:
                codon = a + b + c
                for p in range(3):
                    if codon in t.stop_codons:
                        out[codon, p] = None
                        continue
                    syn = 0
                    for x in BASES:
                        other = codon[:p] + x + codon[p + 1 :]
                        if (
                            x != codon[p]
                            and other not in t.stop_codons
                            and t.forward_table[other] == t.forward_table[codon]
                        ):
                            syn += 1
                    out[codon, p] = CLASS_NAMES[syn]
    return out


def run_checks() -> list[Check]:
    """Run every check and return the outcomes."""
    from driftband.sites.codes import NCBI_TABLES, genetic_code

    checks = []
    src = "Biopython Bio.Data.CodonTable.unambiguous_dna_by_id"
    for n in sorted(NCBI_TABLES):
        code = genetic_code(n)
        ref = biopython_classes(n)
        bad = [
            f"{codon}:{p + 1} ours={code.position_class(codon, p)} ref={want}"
            for (codon, p), want in ref.items()
            if code.position_class(codon, p) != want
        ]
        checks.append(
            Check(
                f"table {n} ({code.name}): class of 192 codon positions",
                not bad,
                "; ".join(bad[:5]),
                f"{src}[{n}]",
            )
        )
    boxes = sorted(genetic_code(1).fourfold_boxes())
    want = sorted(["AC", "CC", "CG", "CT", "GC", "GG", "GT", "TC"])
    checks.append(
        Check(
            "standard code has eight fourfold-degenerate boxes "
            "(Thr, Pro, Arg, Leu, Ala, Gly, Val, Ser)",
            boxes == want,
            "" if boxes == want else f"found {boxes}",
            "common practice (textbook genetic code)",
        )
    )
    return checks


def main(argv: list[str] | None = None) -> int:
    """Print one PASS/FAIL line per check; return 0 when all pass, else 1."""
    checks = run_checks()
    for c in checks:
        line = f"{'PASS' if c.passed else 'FAIL'}  {c.name}  [source: {c.source}]"
        if c.detail:
            line += f"  {c.detail}"
        print(line)
    failed = sum(not c.passed for c in checks)
    print(f"{len(checks) - failed} passed, {failed} failed")
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
