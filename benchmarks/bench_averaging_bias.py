"""Benchmark: bias of the model-averaged neutral share on exact (expected) spectra.

Spectra equal to their expectation (no sampling noise) under a known DFE are fitted with
the three default families, as ``driftband fit`` does; the table gives each family's share
of |Ne*s| < 1, its Akaike weight (Burnham & Anderson 2002) and the averaged headline,
against the truth (scipy.stats for gamma and lognormal truths, the band mass for a
discrete truth). It separates the bias of model averaging from sampling error: whatever
the headline misses here, it misses on average at that data size.

Usage::

    python benchmarks/bench_averaging_bias.py          # prints the table (about 2 min)
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

import numpy as np
from scipy import stats

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "src"))

from driftband.fit.api import fit_population
from driftband.fit.likelihood import SpectrumPair
from driftband.fit.models import parse_models
from driftband.fit.options import FitOptions
from driftband.prf.dfe import DfeExpectation
from driftband.prf.families import DiscreteDfe, GammaDfe, LognormalDfe

N_COPIES = 20
THETA = 0.01


def truth_share(dfe) -> float:
    """Share of |Ne*s| < 1 (|S| < 4) of the true DFE, from scipy.stats or the masses."""
    if isinstance(dfe, GammaDfe):
        return float(stats.gamma(dfe.shape, scale=dfe.mean / dfe.shape).cdf(4.0))
    if isinstance(dfe, LognormalDfe):
        return float(stats.lognorm(dfe.sigma, scale=np.exp(dfe.mu)).cdf(4.0))
    return float(dfe.masses[0])


def row(dfe, sites: float, ex: DfeExpectation, options: FitOptions) -> str:
    g = ex.mean_g(dfe)
    i = np.arange(1, N_COPIES)
    neu, sel = np.zeros(N_COPIES + 1), np.zeros(N_COPIES + 1)
    neu[1:N_COPIES] = THETA * sites / i
    sel[1:N_COPIES] = THETA * sites * g
    neu[0], sel[0] = sites - neu.sum(), sites - sel.sum()
    data = SpectrumPair.from_arrays(N_COPIES, False, neu, sel, sites, sites)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pf = fit_population(data, options, "exact", ex)
    h = pf.headline()
    w = h.weights or {}
    fams = "  ".join(
        f"{m} {float(f.shares[0]):.3f} (w {float(w.get(m, 0)):.2f})" for m, f in pf.fits.items()
    )
    t, a = truth_share(dfe), float(h.shares[0])
    return f"{sites:8.0e}  truth {t:.3f}  averaged {a:.3f} ({a - t:+.3f})  {fams}"


def main() -> None:
    options = FitOptions(models=tuple(parse_models("gamma,lognormal,discrete")))
    ex = DfeExpectation(N_COPIES)
    truths = [
        ("gamma shape 0.3, mean |S| 200", GammaDfe(shape=0.3, mean=200.0)),
        ("gamma shape 0.2, mean |S| 1000", GammaDfe(shape=0.2, mean=1000.0)),
        ("gamma shape 0.5, mean |S| 100", GammaDfe(shape=0.5, mean=100.0)),
        ("lognormal mu 4, sigma 3", LognormalDfe(mu=4.0, sigma=3.0)),
        ("discrete 0.3/0.1/0.2/0.4", DiscreteDfe(masses=(0.3, 0.1, 0.2, 0.4))),
    ]
    t0 = time.time()
    print(f"n = {N_COPIES}, theta = {THETA} per site, equal sites per class, expected spectra")
    for label, dfe in truths:
        print(label)
        for sites in (1e5, 1e6):
            print("  " + row(dfe, sites, ex, options))
    print(f"({time.time() - t0:.0f} s)")


if __name__ == "__main__":
    main()
