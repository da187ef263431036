"""Calibration of intervals and tests on replicate studies from ``driftband simulate``.

Unlinked sites at equilibrium. Two scenarios, R replicate studies each (forward
Wright–Fisher, one distribution of s, gamma shape 0.3; 1e5 sites per class; n = 20 gene
copies; 50 blocks), fitted as ``driftband run`` does by default: the three default DFE
families, the model-averaged headline, a bootstrap refitting every family, the default
comparison tests with raw (χ²) and linkage-adjusted p-values.

* ``same``: A and B both N = 300 (same DFE on S, same Ne). Reports (a) the coverage of the
  95 % bootstrap interval of the model-averaged neutral-band share and of the gamma
  family's (both populations pooled; target 93–97 %), (b) the size at 5 % of every test
  (target <= 6 %), raw and adjusted.
* ``ne_only``: A N = 600, B N = 150 (the same distribution of s, so S̄_B = S̄_A / 4). Reports
  (c) the size at 5 % of both "only Ne differs" tests (true here) and (d) the power of
  ``neutral_share_difference`` and ``shared_dfe_lrt`` to detect the difference in
  neutral-band share (truth printed, about 0.1).

Run: python benchmarks/calibrate.py [R] [B] [workers]   (defaults 100, 200, 2)
Each replicate's result is appended as a JSON line to ``benchmarks/_data/calibration.jsonl``
as it finishes; ``python benchmarks/calibrate.py --summary`` prints the table from that
file (e.g. for a run cut short).
"""

from __future__ import annotations

import json
import os
import sys
import time
import warnings
from concurrent.futures import ProcessPoolExecutor

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np
from scipy.special import gammainc

from driftband.compare import compare_pair
from driftband.defaults import COMPARE_TESTS, DEFAULT_MODELS, DEFAULT_REPLICATES
from driftband.fit.api import fit_population
from driftband.fit.bootstrap import averaged_replicates, bootstrap_fits, percentile_interval
from driftband.fit.likelihood import SpectrumPair
from driftband.fit.models import DfeModel
from driftband.fit.options import FitOptions
from driftband.simulate import build_populations, parse_dfe, simulate_study

SHAPE, MEAN_S = 0.3, 200.0  # on S at the first population's size
SCENARIOS = {"same": ("A:N=300,n=20", "B:N=300,n=20"), "ne_only": ("A:N=600,n=20", "B:N=150,n=20")}


def truth(scenario: str) -> dict[str, float]:
    """True neutral-band shares P(t < 4) under Gamma(shape, mean) scaled by N_B/N_A."""
    scale = 1.0 if scenario == "same" else 150 / 600
    return {
        "A": float(gammainc(SHAPE, 4 * SHAPE / MEAN_S)),
        "B": float(gammainc(SHAPE, 4 * SHAPE / (MEAN_S * scale))),
    }


def _raw(pf) -> dict:
    """The point fits and every family's bootstrap of the neutral-band share, so that
    other interval constructions can be scored offline on the same replicates."""
    boot = pf.bootstrap
    fams = {}
    for m, f in pf.fits.items():
        mb = boot.models[m]
        fams[m] = {
            "share": float(f.shares[0]),
            "aic": float(f.aic),
            "n_params": int(f.n_params),
            "shares": [None if not np.isfinite(v) else float(v) for v in mb.shares[:, 0]],
            "loglik": [None if not np.isfinite(v) else float(v) for v in mb.loglik],
            "ok": [bool(v) for v in mb.ok],
        }
    return fams


def one_replicate(args) -> dict[str, float]:
    """Simulate, fit, bootstrap and compare one study; return the calibration events."""
    scenario, rep, B = args
    warnings.simplefilter("ignore")
    pops = build_populations(list(SCENARIOS[scenario]), [])
    study = simulate_study(
        pops,
        parse_dfe(f"gamma:shape={SHAPE},mean={MEAN_S}"),
        theta=0.02,
        sites=100_000,
        blocks=50,
        seed=1000 * (scenario == "ne_only") + rep,
    )
    ss = study.spectra
    opts = FitOptions(models=tuple(DfeModel(m) for m in DEFAULT_MODELS), eps=0.0)
    fits = []
    for name, pop in ss.populations.items():
        pf = fit_population(SpectrumPair.from_population(pop), opts, name)
        pf.dataset = "sim"
        fits.append(pf)
    bootstrap_fits(fits, ss.populations, opts, B, seed=rep, workers=1)
    rows = compare_pair(fits[0], fits[1], DfeModel("gamma"), opts)
    out = {}
    tv = truth(scenario)
    for pf in fits:
        h = pf.headline()
        lo, hi = h.shares_ci[0]
        out[f"cover_{pf.population}"] = float(lo <= tv[pf.population] <= hi)
        out[f"share_{pf.population}"] = float(h.shares[0])
        lo, hi = pf.model_bootstrap("gamma").shares_ci[0]
        out[f"cover_gamma_{pf.population}"] = float(lo <= tv[pf.population] <= hi)
        out[f"raw_{pf.population}"] = _raw(pf)
    for r in rows:
        out[f"p_{r.test}"] = r.p_value
        out[f"praw_{r.test}"] = r.extra.get("p_raw", r.p_value)
    return out


