"""Write the report test fixture: fit.json, compare.tsv and spectra.json of an invented study.

Invented scenario (not real data): a freshwater snail with a large lake population
(``lake``, 8 diploids = 16 gene copies, unfolded spectra polarised by an outgroup, so with
divergence counts) and a small isolated spring population (``spring``, 6 diploids, folded
spectra, no divergence). Three DFE families were "fitted" to each; the numbers are
self-consistent (band shares of the gamma models are the gamma CDF at the band edges,
Pearson residuals are (o − e)/√e, AIC, ΔAIC and Akaike weights follow from the
log-likelihoods) but were not produced by the fitting code: the report renders numbers and
is tested on this fixed input, independently of the fitting code.

The files follow the layouts documented in ``driftband/fit/io.py`` (fit file),
``driftband/cli/compare.py`` (``COLUMNS`` of compare.tsv) and ``driftband/spectra/io.py``
(spectra file). Regenerate with::

    python tests/data/report/make_fixture.py
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np
from scipy import stats

from driftband.fit.io import FIT_SCHEMA_VERSION
from driftband.spectra.io import SCHEMA_VERSION as SPECTRA_SCHEMA_VERSION

HERE = Path(__file__).resolve().parent
EDGES = [0.0, 1.0, 10.0, 100.0]
LEVEL = 0.95
SEED = 7
REPS = 40
BLOCKS = 38
DATE = "2025-03-14T09:26:53+00:00"


def gamma_shares(shape: float, mean: float) -> list[float]:
    """Shares of a gamma DFE on t = -S in the |Ne s| bands (|S| = 4 |Ne s|)."""
    cdf = [stats.gamma.cdf(4 * e, shape, scale=mean / shape) for e in EDGES[1:]]
    c = [0.0, *cdf, 1.0]
    return [float(b - a) for a, b in zip(c, c[1:])]


def lognormal_shares(mu: float, sd: float) -> list[float]:
    cdf = [stats.norm.cdf((math.log(4 * e) - mu) / sd) for e in EDGES[1:]]
    c = [0.0, *cdf, 1.0]
    return [float(b - a) for a, b in zip(c, c[1:])]


def spectra_pair(rng, n, folded, theta, ln, ls, sel_factor, nuis):
    """Expected and observed polymorphic entries of both classes."""
    m = n // 2 if folded else n - 1
    i = np.arange(1, m + 1)
    if folded:
        base = 1.0 / i + np.where(i != n - i, 1.0 / (n - i), 0.0)
    else:
        base = 1.0 / i
    en = theta * ln * nuis[:m] * base
    es = theta * ls * nuis[:m] * base * sel_factor(i / n)
    on = rng.poisson(en).astype(float)
    os_ = rng.poisson(es).astype(float)
    return en, es, on, os_


def residuals(o, e):
    return ((o - e) / np.sqrt(e)).tolist()


def model_entry(
    pop,
    name,
    params,
    stderr,
    shares,
    ll,
    k,
    eps,
    eps_free,
    theta,
    en,
    es,
    on,
    os_,
    fix_ratio,
    success=True,
    message=None,
):
    return {
        "population": pop,
        "model": name,
        "params": params,
        "stderr": stderr,
        "misorientation_rate": eps,
        "misorientation_free": eps_free,
        "theta": theta,
        "nuisance_factors": [1.0] * len(en),
        "equilibrium": False,
        "loglik": ll,
        "n_params": k,
        "aic": 2 * k - 2 * ll,
        "success": success,
        "message": message
        or "5 of 9 starts reached the best log-likelihood; optimiser: "
        "CONVERGENCE: RELATIVE REDUCTION OF F <= FACTR*EPSMCH",
        "band_edges": EDGES,
        "shares": shares,
        "fixation_ratio": fix_ratio,
        "observed": {"neutral": on.tolist(), "selected": os_.tolist()},
        "expected": {"neutral": en.tolist(), "selected": es.tolist()},
        "pearson_residuals": {"neutral": residuals(on, en), "selected": residuals(os_, es)},
        "unconstrained_params": [0.0] * 3,
        "optimizer": {"starts": 9, "evaluations": 2113},
    }


def aic_table(models):
    rows = sorted(models.values(), key=lambda f: f["aic"])
    a0 = rows[0]["aic"]
    w = np.exp(-0.5 * (np.array([f["aic"] for f in rows]) - a0))
    w /= w.sum()
    return [
        {
            "model": f["model"],
            "loglik": f["loglik"],
            "n_params": f["n_params"],
            "aic": f["aic"],
            "delta_aic": f["aic"] - a0,
            "weight": float(wk),
            "converged": f["success"],
        }
        for f, wk in zip(rows, w)
    ]


def boot(rng, params, shares, extra=None):
    """Bootstrap block: replicate values around the estimates and percentile intervals."""
    out_params = {}
    for k, v in {**params, **(extra or {})}.items():
        sd = abs(v) * 0.15 + 1e-4
        out_params[k] = (v + sd * rng.standard_normal(REPS)).tolist()
    sh = np.clip(np.array(shares) + 0.03 * rng.standard_normal((REPS, len(shares))), 0, 1)
    sh /= sh.sum(axis=1, keepdims=True)
    a = (1 - LEVEL) / 2
    ci = {
        k: [float(np.quantile(v, a)), float(np.quantile(v, 1 - a))] for k, v in out_params.items()
    }
    sci = [
        [float(np.quantile(sh[:, j], a)), float(np.quantile(sh[:, j], 1 - a))]
        for j in range(sh.shape[1])
    ]
    return {
        "replicates": REPS,
        "failed": 0,
        "params": out_params,
        "shares": sh.tolist(),
        "params_ci": ci,
        "shares_ci": sci,
    }


def population(rng, pop, n, folded, theta, ln, ls, g, lg, disc, fixed=None, disc_ok=True):
    nuis = 1.0 + 0.25 * np.sin(np.arange(1, n + 1) / 2.0)
    en, es, on, os_ = spectra_pair(
        rng, n, folded, theta, ln, ls, lambda x: 0.18 + 0.22 * np.exp(-6 * x), nuis
    )
    m = en.size
    eps_free = not folded
    eps = 0.021 if eps_free else 0.0
    ke = 1 if eps_free else 0
    models = {
        "gamma": model_entry(
            pop,
            "gamma",
            {"shape": g[0], "mean_abs_S": g[1]},
            {
                "shape": g[0] * 0.11,
                "mean_abs_S": g[1] * 0.4,
                **({"misorientation_rate": 0.004} if eps_free else {}),
            },
            gamma_shares(g[0], g[1]),
            g[2],
            2 + m + ke,
            eps,
            eps_free,
            theta,
            en,
            es,
            on,
            os_,
            g[3],
        ),
        "lognormal": model_entry(
            pop,
            "lognormal",
            {"mean_log_abs_S": lg[0], "sd_log_abs_S": lg[1]},
            {
                "mean_log_abs_S": 0.6,
                "sd_log_abs_S": None,
                **({"misorientation_rate": 0.005} if eps_free else {}),
            },
            lognormal_shares(lg[0], lg[1]),
            lg[2],
            2 + m + ke,
            eps,
            eps_free,
            theta,
            en,
            es,
            on,
            os_,
            lg[3],
        ),
        "discrete": model_entry(
            pop,
            "discrete",
            # the family's own bands: the report bands with the first split at |Ne·s| =
            # 0.25 (fit schema 4), so the first band's mass is held by two masses
            {
                f"mass_{k}": v
                for k, v in enumerate((0.3 * disc[0][0], 0.7 * disc[0][0]) + disc[0][1:])
            },
            {f"mass_{k}": 0.05 for k in range(5)},
            list(disc[0]),
            disc[1] + 1.0,  # one more mass than before schema 4, at the same AIC
            4 + m + ke,
            eps,
            eps_free,
            theta,
            en,
            es,
            on,
            os_,
            disc[2],
            success=disc_ok,
            message=None
            if disc_ok
            else "1 of 5 starts reached the best log-likelihood; optimiser: "
            "ABNORMAL_TERMINATION_IN_LNSRCH",
        ),
    }
    table = aic_table(models)
    ok = [r for r in table if r["converged"]]
    best = ok[0]["model"]
    b = {"replicates": REPS, "blocks": BLOCKS, "seed": SEED, "level": LEVEL, "models": {}}
    for name, f in models.items():
        extra = {"misorientation_rate": eps, "fixation_ratio": f["fixation_ratio"]}
        if fixed is not None:
            dn, ds = fixed[1], fixed[0]
            d_n, d_s = dn / ls, ds / ln
            extra["alpha_dfe"] = 1 - f["fixation_ratio"] * d_s / d_n
            extra["omega_a"] = d_n / d_s - f["fixation_ratio"]
            extra["alpha_classic"] = 0.162
            extra["alpha_asymptotic"] = 0.21
        params = f["params"]
        if name == "discrete":  # replicates drawn for the band masses, then the first split
            m = list(params.values())
            params = {f"mass_{k}": v for k, v in enumerate([m[0] + m[1], *m[2:]])}
        b["models"][name] = boot(rng, params, f["shares"], extra)
        if name == "discrete":
            bp = b["models"][name]["params"]
            first = np.array(bp.pop("mass_0"))
            bp = (
                {"mass_0": (0.3 * first).tolist(), "mass_1": (0.7 * first).tolist()}
                | {f"mass_{int(k[5:]) + 1}": v for k, v in bp.items() if k.startswith("mass_")}
                | {k: v for k, v in bp.items() if not k.startswith("mass_")}
            )
            b["models"][name]["params"] = bp
            ci = b["models"][name]["params_ci"]
            lo, hi = ci.pop("mass_0")
            b["models"][name]["params_ci"] = (
                {
                    "mass_0": [0.3 * lo, 0.3 * hi],
                    "mass_1": [0.7 * lo, 0.7 * hi],
                }
                | {f"mass_{int(k[5:]) + 1}": v for k, v in ci.items() if k.startswith("mass_")}
                | {k: v for k, v in ci.items() if not k.startswith("mass_")}
            )
    if not disc_ok:
        b["models"]["discrete"]["failed"] = 6
    data = {
        "n": n,
        "folded": folded,
        "neutral": on.tolist(),
        "selected": os_.tolist(),
        "sites_neutral": ln,
        "sites_selected": ls,
        "fixed_neutral": None if fixed is None else fixed[0],
        "fixed_selected": None if fixed is None else fixed[1],
    }
    adaptive = {}
    for name, f in models.items():
        if fixed is None:
            adaptive[name] = None
            continue
        pn, ps = float(os_.sum()), float(on.sum())
        ds, dn = fixed
        odds, p = stats.fisher_exact(np.rint([[dn, ds], [pn, ps]]).astype(int))
        d_n, d_s = dn / ls, ds / ln
        adaptive[name] = {
            "mk": {
                "polymorphic_selected": pn,
                "polymorphic_neutral": ps,
                "divergent_selected": dn,
                "divergent_neutral": ds,
                "fisher_odds_ratio": float(odds),
                "fisher_p": float(p),
            },
            "alpha_classic": 1 - (ds * pn) / (dn * ps),
            "alpha_asymptotic": {
                "alpha": 0.21,
                "fit": "exponential",
                "a": 0.24,
                "b": -0.5,
                "c": 4.1,
            },
            "alpha_dfe": {
                "alpha": 1 - f["fixation_ratio"] * d_s / d_n,
                "omega_a": d_n / d_s - f["fixation_ratio"],
                "omega": d_n / d_s,
            },
        }
    entry = {
        "dataset": "spectra.json",
        "best_model": best,
        "data": data,
        "aic_table": table,
        "models": models,
        "bootstrap": b,
        "adaptive": adaptive,
    }
    return entry, on, os_


def full_sfs(poly, n, folded, sites, fixed):
    length = n // 2 + 1 if folded else n + 1
    s = np.zeros(length)
    s[1 : 1 + poly.size] = poly
    if not folded:
        s[n] = fixed
    s[0] = sites - s[1:].sum()
    return s


def diversity(sfs, n, folded, sites):
    """π, θ_W, Tajima's D per site (Tajima 1983, Watterson 1975, Tajima 1989)."""
    from driftband.spectra.stats import diversity as div

    return div(sfs, n, folded, sites)


