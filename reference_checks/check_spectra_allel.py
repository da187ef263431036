"""Reference check: allele counts, spectra and diversity statistics against scikit-allel.

scikit-allel (a general-purpose population-genetics library) reads the same simulated VCF
with its own parser and computes per-population allele counts (``count_alleles``),
unfolded and folded spectra (``sfs``, ``sfs_folded``), nucleotide diversity
(``sequence_diversity``), Watterson's theta (``watterson_theta``) and Tajima's D
(``tajima_d``); driftband must agree (counts and spectra exactly, statistics to 1e-9).

Run ``python reference_checks/check_spectra_allel.py``: one PASS/FAIL line per check with
its source; exit status 0 when all pass. Run by ``tests/test_reference_checks_spectra.py``.
"""

from __future__ import annotations

import os
import sys
import tempfile

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from _spectra_common import Check, report, write_text, write_vcf

SRC = "scikit-allel {v} ({what})"
FUNCS = {"pi": "sequence_diversity", "theta_w": "watterson_theta", "tajimas_d": "tajima_d"}
L = 30_000


def simulate(rng, n_samples=24, n_records=800):
    records = []
    for c in ("1", "2"):
        pos = np.sort(rng.choice(np.arange(1, L + 1), n_records // 2, replace=False))
        for p in pos.tolist():
            f = rng.beta(0.3, 1.5)
            al = (rng.random((n_samples, 2)) < f).astype(int)
            records.append((c, p, al))
    return records


def run_checks() -> list[Check]:
    """Run every check and return the outcomes."""
    import allel

    from driftband.spectra.build import build_spectra
    from genotype_table import read_genotype_table

    v = allel.__version__
    rng = np.random.default_rng(20240601)
    records = simulate(rng)
    samples = [f"s{i}" for i in range(24)]
    pops = {"east": np.arange(0, 13), "west": np.arange(13, 24)}
    checks = []
    with tempfile.TemporaryDirectory() as d:
        vcf = os.path.join(d, "sim.vcf")
        write_vcf(vcf, ["1", "2"], {"1": L, "2": L}, records, samples)
        pm = write_text(
            os.path.join(d, "pm.tsv"),
            "".join(f"s{i}\t{'east' if i < 13 else 'west'}\n" for i in range(24)),
        )
        bed = write_text(os.path.join(d, "s.bed"), f"1\t0\t{L}\t4fold\n2\t0\t{L}\t0fold\n")
        cs = allel.read_vcf(vcf, fields=["calldata/GT", "variants/POS", "variants/CHROM"])
        gt = allel.GenotypeArray(cs["calldata/GT"])
        chrom = cs["variants/CHROM"]
        pos = cs["variants/POS"]
        tab = read_genotype_table(vcf)
        ours_alt = (tab.alleles == 1).sum(axis=2)
        ours_called = (tab.alleles >= 0).sum(axis=2)
        for p, idx in pops.items():
            ac = gt.count_alleles(subpop=idx, max_allele=1)
            ok = np.array_equal(ac[:, 1], ours_alt[:, idx].sum(axis=1)) and np.array_equal(
                ac.sum(axis=1), ours_called[:, idx].sum(axis=1)
            )
            checks.append(
                Check(
                    f"{p}: per-record ALT and called allele counts",
                    ok,
                    "",
                    SRC.format(v=v, what="GenotypeArray.count_alleles"),
                )
            )
        unf = build_spectra(vcf, pm, bed, ancestral="aa", checksums=False)
        fol = build_spectra(vcf, pm, bed, ancestral="fold", checksums=False)
        for p, idx in pops.items():
            n = 2 * idx.size
            for c, cls in (("1", "4fold"), ("2", "0fold")):
                sel = chrom == c
                ac = gt[sel].count_alleles(subpop=idx, max_allele=1)
                want = allel.sfs(ac[:, 1], n=n)
                got = unf.populations[p].classes[cls].sfs
                checks.append(
                    Check(
                        f"{p} {cls}: unfolded spectrum entries 1..n",
                        np.array_equal(got[1:], want[1:]),
                        f"ours {got[1:6]} ref {want[1:6]}",
                        SRC.format(v=v, what="allel.sfs of derived (ALT) counts"),
                    )
                )
                wantf = allel.sfs_folded(ac, n=n)
                gotf = fol.populations[p].classes[cls].sfs
                checks.append(
                    Check(
                        f"{p} {cls}: folded spectrum entries 1..n/2",
                        np.array_equal(gotf[1:], wantf[1:]),
                        f"ours {gotf[1:6]} ref {wantf[1:6]}",
                        SRC.format(v=v, what="allel.sfs_folded"),
                    )
                )
                st = unf.populations[p].stats[cls]
                ps = pos[sel]
                ref = {
                    "pi": allel.sequence_diversity(ps, ac, start=1, stop=L),
                    "theta_w": allel.watterson_theta(ps, ac, start=1, stop=L),
                    "tajimas_d": allel.tajima_d(ac),
                }
                for k, r in ref.items():
                    ok = abs(st[k] - r) <= 1e-9 * max(1.0, abs(r))
                    checks.append(
                        Check(
                            f"{p} {cls}: {k}",
                            ok,
                            f"ours {st[k]!r} ref {r!r}",
                            SRC.format(v=v, what=f"allel.{FUNCS[k]}"),
                        )
                    )
    return checks


def main() -> int:
    return report(run_checks())


if __name__ == "__main__":
    sys.exit(main())
