"""Benchmark: tabulating expected spectra and DFE-averaged spectra.

Prints:

- the time to tabulate g_i(S), i = 1..199, for n = 200 on 2,000 S values spread over the
  range the fits use (-1e5 .. -1e-6 and 1e-6 .. 1e3), including the per-n setup; target
  <= 0.5 s (driftband's speed targets live in these scripts, see DEVELOPERS.md);
- the same table with scipy's hyp1f1 in Kummer's form (argument -|S|) and the ratio;
- mpmath quadrature on a small subset, extrapolated to the full table, and the ratio;
- the accuracy of both fast methods against mpmath on that subset;
- the time per DfeExpectation.mean_g evaluation at n = 40 and n = 200 for each family.

Run: python benchmarks/bench_prf.py   (single-threaded BLAS, as for the fit benchmark)
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import math

import numpy as np

from driftband.prf import (
    DfeExpectation,
    DiscreteDfe,
    GammaDfe,
    LognormalDfe,
    SfsKernel,
    WithBeneficial,
)

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "reference_checks"))
import mpmath_prf as ref

TARGET_TABLE = 0.5


def best_of(fn, repeat=3):
    best = math.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def bench_table(n: int = 200, m: int = 2000) -> None:
    S = np.concatenate([-np.logspace(-6, 5, m // 2), np.logspace(-6, 3, m - m // 2)])
    t0, c0 = time.perf_counter(), time.process_time()
    k = SfsKernel(n)
    setup = time.perf_counter() - t0
    t0 = time.perf_counter()
    G = k.g(S)
    first = time.perf_counter() - t0
    cpu = time.process_time() - c0
    warm = best_of(lambda: k.g(S))
    t_k = best_of(lambda: ref.kummer_scipy(n, S), repeat=2)
    status = "OK" if setup + first <= TARGET_TABLE else "ABOVE TARGET"
    print(f"expected spectra, n={n}, {m} S values in [-1e5, 1e3]:")
    print(
        f"  logit trapezoid: setup {setup:.3f} s + first table {first:.3f} s = "
        f"{setup + first:.3f} s wall, {cpu:.3f} s CPU (target <= {TARGET_TABLE} s: "
        f"{status}); warm table {warm:.3f} s"
    )
    print(
        f"  (machine load average now {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores; "
        "wall times are upper bounds on a shared machine)"
    )
    print(f"  scipy hyp1f1 (Kummer form): {t_k:.3f} s  (ratio to warm trapezoid {t_k / warm:.1f}x)")

    # mpmath on a subset: 4 S values x 6 classes
    subS = [-1e5, -10.0, 1e-4, 1e3]
    cl = [1, 2, n // 4, n // 2, n - 2, n - 1]
    t0 = time.perf_counter()
    refs = {s: ref.sfs(n, s, cl)[0] for s in subS}
    t_mp = (time.perf_counter() - t0) / (len(subS) * len(cl))
    full_mp = t_mp * m * (n - 1)
    print(
        f"  mpmath quadrature: {t_mp * 1e3:.0f} ms per entry -> about {full_mp:.0f} s "
        f"for the table (ratio to warm trapezoid {full_mp / warm:.0f}x)"
    )
    err_k, err_t = 0.0, 0.0
    idx = np.array(cl) - 1
    for s, v in refs.items():
        ok = v > 1e-280
        gk = ref.kummer_scipy(n, s)[idx]
        gt = k.g(s)[idx]
        err_t = max(err_t, float(np.max(np.abs(gt[ok] / v[ok] - 1))))
        err_k = max(err_k, float(np.max(np.abs(gk[ok] / v[ok] - 1))))
    print(
        f"  max rel err vs mpmath on that subset: trapezoid {err_t:.1e}, "
        f"scipy hyp1f1 {err_k:.1e} (the latter loses accuracy at |S| < 1e-2)"
    )
    assert np.all(np.isfinite(G))


def bench_dfe(n: int) -> None:
    t0 = time.perf_counter()
    ex = DfeExpectation(n)
    setup = time.perf_counter() - t0
    print(
        f"DfeExpectation, n={n}: table setup {setup * 1e3:.0f} ms "
        f"({ex.G.shape[0]} rows); time per mean_g evaluation:"
    )
    dfes = {
        "gamma(0.3, 500)": GammaDfe(0.3, 500.0),
        "lognormal(3, 2)": LognormalDfe(3.0, 2.0),
        "discrete(4 bands)": DiscreteDfe((0.3, 0.2, 0.2, 0.3)),
        "gamma + beneficial": WithBeneficial(GammaDfe(0.3, 500.0), 0.01, 20.0),
        "gamma(20, 50) (narrow: refined decades)": GammaDfe(20.0, 50.0),
    }
    for name, d in dfes.items():
        ex.mean_g(d)  # build any table once
        reps = 2000
        t = best_of(lambda d=d, reps=reps: [ex.mean_g(d) for _ in range(reps)]) / reps
        print(f"  {name:36s} {t * 1e6:8.1f} us")


def main() -> int:
    bench_table()
    print()
    for n in (40, 200):
        bench_dfe(n)
    print()
    m = 200
    S = np.concatenate([-np.logspace(-6, 5, m // 2), np.logspace(-6, 3, m // 2)])
    t0 = time.perf_counter()
    k = SfsKernel(2000)
    setup = time.perf_counter() - t0
    t = best_of(lambda: k.g(S), repeat=1)
    print(f"expected spectra, n=2000, {m} S values: setup {setup:.2f} s, table {t:.2f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
