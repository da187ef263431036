"""``driftband classify``: 0-fold and 4-fold sites from hand-worked tiny genomes.

Every expected class below is worked out by hand from the standard genetic code (NCBI
translation table 1; common practice) and written beside the sequence. A random-genome test
compares the vectorised classifier with a slow, obviously correct implementation built on
Biopython (``Bio.Seq`` and ``Bio.Data.CodonTable``, a general-purpose reference library).
"""

from __future__ import annotations

import gzip
import os
import random
import subprocess
import sys

import numpy as np
import pytest
from Bio.Data import CodonTable
from Bio.Seq import Seq

from driftband.cli import main
from driftband.exceptions import InputError, OptionError
from driftband.sites.bed import read_site_classes
from driftband.sites.classify import classify_sites, coding_sequences
from driftband.sites.gff import read_gff3

# ----------------------------------------------------------------------------- helpers

# The coding sequence used throughout: ATG GCT TGG AAA TAA  (Met Ala Trp Lys stop).
#   ATG  Met: every change is nonsynonymous           -> 0fold 0fold 0fold
#   GCT  Ala: GCN box                                  -> 0fold 0fold 4fold
#   TGG  Trp: TGA stop, TGC/TGT Cys, AGG/CGG Arg, GGG Gly, TAG stop, TCG Ser, TTG Leu
#                                                      -> 0fold 0fold 0fold
#   AAA  Lys: CAA Gln, GAA Glu, TAA stop; ACA/AGA/ATA; AAG Lys, AAC/AAT Asn
#                                                      -> 0fold 0fold 2fold
#   TAA  stop codon                                    -> not classified
CDS = "ATGGCTTGGAAATAA"


def write_fasta(path, records: dict[str, str], width: int = 60) -> str:
    with open(path, "w") as fh:
        for name, seq in records.items():
            fh.write(f">{name} test sequence\n")
            for i in range(0, len(seq), width):
                fh.write(seq[i : i + width] + "\n")
    return str(path)


def gff_line(seqid, ftype, start, end, strand, phase=".", attrs=""):
    return f"{seqid}\tunit\t{ftype}\t{start}\t{end}\t.\t{strand}\t{phase}\t{attrs}\n"


def gene_lines(seqid, gene, txs, strand):
    """GFF3 lines of a gene; ``txs`` maps transcript ID -> list of (start, end, phase)."""
    starts = [s for parts in txs.values() for s, _, _ in parts]
    ends = [e for parts in txs.values() for _, e, _ in parts]
    out = [gff_line(seqid, "gene", min(starts), max(ends), strand, ".", f"ID={gene}")]
    for tx, parts in txs.items():
        out.append(
            gff_line(
                seqid,
                "mRNA",
                min(s for s, _, _ in parts),
                max(e for _, e, _ in parts),
                strand,
                ".",
                f"ID={tx};Parent={gene}",
            )
        )
        for s, e, ph in parts:
            out.append(gff_line(seqid, "CDS", s, e, strand, ph, f"ID=cds-{tx};Parent={tx}"))
    return out


def write_gff(path, lines, gz: bool = False) -> str:
    text = "##gff-version 3\n" + "".join(lines)
    if gz:
        with gzip.open(path, "wt") as fh:
            fh.write(text)
    else:
        with open(path, "w") as fh:
            fh.write(text)
    return str(path)


def bed_rows(result):
    return [(c, s, e, n) for c, s, e, n in result.rows()]


def rc(s: str) -> str:
    return str(Seq(s).reverse_complement())


@pytest.fixture
def plus_genome(tmp_path):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(3, 17, 0)]}, "+"))
    return fa, gff


# ----------------------------------------------------------------------- strands, phase


