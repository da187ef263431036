"""Accuracy and speed of expected spectra under a size history (driftband.prf.history).

Accuracy: worst relative error, over entries holding at least 1e-6 of the spectrum's
total, of the default solver against the same solver at high resolution
(``REFERENCE_RESOLUTION``: half the grid step, about a third of the time steps, one more
extrapolation level), by history (nu, tau), |S| and n. Speed: time of a table over S for
one history, with its ratio to the reference measured in the same run.

    python benchmarks/bench_history.py            # a quick set (a few minutes)
    python benchmarks/bench_history.py --full     # all nu x tau corners (long)
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from driftband.prf.history import REFERENCE_RESOLUTION, HistorySfs, OneChange, TwoChanges


def worst(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    keep = b >= 1e-6 * b.sum(axis=-1, keepdims=True)
    return np.where(keep, np.abs(a - b) / np.where(keep, b, 1.0), 0.0).max(axis=-1)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--full", action="store_true", help="all corners of nu and tau")
    args = ap.parse_args()
    S = np.array([0.0, -1.0, -10.0, -100.0, -1e3, -1e4, 10.0, 100.0])
    if args.full:
        hists = [
            OneChange(nu, tau) for nu in (0.01, 0.1, 10.0, 100.0) for tau in (0.001, 0.05, 1.0, 5.0)
        ]
        hists.append(TwoChanges(0.05, 0.02, 2.0, 0.01))
        ns = (10, 40, 200)
    else:
        hists = [OneChange(0.1, 0.05), OneChange(10.0, 0.01), OneChange(0.01, 0.001)]
        ns = (40, 200)
    print("worst relative error (entries >= 1e-6 of total) against REFERENCE_RESOLUTION")
    print(f"{'history':<42}{'n':>5}  " + "".join(f"{s:>10.0e}" for s in S))
    for hist in hists:
        for n in ns:
            got = HistorySfs(n, hist).g(S)
            ref = HistorySfs(n, hist, resolution=REFERENCE_RESOLUTION).g(S)
            err = worst(got, ref)
            print(f"{hist!r:<42}{n:>5}  " + "".join(f"{e:>10.1e}" for e in err))
    print()
    n, hist = 40, OneChange(0.5, 0.1)
    grid = -np.logspace(-3, 4, 32)
    t0 = time.perf_counter()
    HistorySfs(n, hist).table(grid)
    t_def = time.perf_counter() - t0
    t0 = time.perf_counter()
    HistorySfs(n, hist, resolution=REFERENCE_RESOLUTION).table(grid)
    t_ref = time.perf_counter() - t0
    print(f"table of {grid.size} S nodes (1e-3 <= |S| <= 1e4), n = {n}, {hist!r}:")
    print(
        f"  default {t_def:.2f} s ({1e3 * t_def / grid.size:.0f} ms per node), "
        f"reference {t_ref:.2f} s; ratio default/reference {t_def / t_ref:.3f}"
    )
    print(f"  256 nodes would take about {256 * t_def / grid.size:.1f} s")


if __name__ == "__main__":
    main()
