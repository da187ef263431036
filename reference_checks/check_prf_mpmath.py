"""Reference check: the Poisson-random-field core against mpmath high-precision quadrature.

Checks, each against mpmath (reference_checks/mpmath_prf.py, 30 digits, independent of
driftband's numerics):

- expected spectra g_i(S) = E[xi_i]/(theta L) (Sawyer & Hartl 1992) over the range
  driftband supports, n <= 2000 and S from -1e5 to +1e3: <= 1e-10 relative where g >= 1e-280, and
  <= 1e-10 absolute in ln g where it underflows (direct mpmath.quad of the integral);
- the neutral spectrum 1/i (Fu 1995, from memory) for S = 0 and |S| < 1e-8;
- gamma-DFE averages, beta in [0.05, 5], S-bar in [0.1, 1e5]: <= 1e-8 relative (mpmath
  Hurwitz-zeta kernel);
- gamma band shares (mpmath.gammainc) and mean fixation ratios (mpmath.quad).

Run ``python reference_checks/check_prf_mpmath.py`` (about 5 minutes; ``--quick`` for a
reduced grid in a few seconds): one PASS/FAIL line per check with its source; exit status
0 when all pass. ``tests/test_reference_checks_prf.py`` runs ``main(["--quick"])``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import NamedTuple

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
import mpmath_prf as ref

SRC_SFS = "mpmath.quad of the Sawyer-Hartl (1992) integral, 30 digits"
SRC_GAMMA = "mpmath Hurwitz-zeta kernel of the gamma average, Gauss-Legendre, 30 digits"


class Check(NamedTuple):
    """One check: name, outcome, what was measured, source."""

    name: str
    passed: bool
    detail: str
    source: str


def _classes(n: int) -> list[int]:
    c = {1, 2, 3, n // 10, n // 4, n // 2, 3 * n // 4, n - 3, n - 2, n - 1}
    return sorted(v for v in c if 1 <= v <= n - 1)


def check_spectra(ns, Ss, classes=None) -> list[Check]:
    """Expected spectra against direct mpmath quadrature, one check per n."""
    from driftband.prf import kernel

    out = []
    for n in ns:
        cl = classes or _classes(n)
        idx = np.array(cl) - 1
        worst_rel, worst_log, n_under = 0.0, 0.0, 0
        for S in Ss:
            v, logv = ref.sfs(n, S, cl)
            g = kernel(n).g(S)[idx]
            lg = kernel(n).log_g(S)[idx]
            ok = v >= 1e-280
            n_under += int((~ok).sum())
            if ok.any():
                worst_rel = max(worst_rel, float(np.max(np.abs(g[ok] / v[ok] - 1))))
            worst_log = max(worst_log, float(np.max(np.abs(lg - logv))))
        passed = worst_rel <= 1e-10 and worst_log <= 1e-10
        out.append(
            Check(
                f"expected spectrum n={n}: {len(Ss)} S in [{min(Ss):g}, {max(Ss):g}] x "
                f"{len(cl)} classes",
                passed,
                f"max rel err {worst_rel:.1e} (g >= 1e-280); max |d ln g| {worst_log:.1e} "
                f"(incl. {n_under} underflowing entries); limit 1e-10",
                SRC_SFS,
            )
        )
    return out


def check_neutral(ns) -> list[Check]:
    """S = 0 and |S| < 1e-8 give 1/i."""
    from driftband.prf import kernel

    out = []
    for n in ns:
        i = np.arange(1, n)
        e0 = float(np.max(np.abs(kernel(n).g(0.0) * i - 1)))
        e1 = max(float(np.max(np.abs(kernel(n).g(S) * i - 1))) for S in (1e-12, -1e-12))
        out.append(
            Check(
                f"neutral spectrum 1/i, n={n}",
                e0 <= 1e-12 and e1 <= 1e-10,
                f"max rel err {e0:.1e} at S=0, {e1:.1e} at |S|=1e-12",
                "Fu (1995), E[xi_i] = theta/i (from memory)",
            )
        )
    return out


def check_gamma(n, shapes, means, degrees=(5, 6)) -> list[Check]:
    """Gamma-DFE averaged spectra against the mpmath Hurwitz-zeta kernel."""
    from driftband.prf import DfeExpectation, GammaDfe

    ex = DfeExpectation(n)
    out = []
    for b in shapes:
        worst = 0.0
        for m in means:
            want = ref.gamma_mean_sfs(n, b, m, degrees)
            got = ex.mean_g(GammaDfe(b, m))
            worst = max(worst, float(np.max(np.abs(got / want - 1))))
        out.append(
            Check(
                f"gamma-DFE mean spectrum n={n}, shape={b:g}, "
                f"mean in [{min(means):g}, {max(means):g}] ({len(means)} values)",
                worst <= 1e-8,
                f"max rel err {worst:.1e}; limit 1e-8",
                SRC_GAMMA,
            )
        )
    return out


def check_gamma_bands_and_rbar(pairs) -> list[Check]:
    """Band shares (mpmath.gammainc) and mean fixation ratio (mpmath.quad)."""
    from driftband.prf import GammaDfe, band_shares, mean_fixation_ratio

    wb, wr = 0.0, 0.0
    for b, m in pairs:
        d = GammaDfe(b, m)
        want = ref.gamma_band_shares(b, m)
        got = band_shares(d)
        pos = want > 0
        wb = max(wb, float(np.max(np.abs(got[pos] / want[pos] - 1))))
        wr = max(wr, abs(mean_fixation_ratio(d) / ref.gamma_fixation_ratio(b, m) - 1))
    return [
        Check(
            f"gamma band shares |Ne s| 0-1-10-100-inf, {len(pairs)} DFEs",
            wb <= 1e-12,
            f"max rel err {wb:.1e}; limit 1e-12",
            "mpmath.gammainc(regularized=True), 30 digits",
        ),
        Check(
            f"mean fixation ratio E[S/(1-e^-S)], {len(pairs)} gamma DFEs",
            wr <= 1e-12,
            f"max rel err {wr:.1e}; limit 1e-12",
            "mpmath.quad of E[t/(e^t-1)] (Kimura 1962 per mutation)",
        ),
    ]


def run_checks(quick: bool = False) -> list[Check]:
    """Run every check (a reduced grid with ``quick``) and return the outcomes."""
    if quick:
        # The edges of the full grid: both ends and the middle of the spectrum, S deep in
        # the purifying range, near 0 and large positive, n = 2000, and gamma DFEs with
        # most mass below t = 1e-8 or far above 1e3. Gauss-Legendre degrees (4, 5) for the
        # DFE reference, which still has to agree between them to 1e-13.
        checks = check_spectra([10], [-1e5, -1.0, 1e-8, 1e3], classes=[1, 5, 9])
        checks += check_spectra([2000], [-1e5, 1e3], classes=[1, 1000, 1999])
        checks += check_neutral([10, 200])
        checks += check_gamma(20, [0.05], [1e5], degrees=(4, 5)) + check_gamma(
            10, [3.0], [0.1], degrees=(4, 5)
        )
        checks += check_gamma_bands_and_rbar([(0.1, 10.0), (3.0, 1.0)])
        return checks
    Ss = (
        [-(10.0**e) for e in range(5, -9, -1)]
        + [0.0]
        + [10.0**e for e in range(-8, 4)]
        + [-3e4, -300.0, -3.0, 3.0, 300.0]
    )
    checks = check_spectra([4, 10, 50, 200, 1000, 2000], Ss)
    checks += check_neutral([2, 4, 10, 50, 200, 1000, 2000])
    checks += check_gamma(
        50, [0.05, 0.1, 0.3, 1.0, 3.0, 5.0], [0.1, 1.0, 10.0, 100.0, 1e3, 1e4, 1e5]
    )
    checks += check_gamma_bands_and_rbar(
        [(b, m) for b in (0.05, 0.2, 1.0, 3.0, 5.0) for m in (0.1, 1.0, 100.0, 1e4, 1e5)]
    )
    return checks


def main(argv: list[str] | None = None) -> int:
    """Print one PASS/FAIL line per check; return 0 when all pass, else 1."""
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="reduced grid (a few seconds)")
    args = p.parse_args(argv)
    checks = run_checks(args.quick)
    for c in checks:
        line = f"{'PASS' if c.passed else 'FAIL'}  {c.name}  [source: {c.source}]"
        if c.detail:
            line += f"  {c.detail}"
        print(line, flush=True)
    failed = sum(not c.passed for c in checks)
    print(f"{len(checks) - failed} passed, {failed} failed")
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