def test_plus_strand_single_exon(plus_genome):
    res = classify_sites(*plus_genome)
    # 0-based: ATG 2-4, GCT 5-7 (7 = 4fold), TGG 8-10, AAA 11-13 (13 = 2fold), TAA 14-16.
    assert bed_rows(res) == [
        ("chr1", 2, 7, "0fold"),
        ("chr1", 7, 8, "4fold"),
        ("chr1", 8, 13, "0fold"),
    ]
    c = res.chroms[0]
    assert c.class_sites == {"0fold": 10, "2fold": 1, "3fold": 0, "4fold": 1}
    assert c.excluded["stop_codon"] == 1 and c.excluded["internal_stop"] == 0
    assert c.coding_sites == 15 and c.transcripts_used == 1


def test_minus_strand_single_exon(tmp_path):
    # The same CDS reverse-complemented: transcript base t sits at 0-based 16 - t.
    fa = write_fasta(tmp_path / "ref.fa", {"chr2": "GG" + rc(CDS) + "CC"})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr2", "g1", {"t1": [(3, 17, 0)]}, "-"))
    res = classify_sites(fa, gff)
    # ATG -> 16,15,14; GCT -> 13,12 (0fold), 11 (4fold); TGG -> 10,9,8; AAA -> 7,6
    # (0fold), 5 (2fold); stop -> 4,3,2.
    assert bed_rows(res) == [
        ("chr2", 6, 11, "0fold"),
        ("chr2", 11, 12, "4fold"),
        ("chr2", 12, 17, "0fold"),
    ]
    assert res.chroms[0].class_sites["2fold"] == 1


# Codons split over three exons: ATG GC|T GGA C|CG TAA (Met Ala Gly Pro stop).
#   exon 1 "ATGGC" phase 0; exon 2 "TGGAC" phase 1 (its first base ends GCT);
#   exon 3 "CGTAA" phase 2 (its first two bases end CCG).
SPLIT = "AA" + "ATGGC" + "GTAAGTTTAG" + "TGGAC" + "GTCCCAG" + "CGTAA" + "TT"
SPLIT_PARTS = [(3, 7, 0), (18, 22, 1), (30, 34, 2)]
# GCT: G5 C6 0fold, T17 4fold. GGA: G18 G19 0fold (AGA/CGA Arg, TGA stop; GAA/GCA/GTA),
# A20 4fold (GGN). CCG: C21 0fold (ACG/GCG/TCG), C29 0fold (CAG/CGG/CTG), G30 4fold (CCN).
SPLIT_BED = [
    (2, 7, "0fold"),
    (17, 18, "4fold"),
    (18, 20, "0fold"),
    (20, 21, "4fold"),
    (21, 22, "0fold"),
    (29, 30, "0fold"),
    (30, 31, "4fold"),
]


def test_codon_split_across_exons_with_phase_1_and_2(tmp_path):
    fa = write_fasta(tmp_path / "ref.fa", {"chr3": SPLIT})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr3", "g1", {"t1": SPLIT_PARTS}, "+"))
    res = classify_sites(fa, gff)
    assert bed_rows(res) == [("chr3", s, e, n) for s, e, n in SPLIT_BED]
    assert res.chroms[0].excluded["incomplete_codon"] == 0
    assert coding_sequences(fa, gff) == {"t1": "ATGGCTGGACCGTAA"}


def test_split_codons_on_the_minus_strand_mirror(tmp_path):
    # The mirror image: reverse-complement the chromosome and reflect every coordinate
    # (1-based start' = L - end + 1); phases stay with their parts. Each site of the BED
    # moves from x to L - 1 - x.
    L = len(SPLIT)
    parts = [(L - e + 1, L - s + 1, ph) for s, e, ph in SPLIT_PARTS]
    fa = write_fasta(tmp_path / "ref.fa", {"chr3m": rc(SPLIT)})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr3m", "g1", {"t1": parts}, "-"))
    res = classify_sites(fa, gff)
    expected = sorted((L - e, L - s, n) for s, e, n in SPLIT_BED)
    assert bed_rows(res) == [("chr3m", s, e, n) for s, e, n in expected]
    assert coding_sequences(fa, gff) == {"t1": "ATGGCTGGACCGTAA"}


