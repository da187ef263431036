"""Benchmark: a neutral-only population is fitted and bootstrapped as fast as any other.

Two studies of the same size from ``driftband simulate`` (two populations N = 300,
n = 20, 1e5 sites per class, 50 blocks, θ = 0.02): one whose 0-fold mutations are all
neutral (``--true-dfe neutral``: the true share is 1), one with the default gamma DFE (the
reference in the same run). Both are fitted with the default families, misorientation
estimated, and bootstrapped with B replicates in one process; the script prints the CPU
time of each, their ratio (target: <= 1.5), the failed/non-converged replicate counts
and the neutral-only study's headline share (expected at or near 1).

Run: python benchmarks/bench_neutral_only.py [B]   (default 20)
"""

from __future__ import annotations

import os
import sys
import time
import warnings

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

from driftband.defaults import DEFAULT_MODELS
from driftband.fit.api import fit_population
from driftband.fit.bootstrap import bootstrap_fits
from driftband.fit.likelihood import SpectrumPair
from driftband.fit.models import DfeModel
from driftband.fit.options import FitOptions
from driftband.simulate import build_populations, parse_dfe, simulate_study


def one(dfe: str, B: int) -> tuple[float, list[str]]:
    """CPU seconds of fit + bootstrap of a two-population study, and a line per population."""
    pops = build_populations(["A:N=300,n=20", "B:N=300,n=20"], [])
    study = simulate_study(pops, parse_dfe(dfe), theta=0.02, sites=100_000, blocks=50, seed=7)
    ss = study.spectra
    opts = FitOptions(models=tuple(DfeModel(m) for m in DEFAULT_MODELS), eps=None)
    t0 = time.process_time()
    fits = [
        fit_population(SpectrumPair.from_population(p), opts, name)
        for name, p in ss.populations.items()
    ]
    bootstrap_fits(fits, ss.populations, opts, B, seed=1, workers=1)
    cpu = time.process_time() - t0
    lines = []
    for pf in fits:
        h = pf.headline()
        boots = [b for b in (pf.model_bootstrap(m) for m in pf.fits) if b is not None]
        bad = sum(b.failed if b.converged is None else int((~b.converged).sum()) for b in boots)
        ci = h.shares_ci[0] if h.shares_ci else None
        iv = f"{ci.low:.3f}-{ci.high:.3f}" if ci is not None else "none"
        lines.append(
            f"    {pf.population}: headline share {h.shares[0]:.3f} ({iv}); "
            f"failed or non-converged refits {bad} of {B * len(pf.fits)}"
        )
    return cpu, lines


def main() -> None:
    B = int(sys.argv[1]) if len(sys.argv) > 1 else 20
    warnings.simplefilter("ignore")
    ref, ref_lines = one("gamma:shape=0.3,mean=200", B)
    neu, neu_lines = one("neutral", B)
    print(f"fit + bootstrap (B = {B}, 2 populations, 3 families, one process), CPU seconds")
    print(f"  selected (gamma shape 0.3, mean |S| 200): {ref:7.1f} s")
    print("\n".join(ref_lines))
    print(f"  neutral-only (--true-dfe neutral):             {neu:7.1f} s")
    print("\n".join(neu_lines))
    print(f"  ratio neutral-only / selected: {neu / ref:.2f} (target <= 1.5)")


if __name__ == "__main__":
    main()