def main() -> None:
    rng = np.random.default_rng(20250314)
    lake, lon, los = population(
        rng,
        "lake",
        16,
        False,
        0.0065,
        180000.0,
        520000.0,
        g=(0.31, 2150.0, -118.42, 0.211),
        lg=(5.1, 3.2, -119.87, 0.232),
        disc=((0.14, 0.09, 0.17, 0.60), -117.96, 0.219),
        fixed=(1452.0, 1310.0),
    )
    spring, son, sos = population(
        rng,
        "spring",
        12,
        True,
        0.0018,
        176000.0,
        512000.0,
        g=(0.29, 240.0, -61.07, 0.301),
        lg=(3.6, 2.9, -61.35, 0.322),
        disc=((0.31, 0.12, 0.19, 0.38), -60.71, 0.334),
        disc_ok=False,
    )
    fit = {
        "schema": "driftband-fit",
        "schema_version": FIT_SCHEMA_VERSION,
        "options": {
            "neutral": "4fold",
            "selected": "0fold",
            "models": ["gamma", "lognormal", "discrete"],
            "misorientation": "free",
            "equilibrium": False,
            "band_edges_nes": EDGES,
            "bootstrap": REPS,
            "seed": SEED,
            "level": LEVEL,
        },
        "populations": {"lake": lake, "spring": spring},
        "provenance": {
            "software": "driftband",
            "version": "0.1.0.dev0",
            "command": [
                "driftband",
                "fit",
                "spectra.json",
                "--bootstrap",
                str(REPS),
                "--seed",
                str(SEED),
                "-o",
                "fit.json",
            ],
            "date": DATE,
            "options": {"bootstrap": REPS, "seed": SEED, "level": LEVEL, "band_edges_nes": EDGES},
            "inputs": {
                "spectra": [
                    {
                        "path": "/study/snails/spectra.json",
                        "size": 48213,
                        "sha256": "3f1c" + "0" * 56 + "9a2b",
                    }
                ]
            },
            "environment": {
                "python": "3.11.2",
                "platform": "Linux-x86_64",
                "numpy": "1.26.4",
                "scipy": "1.11.4",
            },
        },
    }
    (HERE / "fit.json").write_text(json.dumps(fit, indent=1) + "\n", encoding="utf-8")

    # Spectra file of the same study (per-block spectra split the totals over 4 blocks).
    pops = {}
    for name, n, folded, on, os_, ln, ls, fixed, pol in (
        ("lake", 16, False, lon, los, 180000.0, 520000.0, (1452.0, 1310.0), "outgroup"),
        ("spring", 12, True, son, sos, 176000.0, 512000.0, (0.0, 0.0), "folded"),
    ):
        classes, st = {}, {}
        for cls, poly, sites, fx in (("4fold", on, ln, fixed[0]), ("0fold", os_, ls, fixed[1])):
            sfs = full_sfs(poly, n, folded, sites, fx)
            parts = rng.multinomial(1, [0.25] * 4, size=int(sfs.sum())).sum(axis=0)
            frac = parts / parts.sum()
            block = np.floor(np.outer(frac, sfs))
            block[-1] = sfs - block[:-1].sum(axis=0)
            bsites = block.sum(axis=1)
            classes[cls] = {
                "sfs": sfs.astype(int).tolist(),
                "sites": int(sites),
                "block_sfs": block.astype(int).tolist(),
                "block_sites": bsites.astype(int).tolist(),
            }
            st[cls] = diversity(sfs, n, folded, int(sites))
        st["piN_piS"] = st["0fold"]["pi"] / st["4fold"]["pi"]
        pops[name] = {
            "n": n,
            "folded": folded,
            "polarisation": pol,
            "classes": classes,
            "stats": st,
        }
    spectra = {
        "schema": "driftband-spectra",
        "schema_version": SPECTRA_SCHEMA_VERSION,
        "blocks": [
            {"chrom": "scf1", "start": k * 100000, "end": (k + 1) * 100000, "name": ""}
            for k in range(4)
        ],
        "populations": pops,
        "skipped": {"multiallelic": 12, "filtered": 40},
        "provenance": {
            "software": "driftband",
            "version": "0.1.0.dev0",
            "date": DATE,
            "command": ["driftband", "spectra"],
            "options": {
                "block_size": 100000,
                "blocks": None,
                "regions": ["scf1"],
                "min_gq": 20,
                "min_dp": 8,
                "pass_only": True,
                "project": None,
                "projection_rule": "largest n such that >= 90% of usable records have n or "
                "more called gene copies",
            },
            "inputs": {
                "vcf": {"path": "/study/snails/calls.vcf.gz", "size": 2200000, "sha256": "ab" * 32}
            },
            "counts": {
                "records_read": 52000,
                "records_used": {"lake": 51200, "spring": 51100},
                "called_copies_max": {"lake": 24, "spring": 24},
            },
            "environment": {"python": "3.11.2"},
        },
    }
    (HERE / "spectra.json").write_text(json.dumps(spectra, indent=1) + "\n", encoding="utf-8")

    # compare.tsv: one pair, four tests (columns of driftband.cli.compare.COLUMNS); the
    # Ne ratio is the ratio of neutral diversity, as compare computes it.
    rho = pops["spring"]["stats"]["4fold"]["pi"] / pops["lake"]["stats"]["4fold"]["pi"]
    sl, ss = lake["models"]["gamma"]["shares"][0], spring["models"]["gamma"]["shares"][0]
    diff = ss - sl
    cols = [
        "population_a",
        "population_b",
        "test",
        "model",
        "statistic",
        "df",
        "p_raw",
        "linkage_factor",
        "statistic_linkage",
        "df_linkage",
        "p_value",
        "p_adjusted",
        "adjust",
        "p_at_floor",
        "estimate",
        "ci_low",
        "ci_high",
        "ne_ratio",
        "ne_ratio_pi",
        "predicted_share_b",
        "observed_share_b",
        "out_of_equilibrium",
        "note",
    ]

    def lrt(stat: float, df: int, factor: float, df_adj: float) -> dict:
        """Raw and linkage-adjusted columns of a likelihood-ratio row (scipy's chi2)."""
        p_adj = float(stats.chi2.sf(stat / factor, df_adj))
        return {
            "statistic": stat,
            "df": df,
            "p_raw": float(stats.chi2.sf(stat, df)),
            "linkage_factor": factor,
            "statistic_linkage": stat / factor,
            "df_linkage": df_adj,
            "p_value": p_adj,
            "p_adjusted": p_adj,
            "adjust": "holm",
        }

    adj_note = "; p adjusted for linked sites: statistic / {:.3g} on {:.3g} df"
    rows = [
        {
            "population_a": "lake",
            "population_b": "spring",
            "test": "shared_dfe_lrt",
            "model": "gamma",
            **lrt(14.62, 2, 1.3, 1.9),
            "estimate": 0.231,
            "note": "estimate: neutral-band share under the shared DFE" + adj_note.format(1.3, 1.9),
        },
        {
            "population_a": "lake",
            "population_b": "spring",
            "test": "neutral_share_difference",
            "model": "gamma",
            "statistic": 4.1,
            "p_value": 0.0488,
            "p_adjusted": 0.0488,
            "adjust": "holm",
            "estimate": diff,
            "ci_low": diff - 0.061,
            "ci_high": diff + 0.058,
            "note": f"bootstrap: {REPS} replicates, level 0.95",
        },
        {
            "population_a": "lake",
            "population_b": "spring",
            "test": "ne_only_free_lrt",
            "model": "gamma",
            **lrt(1.42, 1, 1.2, 1.0),
            "estimate": rho * 1.08,
            "ne_ratio": rho * 1.08,
            "ne_ratio_pi": rho,
            "predicted_share_b": ss - 0.011,
            "observed_share_b": ss,
            "note": "estimate: Ne_B/Ne_A fitted (the DFE's shape shared, its scale free)"
            + adj_note.format(1.2, 1.0),
        },
        {
            "population_a": "lake",
            "population_b": "spring",
            "test": "ne_only_lrt",
            "model": "gamma",
            **lrt(3.05, 2, 1.25, 1.8),
            "estimate": rho,
            "ne_ratio": rho,
            "ne_ratio_pi": rho,
            "predicted_share_b": ss - 0.024,
            "observed_share_b": ss,
            "note": "estimate: Ne_B/Ne_A from neutral pi ratio, assuming equal mutation rates"
            + adj_note.format(1.25, 1.8),
        },
    ]
    with open(HERE / "compare.tsv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, delimiter="\t", lineterminator="\n")
        w.writerow(cols)
        for r in rows:
            w.writerow(
                [
                    "" if r.get(c) is None else (f"{r[c]:.6g}" if isinstance(r[c], float) else r[c])
                    for c in cols
                ]
            )


if __name__ == "__main__":
    main()