def test_phase_of_first_part_skips_bases(tmp_path):
    # A 5'-partial CDS starting one base early with phase 1: that base is an incomplete
    # codon and everything else is classified as before (GFF3 spec: phase = bases to
    # skip to the first codon).
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(2, 17, 1)]}, "+"))
    res = classify_sites(fa, gff)
    assert bed_rows(res) == [
        ("chr1", 2, 7, "0fold"),
        ("chr1", 7, 8, "4fold"),
        ("chr1", 8, 13, "0fold"),
    ]
    assert res.chroms[0].excluded["incomplete_codon"] == 1


def test_wrong_phase_changes_the_frame(tmp_path):
    # With phase 1 on the exact CDS the frame shifts by one: codons TGG CTT GGA AAT, then
    # "AA" is incomplete. TGG 3-5 all 0fold; CTT 6,7 0fold, 8 4fold; GGA 9,10 0fold,
    # 11 4fold; AAT 12,13 0fold, 14 2fold (AAC Asn).
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(3, 17, 1)]}, "+"))
    res = classify_sites(fa, gff)
    assert bed_rows(res) == [
        ("chr1", 3, 8, "0fold"),
        ("chr1", 8, 9, "4fold"),
        ("chr1", 9, 11, "0fold"),
        ("chr1", 11, 12, "4fold"),
        ("chr1", 12, 14, "0fold"),
    ]
    assert res.chroms[0].excluded["incomplete_codon"] == 2  # the leading A, trailing AA


# ---------------------------------------------------------------- overlaps and exclusions


# Two transcripts of one gene on CC ATGGCTTGGAAATAA GG: t1 = the whole CDS (15 bases);
# t2 = ATG (3-5) + 7-17, read as ATG CTT GGA AAT AA (14 bases, last two incomplete).
# Where they overlap: 6 C (t1 GCT pos2 0fold, t2 CTT pos1 0fold: agree);
# 7 T (t1 4fold, t2 CTT pos2 0fold: conflict); 8 T (t1 TGG pos1 0fold, t2 CTT pos3 4fold:
# conflict); 9, 10 G (0fold in both); 11 A (t1 AAA pos1 0fold, t2 GGA pos3 4fold:
# conflict); 12 A (0fold in both); 13 A (t1 2fold, t2 AAT pos2 0fold: conflict);
# 14 T (t1 stop, t2 AAT pos3 2fold: conflict); 15, 16 (t1 stop, t2 incomplete: neither).
def _overlap_genome(tmp_path):
    fa = write_fasta(tmp_path / "ref.fa", {"chr4": "CC" + CDS + "GG"})
    gff = write_gff(
        tmp_path / "a.gff3",
        gene_lines("chr4", "g1", {"t1": [(3, 17, 0)], "t2": [(3, 5, 0), (7, 17, 0)]}, "+"),
    )
    return fa, gff


def test_overlapping_transcripts_that_disagree(tmp_path):
    res = classify_sites(*_overlap_genome(tmp_path), transcripts="agree")
    assert bed_rows(res) == [
        ("chr4", 2, 7, "0fold"),
        ("chr4", 9, 11, "0fold"),
        ("chr4", 12, 13, "0fold"),
    ]
    c = res.chroms[0]
    assert c.excluded["class_conflict"] == 5  # sites 7, 8, 11, 13, 14
    assert c.class_sites == {"0fold": 8, "2fold": 0, "3fold": 0, "4fold": 0}
    assert c.transcripts_used == 2


def test_longest_transcript_of_each_gene(tmp_path):
    res = classify_sites(*_overlap_genome(tmp_path), transcripts="longest")
    assert bed_rows(res) == [
        ("chr4", 2, 7, "0fold"),
        ("chr4", 7, 8, "4fold"),
        ("chr4", 8, 13, "0fold"),
    ]
    c = res.chroms[0]
    assert c.excluded["not_longest"] == 1 and c.excluded["class_conflict"] == 0


