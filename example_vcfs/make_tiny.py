"""Make the tiny example study of example_vcfs/ (an invented scenario, fixed seed).

The imaginary moss-snail *Bryocochlea fictiva* lives in two valleys, ``lowvale`` (8
diploid snails) and ``highvale`` (6), and its sister species on an islet, ``islet`` (2
snails), serves as outgroup. Two 250 kb contigs carry eight small genes whose codon
positions are labelled 0-fold (first two positions) and 4-fold (third position of half
of the codons). Derived-allele counts are drawn from the neutral 1/x spectrum at 4-fold
sites and from a spectrum skewed to rare alleles at 0-fold sites; a few records are
multi-allelic, indels, fail the FILTER, carry no usable AA, or are monomorphic; about 3 %
of genotypes are missing. Nothing here is real data.

Usage (from the repository root)::

    python example_vcfs/make_tiny.py

writes ``tiny.vcf.gz`` (+ ``.tbi``), ``tiny.samples.tsv`` and ``tiny.sites.bed`` next to
this script. The output is the same on every run.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pysam

SEED = 20240611
HERE = Path(__file__).resolve().parent
CONTIGS = {"ctg1": 250_000, "ctg2": 250_000}
POPS = {"lowvale": 8, "highvale": 6, "islet": 2}
BASES = np.array(list("ACGT"))


def _genes(rng):
    """Eight genes: (contig, start, number of codons); 4-fold flag per codon."""
    out = []
    for c in CONTIGS:
        starts = np.sort(rng.choice(np.arange(5_000, 240_000, 5_000), 4, replace=False))
        for s in starts.tolist():
            ncod = int(rng.integers(150, 260))
            four = rng.random(ncod) < 0.5
            out.append((c, s, ncod, four))
    return out


def _sites_bed(genes) -> list[tuple[str, int, int, str]]:
    rows = []
    for c, s, ncod, four in genes:
        for k in range(ncod):
            p = s + 3 * k
            rows.append((c, p, p + 2, "0fold"))
            if four[k]:
                rows.append((c, p + 2, p + 3, "4fold"))
    return rows


def _derived_count(rng, n: int, selected: bool) -> int:
    """Derived copies in the whole sample of n: neutral 1/i, or ~1/i^2 when selected."""
    i = np.arange(1, n)
    w = 1.0 / i ** (2.2 if selected else 1.0)
    return int(rng.choice(i, p=w / w.sum()))


def main() -> None:
    rng = np.random.default_rng(SEED)
    genes = _genes(rng)
    bed = _sites_bed(genes)
    samples = [f"{p[:3]}{k + 1:02d}" for p, m in POPS.items() for k in range(m)]
    pop_of = [p for p, m in POPS.items() for _ in range(m)]
    focal = np.array([p != "islet" for p in pop_of])
    nf = 2 * int(focal.sum())

    # candidate positions: class sites (most records) and some others
    cls_sites = [(c, p, name) for c, s, e, name in bed for p in range(s, e)]
    pick = rng.choice(len(cls_sites), 330, replace=False)
    recs = [(cls_sites[i][0], cls_sites[i][1] + 1, cls_sites[i][2]) for i in pick]
    for c, length in CONTIGS.items():
        for p in rng.choice(np.arange(1, length), 25, replace=False).tolist():
            recs.append((c, int(p), "none"))
    recs = sorted(set(recs), key=lambda r: (list(CONTIGS).index(r[0]), r[1]))

    lines = []
    for c, pos, cls in recs:
        ref = str(rng.choice(BASES))
        alt = str(rng.choice([b for b in BASES if b != ref]))
        kind = rng.random()
        filt, info_extra = "PASS", ""
        sel = cls == "0fold"
        # allele per copy: 0 ancestral, 1 derived
        d = _derived_count(rng, nf, sel)
        fixed = kind < 0.04
        copies = np.zeros(2 * len(samples), np.int8)
        fidx = np.flatnonzero(np.repeat(focal, 2))
        if fixed:
            copies[fidx] = 1
        else:
            copies[rng.choice(fidx, d, replace=False)] = 1
        if rng.random() < 0.05:  # outgroup polymorphic now and then
            copies[-1] = 1
        anc_is_ref = rng.random() < 0.8
        aa = ref if anc_is_ref else alt
        if not anc_is_ref:
            copies = np.where(copies >= 0, 1 - copies, copies)  # REF carries the derived allele
        if rng.random() < 0.3:
            aa = aa.lower()
        if 0.04 <= kind < 0.06:
            aa = "N"  # unknown ancestral allele
        alt_field = alt
        if 0.06 <= kind < 0.075:
            alt_field = f"{alt},{[b for b in BASES if b not in (ref, alt)][0]}"
        elif 0.075 <= kind < 0.09:
            alt_field = alt + "".join(rng.choice(BASES, 2))
        elif 0.09 <= kind < 0.11:
            filt = "LowQual"
        elif 0.11 <= kind < 0.14:
            alt_field = "."
            copies[:] = 0
            aa = ref
        gts = []
        for j in range(len(samples)):
            a, b = copies[2 * j], copies[2 * j + 1]
            if rng.random() < 0.03:
                gts.append("./.:.:.")
                continue
            dp = int(rng.poisson(14))
            gq = int(min(99, rng.gamma(3.0, 15.0)))
            gts.append(f"{min(a, b)}/{max(a, b)}:{dp}:{gq}")
        info = f"AA={aa}{info_extra};DP={int(rng.integers(80, 220))}"
        lines.append(
            "\t".join([c, str(pos), ".", ref, alt_field, "50", filt, info, "GT:DP:GQ", *gts])
        )

    header = [
        "##fileformat=VCFv4.2",
        "##source=driftband example_vcfs/make_tiny.py (invented data)",
    ]
    header += [f"##contig=<ID={c},length={n}>" for c, n in CONTIGS.items()]
    header += [
        '##FILTER=<ID=LowQual,Description="Low quality">',
        '##INFO=<ID=AA,Number=1,Type=String,Description="Ancestral allele">',
        '##INFO=<ID=DP,Number=1,Type=Integer,Description="Total depth">',
        '##FORMAT=<ID=GT,Number=1,Type=String,Description="Genotype">',
        '##FORMAT=<ID=DP,Number=1,Type=Integer,Description="Read depth">',
        '##FORMAT=<ID=GQ,Number=1,Type=Integer,Description="Genotype quality">',
        "\t".join(
            ["#CHROM", "POS", "ID", "REF", "ALT", "QUAL", "FILTER", "INFO", "FORMAT", *samples]
        ),
    ]
    plain = HERE / "tiny.vcf"
    plain.write_text("\n".join(header + lines) + "\n", encoding="utf-8")
    gz = HERE / "tiny.vcf.gz"
    pysam.tabix_compress(str(plain), str(gz), force=True)
    os.unlink(plain)
    pysam.tabix_index(str(gz), preset="vcf", force=True)
    with open(HERE / "tiny.samples.tsv", "w", encoding="utf-8") as fh:
        fh.write("sample\tpopulation\n")
        for s, p in zip(samples, pop_of):
            fh.write(f"{s}\t{p}\n")
    with open(HERE / "tiny.sites.bed", "w", encoding="utf-8") as fh:
        for c, s, e, name in bed:
            fh.write(f"{c}\t{s}\t{e}\t{name}\n")
    print(f"wrote {len(lines)} records for {len(samples)} samples to {gz}")


if __name__ == "__main__":
    main()
