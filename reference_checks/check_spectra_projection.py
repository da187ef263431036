"""Reference check: hypergeometric projection against scipy.stats.hypergeom.

* ``projection_matrix(m, n)[d, j]`` must equal ``scipy.stats.hypergeom(M=m, n=d, N=n)
  .pmf(j)``, the probability of j derived copies among n drawn without replacement from
  m copies of which d are derived (scipy, a general-purpose reference library).
* Projection keeps the neutral spectrum: projecting xi_i = 1/i (i = 1..m-1) to n copies
  gives 1/j (j = 1..n-1), because a subsample of a neutral sample is a neutral sample
  (common practice; Fu 1995 for the 1/i form, from memory).
* End to end: a simulated VCF with 15 % missing genotypes is counted by driftband with
  ``--project``; the spectra must equal the sum, over sites with at least n called
  copies, of the scipy hypergeometric distributions (computed here), and sites with fewer
  called copies must be dropped from the spectrum and the callable count.

Run ``python reference_checks/check_spectra_projection.py``; exit 0 when all pass.
"""

from __future__ import annotations

import os
import sys
import tempfile

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from _spectra_common import Check, report, write_text, write_vcf

L = 20_000


def run_checks() -> list[Check]:
    """Run every check and return the outcomes."""
    import scipy
    from scipy.stats import hypergeom

    from driftband.spectra.build import build_spectra
    from driftband.spectra.projection import projection_matrix

    src = f"scipy {scipy.__version__} scipy.stats.hypergeom"
    checks = []
    worst = 0.0
    for m, n in [(2, 2), (5, 3), (20, 10), (57, 56), (120, 40), (400, 333)]:
        P = projection_matrix(m, n)
        ref = np.array([hypergeom(m, d, n).pmf(np.arange(n + 1)) for d in range(m + 1)])
        big = ref > 1e-250
        worst = max(worst, float(np.max(np.abs(P[big] - ref[big]) / ref[big])))
        worst = max(worst, float(np.max(P[~big], initial=0.0)))
    checks.append(
        Check(
            f"projection matrices for m <= 400, max relative error {worst:.1e}",
            worst < 1e-9,
            "",
            src,
        )
    )
    bad = []
    for m, n in [(10, 4), (40, 17), (300, 120)]:
        xi = np.zeros(m + 1)
        xi[1:m] = 1.0 / np.arange(1, m)
        out = xi @ projection_matrix(m, n)
        err = np.max(np.abs(out[1:n] * np.arange(1, n) - 1.0))
        if err > 1e-10:
            bad.append((m, n, err))
    checks.append(
        Check(
            "projecting the neutral spectrum 1/i from m to n gives 1/j",
            not bad,
            str(bad),
            "common practice (subsample of a neutral sample); Fu (1995) 1/i form, from memory",
        )
    )

    rng = np.random.default_rng(77)
    n_ind, n_rec = 12, 600
    records, truth = [], []
    pos = np.sort(rng.choice(np.arange(1, L + 1), n_rec, replace=False))
    for p in pos.tolist():
        f = rng.uniform(0.01, 0.99)
        al = (rng.random((n_ind, 2)) < f).astype(int)
        al[rng.random(n_ind) < 0.15] = -1
        records.append(("1", p, al))
        truth.append(al)
    samples = [f"s{i}" for i in range(n_ind)]
    n_proj = 16
    with tempfile.TemporaryDirectory() as d:
        vcf = os.path.join(d, "miss.vcf")
        write_vcf(vcf, ["1"], {"1": L}, records, samples)
        pm = write_text(os.path.join(d, "pm.tsv"), "".join(f"{s}\tP\n" for s in samples))
        bed = write_text(os.path.join(d, "s.bed"), f"1\t0\t{L}\t4fold\n")
        ss = build_spectra(vcf, pm, bed, project=n_proj, checksums=False)
    want = np.zeros(n_proj + 1)
    sites = L
    for al in truth:
        m = int((al >= 0).sum())
        dd = int((al == 1).sum())
        if m < n_proj:
            sites -= 1
            continue
        want += hypergeom(m, dd, n_proj).pmf(np.arange(n_proj + 1))
        want[0] -= 1
    want[0] += sites
    cs = ss.populations["P"].classes["4fold"]
    err = float(np.max(np.abs(cs.sfs - want)))
    checks.append(
        Check(
            f"spectrum of {n_rec} sites with 15 % missing projected to n = "
            f"{n_proj}, max abs difference {err:.1e}",
            err < 1e-8 and cs.sites == sites,
            f"sites {cs.sites} vs {sites}",
            src,
        )
    )
    return checks


def main() -> int:
    return report(run_checks())


if __name__ == "__main__":
    sys.exit(main())
