"""Tabulated spectra under a size history: accuracy of DFE averages and timings.

For each history, the DFE-averaged spectra of :class:`driftband.prf.dfe.DfeExpectation`
over a :class:`driftband.prf.history_table.HistoryKernel` (coarse solver settings, an
interpolated S grid) are set against the same averages with every quadrature node
solved directly by :class:`driftband.prf.history.HistorySfs` at its default settings
(the reference; below |S| = 1e-3 and above 1e5 the reference holds the ratio to the
equilibrium spectrum at its value there, as the table does). It also times one table and
one two-step fit (history, then a gamma DFE) at n = 40.

Run: ``python benchmarks/bench_history_table.py [--quick]``.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from driftband.fit.likelihood import SpectrumPair
from driftband.fit.mle import fit_model
from driftband.fit.models import DfeModel
from driftband.fit.size_history import prepare_history
from driftband.prf.dfe import DfeExpectation
from driftband.prf.expected import kernel
from driftband.prf.families import GammaDfe, LognormalDfe
from driftband.prf.history import ExponentialChange, HistorySfs, OneChange, TwoChanges
from driftband.prf.history_table import HistoryKernel


class _Direct:
    """Every S solved by the diffusion at its default settings."""

    def __init__(self, n: int, history) -> None:
        self.n = n
        self.hs = HistorySfs(n, history, "current")
        self.eq = kernel(n)

    def g(self, S):
        S = np.asarray(S, dtype=float)
        out = self.eq.g(S).copy()
        mid = (np.abs(S) >= 1e-3) & (np.abs(S) <= 1e5)
        if mid.any():
            out[mid] = self.hs.g(S[mid])
        for sel, at in ((np.abs(S) < 1e-3, 0.0), (np.abs(S) > 1e5, -1e5)):
            if sel.any():
                r = self.hs.g(np.array([at]))[0] / self.eq.g(at)
                out[sel] = self.eq.g(S[sel]) * r
        return out

    def dg_beneficial(self, s):
        return self.eq.dg_beneficial(s)


DFES = [
    GammaDfe(0.3, 500.0),
    GammaDfe(0.15, 2e4),
    GammaDfe(1.5, 20.0),
    LognormalDfe(3.0, 1.0),
    LognormalDfe(5.0, 0.5),
]


def accuracy(n: int, histories) -> None:
    print(f"DFE-averaged spectra, n = {n}: worst relative error, table vs direct solves")
    print("history | table s | nodes | DFE | classes >= 1e-3 of total | all classes")
    for h in histories:
        t0 = time.perf_counter()
        k = HistoryKernel(n, h)
        tk = time.perf_counter() - t0
        ex = DfeExpectation(n, k)
        t0 = time.perf_counter()
        ref = DfeExpectation(n, _Direct(n, h))
        for d in DFES:
            a, b = ex.mean_g(d), ref.mean_g(d)
            big = b >= 1e-3 * b.sum()
            e = np.abs(a / b - 1.0)
            print(f"{h} | {tk:.1f} | {k.nodes.size} | {d} | {e[big].max():.1e} | {e.max():.1e}")
        print(f"  (reference took {time.perf_counter() - t0:.0f} s)")


def fit_timing(n: int = 40) -> None:
    h = OneChange(0.25, 0.1)
    k = HistoryKernel(n, h)
    ex = DfeExpectation(n, k)
    L, theta = 1e6, 0.01
    rng = np.random.default_rng(1)
    xn = rng.poisson(theta * L * k.neutral()).astype(float)
    xs = rng.poisson(theta * L * ex.mean_g(GammaDfe(0.3, 400.0))).astype(float)
    d = SpectrumPair(n, False, xn, xs, L, L, None, None)
    t0 = time.perf_counter()
    fh = prepare_history(d, "one-change", eps=0.0)
    t1 = time.perf_counter()
    f = fit_model(d, DfeModel("gamma"), eps=0.0, history=fh)
    t2 = time.perf_counter()
    t3 = time.perf_counter()
    fit_model(d, DfeModel("gamma"), eps=0.0)
    t4 = time.perf_counter()
    print(
        f"n = {n}, one-change: history fit + table {t1 - t0:.1f} s, gamma fit given it "
        f"{t2 - t1:.2f} s (total {t2 - t0:.1f} s; target 5 s); nuisance-factor gamma fit "
        f"{t4 - t3:.2f} s; ratio {(t2 - t0) / (t4 - t3):.0f}x; shares {np.round(f.shares, 3)}"
    )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="one history, no fit timing")
    a = ap.parse_args()
    hs = [OneChange(0.25, 0.05)]
    if not a.quick:
        hs += [OneChange(50.0, 1.0), TwoChanges(0.1, 0.02, 1.5, 0.05), ExponentialChange(5.0, 0.1)]
    accuracy(20, hs)
    if not a.quick:
        fit_timing(40)


if __name__ == "__main__":
    main()
