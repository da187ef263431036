"""Benchmark: one gamma DFE fit with demographic nuisance factors, n = 40 and n = 200.

Targets (kept here, see DEVELOPERS.md): <= 0.2 s (n = 40) and <= 1 s (n = 200) on one
core. The reference in the same run is the same likelihood evaluated with the DFE average done by
adaptive quadrature (scipy.integrate.quad_vec over ln t), timed per evaluation, so the
ratio shows what the per-n quadrature table buys.

Run: python benchmarks/bench_fit.py
"""

from __future__ import annotations

import os
import time
import warnings

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np
from scipy import integrate, stats

from driftband.fit.likelihood import SpectrumPair
from driftband.fit.mle import fit_model
from driftband.fit.models import DfeModel
from driftband.prf import DfeExpectation, GammaDfe
from driftband.prf.expected import kernel

TARGETS = {40: 0.2, 200: 1.0}


def _data(n, rng):
    true = GammaDfe(0.3, 500.0)
    i = np.arange(1, n)
    r = 1 + 0.3 * np.sin(i / 3)
    g = DfeExpectation(n).mean_g(true)
    xn = rng.poisson(0.01 * 1e6 * r / i).astype(float)
    xs = rng.poisson(0.01 * 1e6 * r * g).astype(float)
    full = lambda x: np.concatenate([[1e6 - x.sum()], x, [0.0]])  # noqa: E731
    return SpectrumPair.from_arrays(n, False, full(xn), full(xs), 1e6, 1e6)


def _quad_mean_g(n, shape, mean):
    k = kernel(n)
    dist = stats.gamma(shape, scale=mean / shape)

    def f(u):
        t = np.exp(u)
        return k.g(-t) * dist.pdf(t) * t

    return integrate.quad_vec(f, np.log(1e-8), np.log(1e8), epsrel=1e-10)[0]


def main() -> None:
    rng = np.random.default_rng(7)
    print(
        f"{'n':>5} {'fit time (s)':>13} {'target (s)':>11} {'ratio':>7} {'evals':>6} "
        f"{'table eval (us)':>16} {'quad_vec eval (us)':>19} {'speed-up':>9}"
    )
    for n, target in TARGETS.items():
        data = _data(n, rng)
        ex = DfeExpectation(n)  # per-n table, built once (as `driftband fit` does)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fit_model(data, DfeModel("gamma"), eps=0.0, expectation=ex, stderr=False)
            reps = 5
            t0 = time.perf_counter()
            for _ in range(reps):
                f = fit_model(data, DfeModel("gamma"), eps=0.0, expectation=ex)
            dt = (time.perf_counter() - t0) / reps
        d = GammaDfe(0.3, 500.0)
        t0 = time.perf_counter()
        for _ in range(500):
            ex.mean_g(d)
        te = (time.perf_counter() - t0) / 500
        t0 = time.perf_counter()
        for _ in range(3):
            _quad_mean_g(n, 0.3, 500.0)
        tq = (time.perf_counter() - t0) / 3
        print(
            f"{n:>5} {dt:>13.3f} {target:>11.1f} {dt / target:>7.2f} {f.n_eval:>6} "
            f"{te * 1e6:>16.1f} {tq * 1e6:>19.0f} {tq / te:>9.0f}x"
        )


if __name__ == "__main__":
    main()