def test_internal_stop_excludes_the_transcript(tmp_path):
    # chr5 carries ATG TAG AAA TAA: TAG is an internal stop; chr1 is the usual CDS.
    fa = write_fasta(
        tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG", "chr5": "CC" + "ATGTAGAAATAA" + "GG"}
    )
    lines = gene_lines("chr1", "g1", {"t1": [(3, 17, 0)]}, "+") + gene_lines(
        "chr5", "g5", {"t5": [(3, 14, 0)]}, "+"
    )
    res = classify_sites(fa, write_gff(tmp_path / "a.gff3", lines))
    assert [r[0] for r in bed_rows(res)] == ["chr1"] * 3
    c5 = res.chroms[1]
    assert c5.chrom == "chr5" and c5.excluded["internal_stop"] == 1
    assert c5.transcripts_used == 0 and sum(c5.class_sites.values()) == 0
    assert res.total("internal_stop") == 1


@pytest.mark.parametrize("ambiguous", ["N", "n", "R"])
def test_codons_with_non_acgt_bases(tmp_path, ambiguous):
    # ATG GC? TGG AAA TAA: the whole GC? codon (5-7) is dropped, the rest as usual.
    seq = "CC" + CDS[:5] + ambiguous + CDS[6:] + "GG"
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": seq})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(3, 17, 0)]}, "+"))
    res = classify_sites(fa, gff)
    assert bed_rows(res) == [("chr1", 2, 5, "0fold"), ("chr1", 8, 13, "0fold")]
    assert res.chroms[0].excluded["non_acgt"] == 1


def test_incomplete_terminal_codon(tmp_path):
    # A 3'-partial CDS ATG GCT TG: the trailing "TG" is an incomplete codon.
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(3, 10, 0)]}, "+"))
    res = classify_sites(fa, gff)
    assert bed_rows(res) == [("chr1", 2, 7, "0fold"), ("chr1", 7, 8, "4fold")]
    assert res.chroms[0].excluded["incomplete_codon"] == 1
    assert res.chroms[0].excluded["stop_codon"] == 0


def test_softmasked_bases(tmp_path):
    seq = "CC" + CDS[:3] + CDS[3:9].lower() + CDS[9:] + "GG"  # GCT TGG soft-masked
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": seq})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(3, 17, 0)]}, "+"))
    used = classify_sites(fa, gff)
    assert bed_rows(used) == [
        ("chr1", 2, 7, "0fold"),
        ("chr1", 7, 8, "4fold"),
        ("chr1", 8, 13, "0fold"),
    ]
    dropped = classify_sites(fa, gff, exclude_softmasked=True)
    assert bed_rows(dropped) == [("chr1", 2, 5, "0fold"), ("chr1", 11, 13, "0fold")]
    assert dropped.chroms[0].excluded["softmasked"] == 6


def test_pseudogene_cds_is_excluded(tmp_path):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG" + "CC" + CDS + "GG"})
    lines = gene_lines("chr1", "g1", {"t1": [(3, 17, 0)]}, "+")
    lines.append(gff_line("chr1", "CDS", 22, 36, "+", 0, "ID=cds-p;Parent=p1;pseudo=true"))
    res = classify_sites(fa, write_gff(tmp_path / "a.gff3", lines))
    assert bed_rows(res) == [
        ("chr1", 2, 7, "0fold"),
        ("chr1", 7, 8, "4fold"),
        ("chr1", 8, 13, "0fold"),
    ]
    assert res.chroms[0].excluded["pseudo"] == 1


def test_other_genetic_code(tmp_path):
    # NCBI table 2 (vertebrate mitochondrial): ATA = Met, TGA = Trp, AGA/AGG = stop.
    #   ATG: CTG/GTG/TTG; AAG/ACG/AGG(stop); ATA Met (syn)  -> 0fold 0fold 2fold
    #   GCT: as in table 1                                   -> 0fold 0fold 4fold
    #   TGG: AGG(stop)/CGG/GGG; TAG/TCG/TTG; TGA Trp (syn)  -> 0fold 0fold 2fold
    #   AAA: CAA/GAA/TAA; ACA/AGA(stop)/ATA; AAG Lys (syn)   -> 0fold 0fold 2fold
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(3, 17, 0)]}, "+"))
    res = classify_sites(fa, gff, code=2)
    assert bed_rows(res) == [
        ("chr1", 2, 4, "0fold"),
        ("chr1", 5, 7, "0fold"),
        ("chr1", 7, 8, "4fold"),
        ("chr1", 8, 10, "0fold"),
        ("chr1", 11, 13, "0fold"),
    ]
    assert res.chroms[0].class_sites == {"0fold": 8, "2fold": 3, "3fold": 0, "4fold": 1}


