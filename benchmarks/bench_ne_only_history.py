"""Size of the "only Ne differs" tests when one population's size changed recently.

Two populations share one distribution of s (gamma on S = 4·N·s at N = 400: shape 0.3,
mean |S| 200). Population A stays at N = 400; population B declined from 400 to 100 a
short time ago (or, as a control, has been at 100 for ever). The expected spectra of both
classes come from the diffusion with selection under the size history
(:class:`driftband.prf.history.HistorySfs`, S on the current size, a gamma average by a
trapezoid rule over log |S|). Fitted to noise-free expectations, the likelihood-ratio
statistic of each test is its non-centrality δ at the number of sites used (it grows in
proportion to the sites); the size of the test at level 5 % with L sites per class is
then P(χ²_df(δ·L/L₀) > χ²_df,0.95) (the non-central χ² limit of the LRT under a fixed
misspecification; scipy's ncx2). ``flagged``: whether compare's out-of-equilibrium check
(Tajima's D of the neutral class, nuisance factors) warned on the pair.

    python benchmarks/bench_ne_only_history.py              # n = 20, two decline ages
    python benchmarks/bench_ne_only_history.py --nodes 120  # a finer quadrature
    python benchmarks/bench_ne_only_history.py --demography auto   # explicit histories

With ``--demography`` other than ``nuisance`` each population's history is fitted to
its neutral class (:func:`driftband.fit.size_history.prepare_history`, tabulated spectra
of :class:`~driftband.prf.history_table.HistoryKernel`, independent of the trapezoid
average above) and the tests use it: ρ is then the ratio of the current sizes.
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
from scipy import stats

from driftband.compare import compare_pair
from driftband.fit.likelihood import SpectrumPair
from driftband.fit.mle import fit_model
from driftband.fit.models import DfeModel
from driftband.fit.options import FitOptions
from driftband.fit.results import PopulationFit
from driftband.fit.size_history import prepare_history
from driftband.prf.dfe import DfeExpectation
from driftband.prf.history import ConstantSize, HistorySfs, OneChange

SITES = 1e6  # sites per class of the expected spectra (δ is per this many sites)
THETA_A = 0.01  # θ per site of A (4·400·μ)


def gamma_average(hist_sfs: HistorySfs, shape: float, mean: float, nodes: int) -> np.ndarray:
    """E over S ~ −Gamma(shape, mean) of g(S), by a trapezoid rule in u = log|S|."""
    u = np.linspace(np.log(1e-6), np.log(1e6), nodes)
    t = np.exp(u)
    w = stats.gamma.pdf(t, shape, scale=mean / shape) * t  # density in u
    w *= np.gradient(u)  # trapezoid-like weights on the even grid
    w /= w.sum()  # the grid holds all but a negligible mass (checked: see main)
    return w @ hist_sfs.g(-t)


def population(
    name: str, n: int, history, N_now: float, nodes: int, demography: str = "nuisance"
) -> PopulationFit:
    hs = HistorySfs(n, history)
    theta = THETA_A * N_now / 400.0
    neutral = theta * SITES * hs.g(np.array([0.0]))[0]
    selected = theta * SITES * gamma_average(hs, 0.3, 200.0 * N_now / 400.0, nodes)
    data = SpectrumPair(n, False, neutral, selected, SITES, SITES)
    ex = DfeExpectation(n)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fh = None if demography == "nuisance" else prepare_history(data, demography, eps=0.0)
        if fh is not None:
            print(f"  {name}: history {fh.model} {fh.params}")
        fits = {"gamma": fit_model(data, DfeModel("gamma"), eps=0.0, expectation=ex, history=fh)}
    return PopulationFit(name, data, fits)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=20, help="gene copies (default 20)")
    ap.add_argument("--nodes", type=int, default=80, help="quadrature nodes in log|S|")
    ap.add_argument(
        "--demography", default="nuisance", help="nuisance (default), one-change or auto"
    )
    args = ap.parse_args()
    n = args.n
    mass = stats.gamma.cdf(1e6, 0.3, scale=200 / 0.3) - stats.gamma.cdf(1e-6, 0.3, scale=200 / 0.3)
    print(f"gamma mass inside the quadrature range: {mass:.8f}")
    t0 = time.perf_counter()
    a = population("A", n, ConstantSize(), 400.0, args.nodes, args.demography)
    cases = {
        "equilibrium pair (B at 100 for ever)": ConstantSize(),
        "B declined 400 -> 100, 40 generations ago": OneChange(0.25, 40 / 800),
        "B declined 400 -> 100, 200 generations ago": OneChange(0.25, 200 / 800),
    }
    opts = FitOptions(eps=0.0, demography=args.demography)
    tests = ("ne_only_free_lrt", "ne_only_lrt", "shared_dfe_lrt")
    print(f"n = {n}; {SITES:.0e} sites per class; size at 5 % for L sites per class")
    header = f"{'case':<46}{'test':<18}{'ratio':>7}{'pi ratio':>9}{'delta/1e6':>11}"
    header += "".join(f"{'L=' + f'{L:.0e}':>10}" for L in (1e6, 1e7, 1e8)) + "  flagged"
    print(header)
    for label, hist in cases.items():
        b = population("B", n, hist, 100.0, args.nodes, args.demography)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            rows = compare_pair(a, b, DfeModel("gamma"), opts, tests=tests)
        for r in rows:
            df = int(r.df)
            crit = stats.chi2.ppf(0.95, df)
            size = [
                float(stats.ncx2.sf(crit, df, r.statistic * L / SITES)) if r.statistic > 0 else 0.05
                for L in (1e6, 1e7, 1e8)
            ]
            ratio = r.extra.get("ne_ratio", float("nan"))
            pi = r.extra.get("ne_ratio_pi", float("nan"))
            print(
                f"{label:<46}{r.test:<18}{ratio:>7.3f}{pi:>9.3f}{r.statistic:>11.3f}"
                + "".join(f"{s:>10.3f}" for s in size)
                + ("  yes" if r.extra.get("out_of_equilibrium") else "  no")
            )
    print(f"time {time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
