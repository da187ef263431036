"""Reference check: Watterson's a_n and Tajima's D.

* a_n = sum_{i=1}^{n-1} 1/i (Watterson 1975, eq. 1.4a, from memory), computed here in
  exact rational arithmetic (``fractions``), against ``driftband.spectra.watterson_a``.
* Tajima's D = (pi - S/a1) / sqrt(e1 S + e2 S (S - 1)) with the constants a1, a2, b1, b2,
  c1, c2, e1, e2 of Tajima (1989), eqs. (3)-(4) and (38) (from memory), evaluated exactly
  with fractions and a 40-digit square root (mpmath), against
  ``driftband.spectra.tajimas_d``; worked value: n = 10, S = 20, pi = 5 gives
  D = -1.37624... (computed here, not taken from the paper).
* End to end on neutral coalescent data: msprime simulates a sample, driftband counts the
  VCF, and pi per site, Watterson's theta per site and Tajima's D must equal tskit's
  ``diversity``, ``segregating_sites`` / a_n and ``Tajimas_D`` (site mode) of the same
  tree sequence (general-purpose reference libraries).

Run ``python reference_checks/check_spectra_tajima.py``; exit status 0 when all pass.
"""

from __future__ import annotations

import os
import sys
import tempfile
from fractions import Fraction

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from _spectra_common import Check, report, write_text, write_vcf

W1975 = "Watterson (1975) a_n, exact fractions (formula from memory)"
T1989 = "Tajima (1989) eqs. 3-4, 38, exact fractions + mpmath sqrt (formula from memory)"


def a_exact(n: int) -> Fraction:
    return sum((Fraction(1, i) for i in range(1, n)), Fraction(0))


def tajima_exact(pi: Fraction, S: int, n: int):
    import mpmath

    mpmath.mp.dps = 40
    a1 = a_exact(n)
    a2 = sum((Fraction(1, i * i) for i in range(1, n)), Fraction(0))
    b1 = Fraction(n + 1, 3 * (n - 1))
    b2 = Fraction(2 * (n * n + n + 3), 9 * n * (n - 1))
    c1 = b1 - 1 / a1
    c2 = b2 - Fraction(n + 2, n) / a1 + a2 / (a1 * a1)
    e1 = c1 / a1
    e2 = c2 / (a1 * a1 + a2)
    num = pi - Fraction(S) / a1
    var = e1 * S + e2 * S * (S - 1)
    return (
        mpmath.mpf(num.numerator)
        / num.denominator
        / mpmath.sqrt(mpmath.mpf(var.numerator) / var.denominator)
    )


def run_checks() -> list[Check]:
    """Run every check and return the outcomes."""
    import msprime

    from driftband.spectra import tajimas_d, watterson_a
    from driftband.spectra.build import build_spectra

    checks = []
    bad = [
        n
        for n in (2, 3, 4, 5, 10, 20, 50, 200, 1000)
        if abs(watterson_a(n) - float(a_exact(n))) > 1e-13 * float(a_exact(n))
    ]
    checks.append(
        Check(
            "Watterson a_n for n = 2..1000 (a_10 = 7129/2520)",
            not bad and a_exact(10) == Fraction(7129, 2520),
            f"n={bad}",
            W1975,
        )
    )
    cases = [
        (Fraction(5), 20, 10),
        (Fraction(1234, 100), 40, 24),
        (Fraction(3, 2), 3, 4),
        (Fraction(80), 50, 100),
        (Fraction(7), 7, 7),
    ]
    worst = 0.0
    for pi, S, n in cases:
        want = float(tajima_exact(pi, S, n))
        got = tajimas_d(float(pi), S, n)
        worst = max(worst, abs(got - want) / max(1.0, abs(want)))
    checks.append(
        Check(
            f"Tajima's D on {len(cases)} (pi, S, n) cases, relative error {worst:.1e} <= 1e-12",
            worst <= 1e-12,
            "",
            T1989,
        )
    )
    wv = float(tajima_exact(Fraction(5), 20, 10))
    checks.append(
        Check(
            f"worked value n=10, S=20, pi=5: D = {wv:.5f}",
            abs(tajimas_d(5.0, 20, 10) - wv) < 1e-12 and round(wv, 4) == -1.3762,
            f"ours {tajimas_d(5.0, 20, 10)}",
            T1989,
        )
    )

    # end to end against tskit on coalescent data
    import tskit

    L = 200_000
    ts = msprime.sim_ancestry(
        samples=15,
        ploidy=2,
        population_size=10_000,
        sequence_length=L,
        recombination_rate=1e-8,
        random_seed=11,
    )
    ts = msprime.sim_mutations(ts, rate=2e-8, random_seed=12, model=msprime.BinaryMutationModel())
    keep = np.array([len(s.mutations) == 1 for s in ts.sites()])  # one mutation per site
    pos = np.array([int(s.position) + 1 for s in ts.sites()])
    keep &= np.r_[True, np.diff(pos) > 0]
    ts2 = ts.delete_sites(np.flatnonzero(~keep))
    G = ts2.genotype_matrix()
    pos = np.array([int(s.position) + 1 for s in ts2.sites()])
    with tempfile.TemporaryDirectory() as d:
        vcf = os.path.join(d, "coal.vcf")
        recs = [("1", int(p), G[k].reshape(-1, 2)) for k, p in enumerate(pos)]
        samples = [f"i{j}" for j in range(15)]
        write_vcf(vcf, ["1"], {"1": L}, recs, samples)
        pm = write_text(os.path.join(d, "pm.tsv"), "".join(f"{s}\tP\n" for s in samples))
        bed = write_text(os.path.join(d, "s.bed"), f"1\t0\t{L}\t4fold\n")
        ss = build_spectra(vcf, pm, bed, checksums=False)
    st = ss.populations["P"].stats["4fold"]
    n = 30
    ref = {
        "pi": float(ts2.diversity(mode="site")),
        "theta_w": float(ts2.segregating_sites(mode="site")) / watterson_a(n),
        "tajimas_d": float(ts2.Tajimas_D(mode="site")),
    }
    src = f"tskit {tskit.__version__} on msprime {msprime.__version__} coalescent data"
    for k, r in ref.items():
        ok = abs(st[k] - r) <= 1e-9 * max(1.0, abs(r))
        checks.append(
            Check(
                f"{k} of a {ts2.num_sites}-site neutral sample (n = 30)",
                ok,
                f"ours {st[k]!r} ref {r!r}",
                src,
            )
        )
    return checks


def main() -> int:
    return report(run_checks())


if __name__ == "__main__":
    sys.exit(main())