# ---------------------------------------------------------------------- GFF3 standard


def test_multiple_parents_percent_encoding_and_gzip(tmp_path):
    # One CDS line shared by two transcripts (Parent=a,b); IDs with an encoded comma and
    # a seqid with an encoded semicolon (GFF3 spec: reserved characters are %-escaped).
    fa = write_fasta(tmp_path / "ref.fa", {"ctg;1": "CC" + CDS + "GG"})
    lines = [
        gff_line("ctg%3B1", "gene", 3, 17, "+", ".", "ID=g%2C1"),
        gff_line("ctg%3B1", "mRNA", 3, 17, "+", ".", "ID=t%2Ca;Parent=g%2C1"),
        gff_line("ctg%3B1", "mRNA", 3, 17, "+", ".", "ID=t%2Cb;Parent=g%2C1"),
        gff_line("ctg%3B1", "CDS", 3, 17, "+", 0, "ID=c1;Parent=t%2Ca,t%2Cb"),
    ]
    gff = write_gff(tmp_path / "a.gff3.gz", lines, gz=True)
    ann = read_gff3(gff)
    assert sorted(t.id for t in ann.transcripts) == ["t,a", "t,b"]
    assert {t.gene for t in ann.transcripts} == {"g,1"}
    assert {t.seqid for t in ann.transcripts} == {"ctg;1"}
    res = classify_sites(fa, gff, transcripts="longest")
    assert bed_rows(res) == [
        ("ctg;1", 2, 7, "0fold"),
        ("ctg;1", 7, 8, "4fold"),
        ("ctg;1", 8, 13, "0fold"),
    ]
    assert res.chroms[0].excluded["not_longest"] == 1  # two transcripts, one gene


def test_bgzipped_fasta_gets_fai_and_gzi(tmp_path):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    subprocess.run(["bgzip", fa], check=True)
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(3, 17, 0)]}, "+"))
    res = classify_sites(fa + ".gz", gff)
    assert os.path.exists(fa + ".gz.fai") and os.path.exists(fa + ".gz.gzi")
    assert res.total("0fold") == 10


# ------------------------------------------------ slow reference implementation (random)


def _reference_classes(genome: dict[str, str], txs, table_id: int) -> dict:
    """Obviously correct classifier: per transcript, splice with Python strings and
    Bio.Seq, walk codons, classify each position by Biopython's codon table, then keep a
    site only where every transcript covering it gives the same class."""
    t = CodonTable.unambiguous_dna_by_id[table_id]

    def cls(codon, p):
        if codon in t.stop_codons:
            return "stop"
        syn = sum(
            1
            for b in "ACGT"
            if b != codon[p]
            and (codon[:p] + b + codon[p + 1 :]) in t.forward_table
            and t.forward_table[codon[:p] + b + codon[p + 1 :]] == t.forward_table[codon]
        )
        return ["0fold", "2fold", "3fold", "4fold"][syn]

    seen: dict[tuple[str, int], set] = {}
    for chrom, strand, parts in txs:
        parts = sorted(parts, reverse=(strand == "-"))
        positions, bases = [], []
        for s, e in parts:  # 1-based closed
            rng = list(range(s - 1, e))
            seg = genome[chrom][s - 1 : e]
            if strand == "-":
                rng, seg = rng[::-1], rc(seg)
            positions += rng
            bases.append(seg)
        cds = "".join(bases)
        assert len(cds) % 3 == 0
        aa = str(Seq(cds).translate(table=table_id))
        assert "*" not in aa[:-1] and aa[-1] == "*"
        for i in range(0, len(cds), 3):
            for p in range(3):
                seen.setdefault((chrom, positions[i + p]), set()).add(cls(cds[i : i + 3], p))
    out = {}
    for site, classes in seen.items():
        if len(classes) == 1 and (c := next(iter(classes))) in ("0fold", "4fold"):
            out[site] = c
    return out


