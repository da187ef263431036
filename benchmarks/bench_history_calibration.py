"""Size of the "only Ne differs" tests on explicit histories, and the shares' error,
over Poisson replicates of a pair in which one population declined recently.

Population A stays at N = 400; B declined 400 -> 100 at tau = 0.05 (40 generations
before the sample); both share one distribution of s (gamma, shape 0.3, mean |S| 200 at
N = 400: mean 200 for A and 50 for B on their current sizes). The expected spectra of
both classes come from the diffusion at its default settings with a trapezoid gamma
average (as ``bench_ne_only_history.py``; independent of the fit's tables), and each
replicate draws Poisson counts from them (unlinked sites: no blocks, so the p-values are
the chi-square ones). Each replicate fits both populations with ``--demography
one-change`` (history, then gamma) and runs both "only Ne differs" tests; the script
prints their rejection rates at 5 % and 1 % with binomial standard errors, and the bias
and RMSE of each population's share |Ne*s| < 1 on its current size.

    python benchmarks/bench_history_calibration.py --replicates 60 --workers 2
"""

from __future__ import annotations

import argparse
import math
import multiprocessing as mp
import time
import warnings

import numpy as np

from driftband.compare import compare_pair
from driftband.fit.api import fit_population
from driftband.fit.likelihood import SpectrumPair
from driftband.fit.models import DfeModel
from driftband.fit.options import FitOptions
from driftband.prf.families import GammaDfe, band_shares
from driftband.prf.history import ConstantSize, HistorySfs, OneChange

SITES = 1e6
THETA_A = 0.01
N_COPIES = 20
OPTS = FitOptions(eps=0.0, demography="one-change", models=(DfeModel("gamma"),))
TESTS = ("ne_only_free_lrt", "ne_only_lrt")


def _gamma_average(hs: HistorySfs, shape: float, mean: float, nodes: int = 80) -> np.ndarray:
    from scipy import stats

    u = np.linspace(np.log(1e-6), np.log(1e6), nodes)
    t = np.exp(u)
    w = stats.gamma.pdf(t, shape, scale=mean / shape) * t * np.gradient(u)
    return (w / w.sum()) @ hs.g(-t)


def expected(history, n_now: float) -> tuple[np.ndarray, np.ndarray]:
    hs = HistorySfs(N_COPIES, history)
    theta = THETA_A * n_now / 400.0
    neutral = theta * SITES * hs.g(np.array([0.0]))[0]
    selected = theta * SITES * _gamma_average(hs, 0.3, 200.0 * n_now / 400.0)
    return neutral, selected


def replicate(args: tuple[int, dict]) -> dict:
    seed, exp = args
    rng = np.random.default_rng(seed)
    pops = []
    for name in ("A", "B"):
        xn = rng.poisson(exp[name][0]).astype(float)
        xs = rng.poisson(exp[name][1]).astype(float)
        d = SpectrumPair(N_COPIES, False, xn, xs, SITES, SITES, None, None)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            pops.append(fit_population(d, OPTS, name))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rows = compare_pair(pops[0], pops[1], DfeModel("gamma"), OPTS, tests=TESTS)
    return {
        "share_A": float(pops[0].fits["gamma"].shares[0]),
        "share_B": float(pops[1].fits["gamma"].shares[0]),
        **{r.test: float(r.extra.get("p_raw", r.p_value)) for r in rows},
    }


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--replicates", type=int, default=60)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--seed", type=int, default=1)
    a = ap.parse_args()
    t0 = time.perf_counter()
    exp = {"A": expected(ConstantSize(), 400.0), "B": expected(OneChange(0.25, 0.05), 100.0)}
    edges = (0.0, 1.0, 10.0, 100.0)
    truth = {
        "A": float(band_shares(GammaDfe(0.3, 200.0), edges)[0]),
        "B": float(band_shares(GammaDfe(0.3, 50.0), edges)[0]),
    }
    tasks = [(a.seed * 100_003 + r, exp) for r in range(a.replicates)]
    with mp.get_context("spawn").Pool(a.workers) as pool:
        res = pool.map(replicate, tasks)
    R = len(res)
    print(f"{R} Poisson replicates, n = {N_COPIES}, {SITES:.0e} sites per class, unlinked")
    for t in TESTS:
        p = np.array([r[t] for r in res])
        for lvl in (0.05, 0.01):
            k = int(np.sum(p < lvl))
            se = math.sqrt(lvl * (1 - lvl) / R)
            print(f"{t:<18} rejects at {lvl:.0%}: {k}/{R} = {k / R:.3f} (SE at nominal {se:.3f})")
    for pop in ("A", "B"):
        v = np.array([r[f"share_{pop}"] for r in res])
        print(
            f"share {pop}: truth {truth[pop]:.3f}, mean {v.mean():.3f} (bias "
            f"{v.mean() - truth[pop]:+.4f}), RMSE {math.sqrt(np.mean((v - truth[pop]) ** 2)):.4f}"
        )
    print(f"time {time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
