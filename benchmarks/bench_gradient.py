"""Benchmark: fits with the analytic gradient against L-BFGS-B's finite differences.

Both paths run in the same process, on the same data, interleaved, so that the load of
the machine weighs on both alike (``Objective.analytic_gradient = False`` selects the
finite-difference path, as fits ran before the analytic gradient):

1. per refit: bootstrap replicates of the demo's two populations, every default family,
   refitted as the bootstrap does it (warm start and the best grid point, no standard
   errors, the score at the point estimate), on one core;
2. per bootstrap: ``bootstrap_fits`` of the demo's point fits (B replicates, W workers);
3. the whole ``driftband run`` of the demo study (its default B = 200, 2 workers), with
   the analytic gradient and, with ``--run-both``, with finite differences as well.

Target (issue 11): the demo run with B = 200 within 2 minutes on 2 cores.

Run: python benchmarks/bench_gradient.py [--replicates 200] [--workers 2] [--run-both]
"""

from __future__ import annotations

import argparse
import os
import resource
import tempfile
import time
import warnings

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np

from driftband.fit.api import LabelledSpectra, block_spectra, fit_spectra
from driftband.fit.bootstrap import _replicate_task, resample_indices
from driftband.fit.likelihood import Objective
from driftband.run import demo_study, run_study
from driftband.run.stages import fit_options
from driftband.spectra.io import read_spectra

TARGET_RUN_S = 120.0


def _load() -> float:
    return os.getloadavg()[0]


def _cpu() -> float:
    """CPU seconds of this process and of its finished children."""
    return sum(
        r.ru_utime + r.ru_stime
        for r in (
            resource.getrusage(resource.RUSAGE_SELF),
            resource.getrusage(resource.RUSAGE_CHILDREN),
        )
    )


def _timed_run(out: str, replicates: int, workers: int) -> tuple[float, dict[str, float]]:
    """Wall time of the demo run and of its stages (from the run log; ``cpu``: CPU seconds
    of the run and its workers)."""
    c0 = _cpu()
    t0 = time.perf_counter()
    res = run_study(demo_study(), out, replicates=replicates, workers=workers)
    dt = time.perf_counter() - t0
    stages: dict[str, float] = {}
    with open(os.path.join(res.out_dir, "run.log")) as fh:
        for line in fh:
            if "INFO stage " in line and ": done in " in line:
                name = line.split("INFO stage ")[1].split(":")[0]
                stages[name] = float(line.split("done in ")[1].split(" s")[0])
    stages["cpu"] = _cpu() - c0
    return dt, stages


