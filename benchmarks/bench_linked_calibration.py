"""Calibration on forward simulations with recombination and linked selection (fwdpy11).

Needs fwdpy11, which is not a driftband dependency: ``pip install fwdpy11==0.24.7``
(msprime and tskit come with it). The simulator is ``benchmarks/_linked_sim.py``.

Each replicate study simulates four populations on the same kind of linked genome
(1 Mb, 40 blocks of 25 kb, every bp one 0fold and one 4fold site, mu = 1e-6 per bp per
class, r = 5e-6 per bp; s of new 0fold mutations ~ -Gamma(shape 0.3, mean 0.1) shared by
all populations, fitness 1 : 1+s : 1+2s; burn-in 10 N generations at each population's
ancestral size; n = 20 gene copies):

* ``A1``, ``A2``: N = 500 (theta = 4N*mu = 0.002, 4Nr = 0.01, mean S = 4Ns = 200), two
  independent simulations with identical parameters;
* ``H``: N = 250 at equilibrium (the same distribution of s, so S is halved);
* ``D``: N = 500, halved to 250 at 0.1 N = 50 generations before the sample.

The spectra of the four are written as one driftband spectra JSON and run through the
real commands, ``driftband fit SPECTRA.json --misorientation fixed:0 --bootstrap B
--workers 1 -o fit.json`` (default families) and ``driftband compare fit.json --pairs
A1:A2,A1:H,A1:D -o compare.tsv``. Measured:

1. coverage of the 95 % interval of the model-averaged neutral-band share (headline
   ``shares_ci[0]``) of A1, A2 and H, against the truth P(|s| < 1/Ne) with Ne the census
   N and with Ne_pi = pi/(4 mu) (background selection lowers Ne below N; pi is the
   expected neutral diversity of the whole population, tskit branch statistic x mu);
2. size at 5 % of every comparison test on A1:A2 (same DFE, same N), p_raw and p_value;
3. size of ne_only_free_lrt and ne_only_lrt on A1:H (equilibrium, N_H = N/2) and A1:D
   (recent halving).

Run:  python benchmarks/bench_linked_calibration.py [R] [B] [workers]  (defaults 10 100 2)
One JSON line per study is appended to ``benchmarks/_data/linked_calibration.jsonl`` as it
finishes; ``--summary`` prints the table from that file (binomial standard errors beside
every rate).
"""

from __future__ import annotations

import csv
import json
import os
import shutil
import sys
import tempfile
import time
import warnings
from concurrent.futures import ProcessPoolExecutor, as_completed

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import numpy as np
from scipy.special import gammainc

from driftband.cli import main as driftband_main
from driftband.spectra._types import Block, ClassSpectrum, PopulationSpectra, SpectraSet
from driftband.spectra.io import add_diversity, write_spectra_json

