"""Benchmark of ``driftband simulate``: 10^5 sites per class, N = 1,000, burn-in 10N.

Prints wall-clock times and the ratio to the target (60 s for the simulation; the aim is
about 10 s). Run with ``python benchmarks/bench_simulate.py`` (``--quick`` for N = 200).
The machine is shared, so figures are upper bounds; the work is dominated by numpy's
binomial draws (one per segregating mutation per generation), reported as a throughput.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

from driftband.simulate import build_populations, parse_dfe, simulate_study, write_study

TARGET_S = 60.0


def run(N: int, theta: float, sites: int, seed: int = 1) -> tuple[float, object]:
    pops = build_populations([f"pop:N={N},n=20"])
    dfe = parse_dfe("gamma:shape=0.3,mean=200")
    t0 = time.perf_counter()
    st = simulate_study(pops, dfe, theta=theta, sites=sites, blocks=100, seed=seed)
    return time.perf_counter() - t0, st


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--quick", action="store_true", help="N = 200 instead of 1,000")
    args = ap.parse_args()
    N = 200 if args.quick else 1000
    sites = 100_000
    print(
        f"driftband simulate benchmark: N = {N}, {sites} sites per class, burn-in 10N "
        f"= {10 * N} generations, gamma DFE (shape 0.3, mean 200), n = 20"
    )
    for theta in (0.005, 0.01):
        secs, st = run(N, theta, sites)
        truth = st.spectra.provenance["simulation"]["populations"]["pop"]
        seg = sum(truth["segregating_at_end"].values())
        gens = truth["generations"]
        print(
            f"  theta = {theta:<6} simulation {secs:7.2f} s   target {TARGET_S:.0f} s   "
            f"ratio {secs / TARGET_S:5.2f}   ({seg} segregating mutations at the end, "
            f"~{seg * gens / secs / 1e6:.1f} M mutation-generations/s)"
        )
    with tempfile.TemporaryDirectory() as d:
        pops = build_populations([f"a:N={N},n=20", f"b:N={N // 10},n=16"])
        st = simulate_study(
            pops,
            parse_dfe("gamma:shape=0.3,mean=200"),
            theta=0.01,
            sites=sites,
            blocks=100,
            seed=2,
            divergence_generations=N,
        )
        t0 = time.perf_counter()
        write_study(
            st, Path(d) / "s.json", vcf_prefix=Path(d) / "s", outgroup=("out", 4), missing=0.01
        )
        secs = time.perf_counter() - t0
        size = sum(f.stat().st_size for f in Path(d).iterdir())
        print(
            f"  writing spectra + VCF + BED + sample table (2 populations, 20 samples): "
            f"{secs:.2f} s, {size / 1e6:.1f} MB"
        )


if __name__ == "__main__":
    main()