def _random_study(tmp_path, rng: random.Random, table_id: int):
    t = CodonTable.unambiguous_dna_by_id[table_id]
    sense = sorted(t.forward_table)
    stops = sorted(t.stop_codons)
    chroms = {f"c{k}": [rng.choice("ACGT") for _ in range(3000)] for k in range(2)}
    txs, lines = [], []
    for g in range(12):
        chrom = f"c{g % 2}"
        strand = rng.choice("+-")
        n_codons = rng.randint(8, 40)
        cds = "".join(rng.choice(sense) for _ in range(n_codons)) + rng.choice(stops)
        # cut into 1-4 exons with random introns
        cuts = sorted(rng.sample(range(1, len(cds)), rng.randint(0, 3)))
        exons = [cds[a:b] for a, b in zip([0, *cuts], [*cuts, len(cds)])]
        start = rng.randint(1, 3000 - len(cds) - 60 * len(exons) - 1)
        pos, parts = start, []
        genome_exons = exons if strand == "+" else [rc(x) for x in exons][::-1]
        for ex in genome_exons:
            parts.append((pos, pos + len(ex) - 1))
            pos += len(ex) + rng.randint(20, 60)
        for (s, e), ex in zip(parts, genome_exons):
            chroms[chrom][s - 1 : e] = list(ex)
        # phases from the transcript-order cumulative length (GFF3 spec)
        ordered = sorted(parts, reverse=(strand == "-"))
        done, gparts = 0, []
        for s, e in ordered:
            gparts.append((s, e, (3 - done % 3) % 3))
            done += e - s + 1
        txs.append((chrom, strand, parts))
        lines.append(gene_lines(chrom, f"g{g}", {f"t{g}": gparts}, strand))
    genome = {c: "".join(v) for c, v in chroms.items()}
    # genes written later may overwrite earlier ones: keep only transcripts still intact
    intact, keep_lines = [], []
    for (chrom, strand, parts), glines in zip(txs, lines):
        parts_sorted = sorted(parts, reverse=(strand == "-"))
        seg = "".join(
            genome[chrom][s - 1 : e] if strand == "+" else rc(genome[chrom][s - 1 : e])
            for s, e in parts_sorted
        )
        aa = str(Seq(seg).translate(table=table_id))
        if "*" not in aa[:-1] and aa[-1] == "*":
            intact.append((chrom, strand, parts))
            keep_lines += glines
    fa = write_fasta(tmp_path / "rand.fa", genome)
    gff = write_gff(tmp_path / "rand.gff3", keep_lines)
    return genome, intact, fa, gff


@pytest.mark.parametrize("seed,table_id", [(1, 1), (2, 1), (3, 2), (4, 11)])
def test_random_genomes_match_slow_reference(tmp_path, seed, table_id):
    genome, txs, fa, gff = _random_study(tmp_path, random.Random(seed), table_id)
    assert len(txs) >= 5
    expected = _reference_classes(genome, txs, table_id)
    res = classify_sites(fa, gff, code=table_id)
    got = {}
    for chrom, s, e, name in res.rows():
        for p in range(s, e):
            got[(chrom, p)] = name
    assert got == expected


# --------------------------------------------------------------------------- the CLI