N, LENGTH, BLOCKS, MU, R_BP, SHAPE, MEAN_S, N_COPIES = 500, 1_000_000, 40, 1e-6, 5e-6, 0.3, 0.1, 20
POPS = {
    "A1": {"N": N},
    "A2": {"N": N},
    "H": {"N": N // 2},
    "D": {"N": N, "change_ago": N // 10, "new_size": N // 2},
}
PAIRS = (("A1", "A2", "same"), ("A1", "H", "half_eq"), ("A1", "D", "recent_halving"))
TESTS = ("shared_dfe_lrt", "neutral_share_difference", "ne_only_free_lrt", "ne_only_lrt")
LOG = os.path.join(os.path.dirname(os.path.abspath(__file__)), "_data", "linked_calibration.jsonl")


def neutral_share(ne: float) -> float:
    """True share of new 0fold mutations with |Ne*s| < 1 under s ~ Gamma(SHAPE, MEAN_S)."""
    return float(gammainc(SHAPE, (1.0 / ne) * SHAPE / MEAN_S))


def _spectra_set(sims: dict[str, dict]) -> SpectraSet:
    edges = np.round(np.linspace(0, LENGTH, BLOCKS + 1)).astype(int)
    blocks = [Block("1", int(a), int(b), f"b{i}") for i, (a, b) in enumerate(zip(edges, edges[1:]))]
    pops = {}
    for name, sim in sims.items():
        classes = {
            c: ClassSpectrum(sim["block_sfs"][c], sim["block_sites"]) for c in ("0fold", "4fold")
        }
        pop = PopulationSpectra(name, N_COPIES, False, classes, "aa")
        add_diversity(pop)
        pops[name] = pop
    prov = {"simulator": "fwdpy11 forward simulation, benchmarks/_linked_sim.py"}
    return SpectraSet(pops, blocks, {}, prov)


def one_study(args: tuple[int, int]) -> dict:
    """Simulate the four populations of replicate ``rep``, fit, compare; return its record."""
    from _linked_sim import LinkedModel, simulate_linked

    rep, B = args
    warnings.simplefilter("ignore")
    t0 = time.perf_counter()
    sims, rec = {}, {"replicate": rep, "B": B, "pops": {}, "tests": {}}
    for k, (name, kw) in enumerate(POPS.items()):
        m = LinkedModel(
            length=LENGTH,
            blocks=BLOCKS,
            mu=MU,
            r=R_BP,
            shape=SHAPE,
            mean_s=MEAN_S,
            n=N_COPIES,
            **kw,
        )
        sims[name] = simulate_linked(m, seed=100_003 * rep + 17 * k + 1)
    t_sim = time.perf_counter() - t0
    with tempfile.TemporaryDirectory() as tmp:
        spath, fpath, cpath = (os.path.join(tmp, f) for f in ("spectra.json", "fit.json", "c.tsv"))
        write_spectra_json(_spectra_set(sims), spath)
        # kept, so that a later version can refit the same studies without simulating
        keep = os.path.join(os.path.dirname(LOG), "linked_spectra")
        os.makedirs(keep, exist_ok=True)
        shutil.copyfile(spath, os.path.join(keep, f"study_{rep:04d}.spectra.json"))
        t1 = time.perf_counter()
        fit_args = [spath, "--misorientation", "fixed:0", "--bootstrap", str(B)]
        rc = driftband_main(["fit", *fit_args, "--workers", "1", "-q", "-o", fpath])
        if rc != 0:
            return {**rec, "error": f"fit exit {rc}"}
        t_fit = time.perf_counter() - t1
        pairs = ",".join(f"{a}:{b}" for a, b, _ in PAIRS)
        rc = driftband_main(["compare", fpath, "--pairs", pairs, "-q", "-o", cpath])
        if rc != 0:
            return {**rec, "error": f"compare exit {rc}"}
        t_cmp = time.perf_counter() - t1 - t_fit
        with open(fpath) as fh:
            fit = json.load(fh)
        with open(cpath, newline="") as fh:
            rows = list(csv.DictReader(fh, delimiter="\t"))
    for name, sim in sims.items():
        head = fit["populations"][name]["headline"]
        lo, hi = head["shares_ci"][0]
        ne_pi = sim["pi_neutral_branch"] / (4 * MU)
        present = POPS[name].get("new_size", POPS[name]["N"])
        t_census, t_pi = neutral_share(present), neutral_share(ne_pi)
        rec["pops"][name] = {
            "share": head["shares"][0],
            "lo": lo,
            "hi": hi,
            "truth_census": t_census,
            "truth_pi": t_pi,
            "cover_census": float(lo <= t_census <= hi),
            "cover_pi": float(lo <= t_pi <= hi),
            "ne_pi": ne_pi,
            "pi_site": sim["pi_neutral"],
            "sim_seconds": sim["seconds"],
        }
    for row in rows:
        sc = next(s for a, b, s in PAIRS if {a, b} == {row["population_a"], row["population_b"]})

        def num(x: str) -> float | None:
            return float(x) if x not in ("", "nan", None) else None

        rec["tests"][f"{sc}:{row['test']}"] = {
            "p_raw": num(row["p_raw"]),
            "p_value": num(row["p_value"]),
            "linkage_factor": num(row["linkage_factor"]),
            "estimate": num(row["estimate"]),
        }
    rec["seconds"] = {
        "sim": t_sim,
        "fit": t_fit,
        "compare": t_cmp,
        "total": time.perf_counter() - t0,
    }
    return rec


def _run(R: int, B: int, workers: int, start: int) -> None:
    os.makedirs(os.path.dirname(LOG), exist_ok=True)
    with open(LOG, "a") as log, ProcessPoolExecutor(max_workers=workers) as pool:
        futs = [pool.submit(one_study, (r, B)) for r in range(start, start + R)]
        for f in as_completed(futs):
            log.write(json.dumps(f.result()) + "\n")
            log.flush()


def _rate(events: list[float]) -> str:
    """``rate (SE) [k/n]`` with the binomial standard error sqrt(p(1-p)/n)."""
    v = np.asarray(events, dtype=float)
    if v.size == 0:
        return f"{'n/a':>22}"
    p = float(v.mean())
    return f"{p:6.3f} ({np.sqrt(p * (1 - p) / v.size):.3f}) [{int(v.sum())}/{v.size}]"


def summary() -> None:
    """Print the calibration table from the log."""
    with open(LOG) as fh:
        recs = [json.loads(x) for x in fh if x.strip()]
    bad = [r for r in recs if "error" in r]
    recs = [r for r in recs if "error" not in r]
    Bs = sorted({r["B"] for r in recs})
    print(
        f"linked-site calibration: R = {len(recs)} replicate studies ({len(bad)} failed), "
        f"B = {Bs} block-bootstrap replicates; N = {N}, L = {LENGTH} bp in {BLOCKS} blocks, "
        f"mu = {MU} per bp per class, r = {R_BP} per bp, s ~ -Gamma({SHAPE}, mean {MEAN_S}), "
        f"n = {N_COPIES}"
    )
    if not recs:
        return
    sec = np.array([[r["seconds"][k] for k in ("sim", "fit", "compare", "total")] for r in recs])
    print(
        "wall time per study (s, mean; one process, --workers 1): simulate {:.0f}, fit {:.0f}, "
        "compare {:.0f}, total {:.0f}".format(*sec.mean(axis=0))
    )
    print("\n(1) coverage of the 95 % interval of the model-averaged neutral-band share")
    print(f"    {'population':<30} {'vs census N':>26} {'vs Ne_pi':>26}")
    for group, names in ((f"A1, A2 (N = {N})", ("A1", "A2")), (f"H (N = {N // 2})", ("H",))):
        cc = [r["pops"][p]["cover_census"] for r in recs for p in names]
        cp = [r["pops"][p]["cover_pi"] for r in recs for p in names]
        print(f"    {group:<30} {_rate(cc):>26} {_rate(cp):>26}")
    print("    target 0.93-0.97")
    for p in POPS:
        v = [r["pops"][p] for r in recs]
        est = np.array([x["share"] for x in v])
        print(
            f"    {p}: Ne_pi {np.mean([x['ne_pi'] for x in v]):6.0f}, "
            f"truth {v[0]['truth_census']:.3f}"
            f" (census) {np.mean([x['truth_pi'] for x in v]):.3f} (Ne_pi), mean estimate "
            f"{est.mean():.3f}, sd {est.std(ddof=1) if est.size > 1 else float('nan'):.3f}, "
            f"mean interval width {np.mean([x['hi'] - x['lo'] for x in v]):.3f}"
        )
    print(f"\n(2, 3) rejection rate at 5 %{'':<34} {'p_raw':>22} {'p_value (adjusted)':>22}")
    labels = {
        "same": "A1:A2 same DFE, same N (size)",
        "half_eq": "A1:H N/2 equilibrium",
        "recent_halving": "A1:D halved 0.1N ago",
    }
    for _a, _b, sc in PAIRS:
        tests = TESTS if sc == "same" else ("ne_only_free_lrt", "ne_only_lrt")
        for t in tests:
            cells = []
            for k in ("p_raw", "p_value"):
                ps = [r["tests"].get(f"{sc}:{t}", {}).get(k) for r in recs]
                cells.append(_rate([p < 0.05 for p in ps if p is not None]))
            lf = [r["tests"].get(f"{sc}:{t}", {}).get("linkage_factor") for r in recs]
            lf = [x for x in lf if x is not None]
            lfs = f"  linkage factor {np.mean(lf):.2f}" if lf else ""
            est = [r["tests"].get(f"{sc}:{t}", {}).get("estimate") for r in recs]
            est = [x for x in est if x is not None]
            lfs += f", estimate {np.mean(est):.3f}" if est else ""
            print(f"    {labels[sc]:<32} {t:<26} {cells[0]:>22} {cells[1]:>22}{lfs}")
    print(
        "    target for the sizes: <= 0.06; binomial SE in parentheses; estimate: mean of the "
        "compare.tsv estimate (share difference, shared-DFE share, or Ne_B/Ne_A)"
    )


def main() -> None:
    """Command line: run studies (appending to the log) or print ``--summary``."""
    if sys.argv[1:2] == ["--summary"]:
        summary()
        return
    R = int(sys.argv[1]) if len(sys.argv) > 1 else 10
    B = int(sys.argv[2]) if len(sys.argv) > 2 else 100
    workers = int(sys.argv[3]) if len(sys.argv) > 3 else 2
    start = int(sys.argv[4]) if len(sys.argv) > 4 else 0
    _run(R, B, workers, start)
    summary()


if __name__ == "__main__":
    main()