def _intervals_from_raw(raw: dict, level: float = 0.95) -> dict[str, tuple[float, float]]:
    """The averaged share's interval two ways from one population's logged replicates:
    percentiles of the per-replicate averages, and the weighted mixture of the families'
    replicates (the library's own averaging, :func:`averaged_replicates`)."""
    fams = list(raw.values())

    def col(key: str) -> np.ndarray:
        return np.array([[np.nan if v is None else v for v in f[key]] for f in fams]).T

    avg, _w, mix = averaged_replicates(
        col("shares")[:, :, None],
        col("loglik"),
        np.array([f["n_params"] for f in fams]),
        np.array([f["ok"] for f in fams]).T & np.isfinite(col("shares")),
        level,
    )
    return {"percentile": tuple(percentile_interval(avg[:, 0], level)), "mixture": tuple(mix[0])}


LOG = os.path.join(os.path.dirname(os.path.abspath(__file__)), "_data", "calibration.jsonl")


def _run(R: int, B: int, workers: int) -> None:
    os.makedirs(os.path.dirname(LOG), exist_ok=True)
    t0 = time.perf_counter()
    tasks = [(sc, r, B) for r in range(R) for sc in SCENARIOS]
    with open(LOG, "w") as log, ProcessPoolExecutor(max_workers=workers) as pool:
        log.write(json.dumps({"R": R, "B": B}) + "\n")
        for (sc, r, _b), out in zip(tasks, pool.map(one_replicate, tasks)):
            log.write(json.dumps({"scenario": sc, "replicate": r, **out}) + "\n")
            log.flush()
    print(f"{time.perf_counter() - t0:.0f} s for {len(tasks)} replicate studies")


def main() -> None:
    if sys.argv[1:2] != ["--summary"]:
        R = int(sys.argv[1]) if len(sys.argv) > 1 else 100
        B = int(sys.argv[2]) if len(sys.argv) > 2 else DEFAULT_REPLICATES
        workers = int(sys.argv[3]) if len(sys.argv) > 3 else 2
        _run(R, B, workers)
    with open(LOG) as fh:
        head = json.loads(fh.readline())
        lines = [json.loads(x) for x in fh if x.strip()]
    res = {sc: [x for x in lines if x["scenario"] == sc] for sc in SCENARIOS}
    print(
        f"calibration: {', '.join(f'{sc}: R = {len(v)}' for sc, v in res.items())} "
        f"replicate studies, B = {head['B']} bootstrap replicates"
    )
    print(f"{'quantity':<58} {'value':>7} {'target':>10}")

    def rate(sc, key, f=lambda v: v):
        v = np.array(
            [f(r[key]) for r in res[sc] if r.get(key) is not None and np.isfinite(r[key])],
            dtype=float,
        )
        return float(v.mean()), v.size

    def se(p: float, m: int) -> str:
        return f"± {np.sqrt(max(p * (1 - p), 1e-12) / max(m, 1)):.3f}"

    for tag, what in (("", "model-averaged"), ("gamma_", "gamma family")):
        v = [r[f"cover_{tag}{k}"] for r in res["same"] for k in "AB" if f"cover_{tag}{k}" in r]
        if v:
            c = float(np.mean(v))
            label = f"(a) coverage of 95% CI of neutral share, {what}"
            print(f"{label:<58} {c:>7.3f} {'0.93-0.97':>10} {se(c, len(v))}")
    for sc in SCENARIOS:
        t = truth(sc)
        for how in ("percentile", "mixture"):
            hits, width = [], []
            for r in res[sc]:
                for k in "AB":
                    if f"raw_{k}" in r:
                        lo, hi = _intervals_from_raw(r[f"raw_{k}"])[how]
                        hits.append(lo <= t[k] <= hi)
                        width.append(hi - lo)
            if hits:
                c = float(np.mean(hits))
                label = f"(a) {sc}: coverage, averaged share, {how} interval"
                print(
                    f"{label:<58} {c:>7.3f} {'0.93-0.97':>10} {se(c, len(hits))}"
                    f"  (n = {len(hits)}, mean width {np.mean(width):.3f})"
                )
    for test in COMPARE_TESTS:
        for key, kind in (("praw", "raw"), ("p", "adjusted")):
            v, m = rate("same", f"{key}_{test}", lambda p: p < 0.05)
            label = f"(b) size at 5% of {test} ({kind})"
            print(f"{label:<58} {v:>7.3f} {'<= 0.06':>10} {se(v, m)}")
    for test in ("ne_only_free_lrt", "ne_only_lrt"):
        for key, kind in (("praw", "raw"), ("p", "adjusted")):
            v, m = rate("ne_only", f"{key}_{test}", lambda p: p < 0.05)
            label = f"(c) size at 5% of {test} (only Ne differs; {kind})"
            print(f"{label:<58} {v:>7.3f} {'<= 0.06':>10} {se(v, m)}")
    tv = truth("ne_only")
    for test in ("neutral_share_difference", "shared_dfe_lrt"):
        v, m = rate("ne_only", f"p_{test}", lambda p: p < 0.05)
        label = f"(d) power of {test} (true diff {tv['B'] - tv['A']:.3f})"
        print(f"{label:<58} {v:>7.3f} {'high':>10} {se(v, m)}")
    for sc in SCENARIOS:
        t = truth(sc)
        for p in "AB":
            est = np.array([r[f"share_{p}"] for r in res[sc]])
            print(
                f"    {sc} {p}: truth {t[p]:.3f}, mean estimate {est.mean():.3f}, "
                f"sd {est.std(ddof=1) if est.size > 1 else float('nan'):.3f}"
            )


if __name__ == "__main__":
    main()