def test_cli_writes_bed_readable_by_read_site_classes(tmp_path, plus_genome):
    out, summ = tmp_path / "sites.bed", tmp_path / "summary.tsv"
    assert (
        main(
            [
                "classify",
                "--fasta",
                plus_genome[0],
                "--gff",
                plus_genome[1],
                "-o",
                str(out),
                "--summary",
                str(summ),
            ]
        )
        == 0
    )
    sc = read_site_classes(out)
    assert sorted(sc.classes) == ["0fold", "4fold"]
    s, e = sc.classes["0fold"].chroms["chr1"]
    assert s.tolist() == [2, 8] and e.tolist() == [7, 13]
    s, e = sc.classes["4fold"].chroms["chr1"]
    assert s.tolist() == [7] and e.tolist() == [8]
    rows = [ln.split("\t") for ln in summ.read_text().splitlines() if not ln.startswith("#")]
    assert rows[0] == ["chrom", "kind", "name", "count", "unit"]
    table = {(r[0], r[2]): int(r[3]) for r in rows[1:]}
    assert table[("chr1", "0fold")] == 10 and table[("chr1", "4fold")] == 1
    assert table[("chr1", "2fold")] == 1 and table[("all", "stop_codon")] == 1
    # BED lines: sorted, merged, four columns
    lines = [ln.split("\t") for ln in out.read_text().splitlines()]
    assert lines == [
        ["chr1", "2", "7", "0fold"],
        ["chr1", "7", "8", "4fold"],
        ["chr1", "8", "13", "0fold"],
    ]


def test_to_site_classes_matches_the_bed(tmp_path):
    res = classify_sites(*_overlap_genome(tmp_path), transcripts="longest")
    sc = res.to_site_classes()
    s, e = sc.classes["0fold"].chroms["chr4"]
    assert s.tolist() == [2, 8] and e.tolist() == [7, 13]


def test_cli_refuses_existing_output_and_accepts_force(tmp_path, plus_genome, capsys):
    out = tmp_path / "sites.bed"
    out.write_text("old\n")
    args = ["classify", "--fasta", plus_genome[0], "--gff", plus_genome[1], "-o", str(out)]
    assert main(args) == 2
    assert "use --force" in capsys.readouterr().err and out.read_text() == "old\n"
    assert main([*args, "--force"]) == 0 and out.read_text().startswith("chr1\t2\t7")


def test_cli_help_has_examples():
    proc = subprocess.run(
        [sys.executable, "-m", "driftband", "classify", "--help"],
        capture_output=True,
        text=True,
        check=True,
    )
    assert "examples:" in proc.stdout and "--transcripts" in proc.stdout


# ----------------------------------------------------------------------- bad input


def _bad(tmp_path, capsys, fasta, gff, *extra):
    out = tmp_path / "out.bed"
    code = main(
        [
            "classify",
            "--fasta",
            str(fasta),
            "--gff",
            str(gff),
            "-o",
            str(out),
            "--summary",
            str(tmp_path / "s.tsv"),
            *extra,
        ]
    )
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert not out.exists() and not (tmp_path / "s.tsv").exists()
    assert not [p for p in os.listdir(tmp_path) if p.endswith(".tmp")]
    return err


def test_seqid_absent_suggests_chr_prefix(tmp_path, capsys):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("1", "g1", {"t1": [(3, 17, 0)]}, "+"))
    err = _bad(tmp_path, capsys, fa, gff)
    assert "'1'" in err and "a.gff3:4" in err and "'chr' prefix" in err


def test_seqid_absent_without_hint(tmp_path, capsys):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("scaf9", "g1", {"t1": [(3, 17, 0)]}, "+"))
    err = _bad(tmp_path, capsys, fa, gff)
    assert "'scaf9'" in err and "not a sequence of the FASTA" in err


def test_cds_without_parent(tmp_path, capsys):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", [gff_line("chr1", "CDS", 3, 17, "+", 0, "ID=c1")])
    err = _bad(tmp_path, capsys, fa, gff)
    assert "a.gff3:2" in err and "without a Parent" in err


@pytest.mark.parametrize("phase,word", [(".", "missing"), ("3", "invalid")])
def test_invalid_or_missing_phase(tmp_path, capsys, phase, word):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(
        tmp_path / "a.gff3", [gff_line("chr1", "CDS", 3, 17, "+", phase, "ID=c1;Parent=t1")]
    )
    err = _bad(tmp_path, capsys, fa, gff)
    assert "a.gff3:2" in err and word in err and "0, 1 or 2" in err