def _set(analytic: bool) -> None:
    Objective.analytic_gradient = analytic


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--replicates", type=int, default=200, help="B of the bootstrap (step 2)")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--refits", type=int, default=4, help="replicates per population (step 1)")
    ap.add_argument("--run-both", action="store_true", help="also run the demo with FD")
    ap.add_argument("--run-replicates", type=int, default=200, help="B of the demo run")
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    tmp = tempfile.mkdtemp(prefix="bench-gradient-")
    print(f"cores: {os.cpu_count()}, load average at start: {_load():.1f}")

    # -- 3 (first: its spectra feed steps 1 and 2) ------------------------------------
    _set(True)
    B = args.run_replicates
    t_run, st_run = _timed_run(os.path.join(tmp, "analytic"), B, 2)
    runs = {"analytic": (t_run, st_run, _load())}
    if args.run_both:
        _set(False)
        runs["finite differences"] = (*_timed_run(os.path.join(tmp, "fd"), B, 2), _load())
        _set(True)

    study = demo_study()
    options = fit_options(study)
    path = os.path.join(tmp, "analytic", "spectra.json")
    sets = [LabelledSpectra(path, read_spectra(path), "")]
    fits = fit_spectra(sets, options)
    pops = block_spectra(sets)

    # -- 1: per refit -----------------------------------------------------------------
    per: dict[bool, list[float]] = {True: [], False: []}
    for k, pf in enumerate(fits):
        pop = pops[pf.population]
        cn, cs = pop.classes[options.neutral], pop.classes[options.selected]
        idx = resample_indices(cn.block_sfs.shape[0], args.refits, 11, k)
        starts = {m.name: pf.fits[m.name].x for m in options.models}
        for row in idx:
            for analytic in (False, True):  # interleaved
                _set(analytic)
                task = (
                    pf.data.n,
                    pf.data.folded,
                    cn.block_sfs,
                    cs.block_sfs,
                    cn.block_sites,
                    cs.block_sites,
                    row[None, :],
                    options,
                    starts,
                    None,
                )
                t0 = time.perf_counter()
                _replicate_task(task)
                per[analytic].append((time.perf_counter() - t0) / len(options.models))
    _set(True)

    # -- 2: per bootstrap -------------------------------------------------------------
    from driftband.fit.bootstrap import bootstrap_fits

    boot: dict[bool, tuple[float, float]] = {}
    reps: dict[bool, dict[str, tuple[np.ndarray, np.ndarray]]] = {}
    for analytic in (False, True):
        _set(analytic)
        t0 = time.perf_counter()
        bootstrap_fits(fits, pops, options, args.replicates, seed=1, workers=args.workers)
        boot[analytic] = (time.perf_counter() - t0, _load())
        reps[analytic] = {
            f"{pf.population}/{m}": (mb.shares.copy(), np.asarray(mb.loglik, dtype=float))
            for pf in fits
            for m, mb in pf.bootstrap.models.items()
        }
    _set(True)

    # -- report -----------------------------------------------------------------------
    fd, an = np.array(per[False]), np.array(per[True])
    print()
    print(f"1. per refit (one core; {fd.size} refits each, every default family, score included)")
    print(f"   finite differences {np.median(fd):7.3f} s (median; mean {fd.mean():.3f})")
    print(f"   analytic gradient  {np.median(an):7.3f} s (median; mean {an.mean():.3f})")
    print(f"   speed-up           {np.median(fd / an):7.2f}x (median of paired ratios)")
    print()
    print(
        f"2. per bootstrap: bootstrap_fits, 2 populations x {len(options.models)} families x "
        f"B = {args.replicates}, {args.workers} workers"
    )
    for analytic, label in ((False, "finite differences"), (True, "analytic gradient ")):
        print(f"   {label} {boot[analytic][0]:7.1f} s (load average after {boot[analytic][1]:.1f})")
    print(f"   speed-up           {boot[False][0] / boot[True][0]:7.2f}x")
    print("   replicate by replicate, analytic against finite differences:")
    for key, (sa, la) in reps[True].items():
        sf, lf = reps[False][key]
        d = la - lf
        ds = np.nanmax(np.abs(sa - sf), axis=1)
        lo, hi = (np.nanquantile(v[:, 0], [0.025, 0.975]) for v in (sf, sa))
        print(
            f"   {key:18s} log-lik higher by > 1e-6 in {int(np.sum(d > 1e-6)):3d}, lower in "
            f"{int(np.sum(d < -1e-6)):2d} (min {np.nanmin(d):+.1e}); shares within 1e-4 in "
            f"{int(np.sum(ds <= 1e-4)):3d}; 95 % interval of the first band "
            f"{lo[0]:.4f}-{lo[1]:.4f} -> {hi[0]:.4f}-{hi[1]:.4f}"
        )
    print()
    print(f"3. driftband run of the demo study (B = {B}, 2 workers)")
    for label, (t, st, load) in runs.items():
        cpu = st.pop("cpu")
        parts = ", ".join(f"{k} {v:.1f} s" for k, v in st.items())
        verdict = "within" if t <= TARGET_RUN_S else f"{t - TARGET_RUN_S:.0f} s over"
        print(
            f"   {label:18s} {t:7.1f} s ({verdict} the {TARGET_RUN_S:.0f} s target; "
            f"load {load:.1f})"
        )
        print(f"      stages: {parts}")
        print(f"      CPU time of the run and its workers: {cpu:.0f} s ({cpu / 2:.0f} s per core)")


if __name__ == "__main__":
    main()
