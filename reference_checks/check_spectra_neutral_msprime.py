"""Reference check: the neutral spectrum E[xi_i] = theta L / i (Fu 1995, from memory)
against the mean spectrum of neutral coalescent data simulated with msprime.

msprime (a general-purpose coalescent simulator) draws R independent replicates (fixed
seeds) of a diploid sample of 10 individuals (n = 20 gene copies), L bp each, under the
standard neutral model with theta = 4 Ne mu per bp; they are written as R chromosomes of
one VCF (REF ancestral, INFO/AA) and counted by driftband with one block per replicate.
For every i = 1..n-1, the mean over blocks of entry i must lie within 4 standard errors
(from the spread of the R replicates) of theta L / i; so must the mean number of
segregating sites, theta L a_n (Watterson 1975, from memory). Finite-sites effects at
theta = 5e-4 per bp are far below these tolerances.

Run ``python reference_checks/check_spectra_neutral_msprime.py``; exit 0 when all pass.
"""

from __future__ import annotations

import os
import sys
import tempfile

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from _spectra_common import Check, report, write_text, write_vcf

R = 300  # replicates
L = 10_000  # bp per replicate
NE = 10_000
THETA = 5e-4  # 4 Ne mu per bp
N_IND = 10


def run_checks() -> list[Check]:
    """Run every check and return the outcomes."""
    import msprime

    from driftband.spectra.build import build_spectra

    mu = THETA / (4 * NE)
    reps = msprime.sim_ancestry(
        samples=N_IND,
        ploidy=2,
        population_size=NE,
        sequence_length=L,
        recombination_rate=1e-8,
        random_seed=20240607,
        num_replicates=R,
    )
    records, chroms = [], []
    for k, ts in enumerate(reps):
        ts = msprime.sim_mutations(
            ts, rate=mu, random_seed=1000 + k, model=msprime.BinaryMutationModel()
        )
        c = f"rep{k:03d}"
        chroms.append(c)
        G = ts.genotype_matrix()
        for j, s in enumerate(ts.sites()):
            records.append((c, int(s.position) + 1, G[j].reshape(-1, 2)))
    samples = [f"ind{i}" for i in range(N_IND)]
    with tempfile.TemporaryDirectory() as d:
        vcf = os.path.join(d, "neutral.vcf")
        write_vcf(vcf, chroms, dict.fromkeys(chroms, L), records, samples)
        pm = write_text(os.path.join(d, "pm.tsv"), "".join(f"{s}\tP\n" for s in samples))
        bed = write_text(os.path.join(d, "s.bed"), "".join(f"{c}\t0\t{L}\t4fold\n" for c in chroms))
        ss = build_spectra(vcf, pm, bed, block_size=L, checksums=False)
    pop = ss.populations["P"]
    n = pop.n
    cs = pop.classes["4fold"]
    B = np.asarray(cs.block_sfs, dtype=float)
    src = f"Fu (1995) E[xi_i] = theta L / i vs msprime {msprime.__version__} (seeds fixed)"
    checks = [
        Check(
            f"{len(ss.blocks)} blocks of {L} sites, n = {n}",
            len(ss.blocks) == R and n == 2 * N_IND and np.all(cs.block_sites == L),
            f"blocks {len(ss.blocks)} n {n}",
            "simulation design",
        )
    ]
    mean = B.mean(axis=0)
    se = B.std(axis=0, ddof=1) / np.sqrt(R)
    i = np.arange(1, n)
    want = THETA * L / i
    z = (mean[1:n] - want) / se[1:n]
    worst = int(np.argmax(np.abs(z)))
    checks.append(
        Check(
            f"mean entries i = 1..{n - 1} within 4 SE of theta L / i "
            f"(max |z| = {np.abs(z).max():.2f} at i = {worst + 1})",
            bool(np.all(np.abs(z) < 4)),
            f"z = {np.round(z, 2).tolist()}",
            src,
        )
    )
    chi2 = float(np.sum(z**2))
    checks.append(
        Check(
            f"sum of z^2 over {n - 1} entries = {chi2:.1f} < 2 x {n - 1}",
            chi2 < 2 * (n - 1),
            "",
            src + "; chi-square-like bound",
        )
    )
    S = B[:, 1:n].sum(axis=1)
    a_n = np.sum(1.0 / i)
    zS = (S.mean() - THETA * L * a_n) / (S.std(ddof=1) / np.sqrt(R))
    checks.append(
        Check(
            f"mean segregating sites {S.mean():.2f} vs theta L a_n = "
            f"{THETA * L * a_n:.2f} (z = {zS:.2f})",
            abs(zS) < 4,
            "",
            "Watterson (1975) E[S] = theta L a_n (from memory) vs msprime",
        )
    )
    return checks


def main() -> int:
    return report(run_checks())


if __name__ == "__main__":
    sys.exit(main())