def test_cds_running_off_the_contig_end(tmp_path, capsys):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS})  # length 17
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(3, 20, 0)]}, "+"))
    err = _bad(tmp_path, capsys, fa, gff)
    assert "a.gff3:4" in err and "beyond the end of chr1 (length 17)" in err
    with pytest.raises(InputError, match="beyond the end"):
        classify_sites(fa, gff)


def test_plain_gzip_fasta_cannot_be_indexed(tmp_path, capsys):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    with open(fa, "rb") as src, gzip.open(fa + ".gz", "wb") as dst:
        dst.write(src.read())
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(3, 17, 0)]}, "+"))
    err = _bad(tmp_path, capsys, fa + ".gz", gff)
    assert "ref.fa.gz" in err and "bgzip" in err


def test_malformed_fasta_cannot_be_indexed(tmp_path, capsys):
    fa = tmp_path / "ref.fa"
    fa.write_text(">chr1\nACGTACGT\nACG\nACGTACGT\n")  # unequal inner line lengths
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr1", "g1", {"t1": [(1, 9, 0)]}, "+"))
    err = _bad(tmp_path, capsys, fa, gff)
    assert "ref.fa" in err and "indexed as FASTA" in err


def test_empty_result(tmp_path, capsys):
    fa = write_fasta(tmp_path / "ref.fa", {"chr5": "CC" + "ATGTAGAAATAA" + "GG"})
    gff = write_gff(tmp_path / "a.gff3", gene_lines("chr5", "g5", {"t5": [(3, 14, 0)]}, "+"))
    err = _bad(tmp_path, capsys, fa, gff)
    assert "no 0-fold or 4-fold site" in err and "internal_stop=1" in err


def test_gff_without_cds(tmp_path, capsys):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", [gff_line("chr1", "gene", 3, 17, "+", ".", "ID=g")])
    err = _bad(tmp_path, capsys, fa, gff)
    assert "no CDS features" in err


def test_short_gff_line_and_bad_strand(tmp_path, capsys):
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": "CC" + CDS + "GG"})
    gff = write_gff(tmp_path / "a.gff3", ["chr1\tx\tCDS\t3\t17\n"])
    assert "9 tab-separated columns" in _bad(tmp_path, capsys, fa, gff)
    gff = write_gff(tmp_path / "b.gff3", [gff_line("chr1", "CDS", 3, 17, ".", 0, "ID=c;Parent=t")])
    assert "must be '+' or '-'" in _bad(tmp_path, capsys, fa, gff)


def test_bad_options(tmp_path, capsys, plus_genome):
    err = _bad(tmp_path, capsys, *plus_genome, "--code", "7")
    assert "--code 7" in err
    with pytest.raises(OptionError, match="--transcripts"):
        classify_sites(*plus_genome, transcripts="all")


def test_missing_input_files(tmp_path, capsys, plus_genome):
    assert "file not found" in _bad(tmp_path, capsys, tmp_path / "no.fa", plus_genome[1])
    assert "file not found" in _bad(tmp_path, capsys, plus_genome[0], tmp_path / "no.gff")


def test_layout_is_vectorised_over_many_transcripts(tmp_path):
    # Sanity of the per-chromosome arrays: 200 copies of the CDS on alternating strands
    # give 200 times the counts of one copy.
    unit_plus, unit_minus = "CC" + CDS + "GG", "GG" + rc(CDS) + "CC"
    seq = "".join(unit_plus if k % 2 == 0 else unit_minus for k in range(200))
    fa = write_fasta(tmp_path / "ref.fa", {"chr1": seq})
    lines = []
    for k in range(200):
        off = 19 * k
        lines += gene_lines(
            "chr1", f"g{k}", {f"t{k}": [(off + 3, off + 17, 0)]}, "+" if k % 2 == 0 else "-"
        )
    res = classify_sites(fa, write_gff(tmp_path / "a.gff3", lines))
    assert res.chroms[0].class_sites == {"0fold": 2000, "2fold": 200, "3fold": 0, "4fold": 200}
    assert np.all(np.diff(res.chroms[0].starts) > 0)
