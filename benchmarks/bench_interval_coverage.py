"""Coverage of bootstrap percentile intervals against the number of replicates B.

An idealised bootstrap: the estimate is normal around the truth, and the bootstrap
replicates are exact draws from the estimate's sampling distribution centred on the
estimate. Any shortfall of coverage then comes from estimating the two quantiles from B
draws (``numpy.quantile``, linear interpolation), the part that a larger B removes. It
sets the default B of ``driftband run``: the smallest B whose coverage is within one
point of nominal at the 95 % level.

Run: ``python benchmarks/bench_interval_coverage.py [studies]``.
"""

from __future__ import annotations

import sys

import numpy as np


def coverage(B: int, studies: int, level: float = 0.95, seed: int = 1) -> float:
    rng = np.random.default_rng(seed)
    est = rng.standard_normal(studies)  # truth 0, sd 1
    draws = est[:, None] + rng.standard_normal((studies, B))
    a = (1 - level) / 2
    lo, hi = np.quantile(draws, [a, 1 - a], axis=1)
    return float(np.mean((lo <= 0) & (0 <= hi)))


def main() -> None:
    studies = int(sys.argv[1]) if len(sys.argv) > 1 else 40_000
    print(
        f"percentile-interval coverage at 95 %, {studies} studies per B "
        f"(binomial SE about {100 * (0.95 * 0.05 / studies) ** 0.5:.2f} points)"
    )
    print(f"{'B':>6} {'coverage':>9} {'shortfall':>10}")
    for B in (50, 100, 200, 400, 1000):
        c = coverage(B, studies)
        print(f"{B:>6} {100 * c:>8.2f}% {100 * (0.95 - c):>9.2f}")


if __name__ == "__main__":
    main()
