"""The composite-likelihood (linked-sites) adjustment of the likelihood-ratio tests.

Reference: Varin, Reid & Firth (2011), Statistica Sinica 21:5–42, sec. 4.2 — the
likelihood-ratio statistic of a composite likelihood tends to Σ λ_j χ²₁, λ_j the
eigenvalues of (H^ψψ)⁻¹ G^ψψ; with independent observations all λ_j = 1 (Wilks). The
second-order correction W/c on ν df with c = Σλ²/Σλ, ν = (Σλ)²/Σλ² is that of
Satterthwaite (1946) / Rao & Scott (1981).
"""

import csv
import json

import numpy as np
import pytest

from driftband.cli import main
from driftband.compare import compare_fits, write_compare_tsv
from driftband.compare.linkage import (
    interior_coordinates,
    linkage_adjustment,
    naive_covariance,
    replicate_vectors,
)
from driftband.fit.io import read_fit_files
from driftband.fit.likelihood import Objective, SpectrumPair
from driftband.fit.models import DfeModel
from driftband.fit.results import ModelBootstrap
from driftband.prf.families import GammaDfe


def test_eigenvalues_against_a_hand_worked_case():
    # Naive covariance I, true covariance diag(2, 3): λ = 2 and 3 (the eigenvalues of
    # I⁻¹·G), c = (4 + 9)/5 = 2.6 and ν = 25/13 (Satterthwaite's formulas, by hand).
    rng = np.random.default_rng(7)
    draws = rng.standard_normal((200_000, 2)) * np.sqrt([2.0, 3.0])
    adj = linkage_adjustment(np.eye(2), draws, [0, 1])
    assert sorted(adj.eigenvalues) == pytest.approx([2.0, 3.0], rel=0.02)
    assert adj.factor == pytest.approx(2.6, rel=0.02)
    assert adj.df == pytest.approx(25 / 13, rel=0.02)
    # A null that leaves the first direction free projects it out: one eigenvalue, 3.
    free = linkage_adjustment(np.eye(2), draws, [0, 1], free=np.array([1.0, 0.0]))
    assert free.eigenvalues == pytest.approx([3.0], rel=0.02)
    assert free.df == pytest.approx(1.0)
    # Correlated naive metric: λ are the generalised eigenvalues of (G, H), from scipy.
    from scipy.linalg import eigh

    H = np.array([[1.0, 0.6], [0.6, 2.0]])
    G = np.array([[3.0, 0.5], [0.5, 2.5]])
    d = rng.multivariate_normal([0, 0], G, size=200_000)
    lam = linkage_adjustment(H, d, [0, 1]).eigenvalues
    assert sorted(lam) == pytest.approx(sorted(eigh(G, H, eigvals_only=True)), rel=0.02)


def test_too_few_replicates_or_coordinates_give_no_adjustment():
    d = np.random.default_rng(1).standard_normal((15, 2))
    assert linkage_adjustment(np.eye(2), d, [0, 1]) is None  # fewer than 20 replicates
    d = np.random.default_rng(1).standard_normal((100, 2))
    assert linkage_adjustment(np.eye(2), d, []) is None
    assert linkage_adjustment(np.eye(2), d, [0], free=np.array([1.0, 0.0])) is None


def test_bounds_are_left_out():
    m = DfeModel("gamma")
    # shape at its upper bound 100 in one of the fits: only the mean's coordinate is used
    assert interior_coordinates(m, np.log([0.3, 200.0]), np.log([100.0, 50.0])) == [1]
    d = DfeModel("discrete")
    x = d.from_natural(
        {"mass_0": 0.05, "mass_1": 0.15, "mass_2": 0.0, "mass_3": 0.3, "mass_4": 0.5}
    )
    assert interior_coordinates(d, x) == [0, 2, 3]  # mass_2 = 0: its log ratio is dropped
    b = DfeModel("gamma", beneficial=True)
    x = b.from_natural(
        {"shape": 0.3, "mean_abs_S": 200.0, "beneficial_fraction": 1e-6, "beneficial_S": 10.0}
    )
    assert interior_coordinates(b, x) == [0, 1, 3]


def test_naive_covariance_is_the_inverse_fisher_information():
    # An internal consistency check (no outside reference): on noise-free spectra the
    # covariance is positive definite and does not depend on the finite-difference step.
    from driftband.prf.dfe import DfeExpectation

    n = 12
    ex = DfeExpectation(n)
    dfe = GammaDfe(0.3, 200.0)
    lam_s = 1e6 * 0.01 * np.asarray(ex.mean_g(dfe))
    lam_n = 1e6 * 0.01 / np.arange(1, n)
    data = SpectrumPair(n, False, lam_n, lam_s, 1e6, 1e6)
    m = DfeModel("gamma")
    obj = Objective(data, m, eps=0.0, expectation=ex)
    x = np.log([0.3, 200.0])
    got = naive_covariance(obj, x)
    assert got is not None
    c1, moves = got
    assert moves is None and np.all(np.linalg.eigvalsh(c1) > 0)
    from driftband.fit.optimize import central_hessian

    c2 = np.linalg.inv(central_hessian(obj, x, h=1e-3))
    assert c1 == pytest.approx(c2, rel=1e-3)


def test_replicate_vectors_invert_the_natural_parameters():
    m = DfeModel("lognormal")
    params = {"mean_log_abs_S": np.array([3.0, np.nan]), "sd_log_abs_S": np.array([1.5, np.nan])}
    mb = ModelBootstrap(1, 1, params, np.array([[0.2, 0.8], [np.nan, np.nan]]), {}, [])
    v = replicate_vectors(mb, m)
    assert v[0] == pytest.approx([3.0, np.log(1.5)])
    assert np.isnan(v[1]).all()


def _tsv(path):
    with open(path, newline="") as fh:
        return {r["test"]: r for r in csv.DictReader(fh, delimiter="\t")}


@pytest.fixture(scope="module")
def doubled(tmp_path_factory):
    """A simulated pair, and the same spectra with every block's counts doubled."""
    d = tmp_path_factory.mktemp("linkage")
    one = d / "one.json"
    rc = main(
        [
            "simulate",
            "--population",
            "big:N=200,n=12",
            "--population",
            "small:N=75,n=12",
            "--class-sites",
            "60000",
            "--theta",
            "0.02",
            "--true-dfe",
            "gamma:shape=0.3,mean=200",
            "--block-count",
            "30",
            "--seed",
            "5",
            "-o",
            str(one),
            "-q",
        ]
    )
    assert rc == 0
    doc = json.loads(one.read_text())
    for pop in doc["populations"].values():
        for c in pop["classes"].values():
            c["sfs"] = [2 * v for v in c["sfs"]]
            c["sites"] *= 2
            c["block_sfs"] = [[2 * v for v in row] for row in c["block_sfs"]]
            c["block_sites"] = [2 * v for v in c["block_sites"]]
    two = d / "two.json"
    two.write_text(json.dumps(doc))
    out = {}
    for name, path in (("one", one), ("two", two)):
        fit = d / f"{name}.fit.json"
        # one label: the same dataset, so the same block draws for both
        args = ["fit", str(path), "--label", f"{path}=pair", "--dfe", "gamma"]
        args += ["--misorientation", "fixed:0"]
        args += ["--bootstrap", "40", "--seed", "3", "--workers", "1", "-o", str(fit), "-q"]
        assert main(args) == 0
        # the comparison through the API (for the eigenvalues before the floor), its
        # table written as 'driftband compare' writes it
        options, fits = read_fit_files([str(fit)])
        rows = compare_fits(fits, options, "gamma")
        cmp = d / f"{name}.tsv"
        write_compare_tsv(rows, cmp)
        out[name] = _tsv(cmp)
        out[name + "_rows"] = {r.test: r for r in rows}
    return out


def _raw(row):
    """c, ν and W/c from the unfloored eigenvalues of a comparison row."""
    lam = np.asarray(row.extra["linkage_eigenvalues_raw"])
    c = float(np.sum(lam**2) / np.sum(lam))
    return c, float(np.sum(lam) ** 2 / np.sum(lam**2)), row.statistic / c


def test_every_site_counted_twice_is_undone_by_the_adjustment(doubled):
    # Counting every site twice (pairs of perfectly linked sites) leaves the estimates
    # and their block-bootstrap spread unchanged but doubles the Poisson log-likelihood:
    # the raw statistic doubles, the naive information doubles, so λ doubles, and the
    # adjusted statistic and its df are those of the data counted once (the Godambe
    # information is invariant to such duplication; Varin, Reid & Firth 2011, sec. 2.3).
    # The invariance holds for the estimated (unfloored) eigenvalues: the floor at 1 may
    # raise those of the data counted once (about 1, up to sampling error), not those of
    # the doubled data (about 2).
    one, two = doubled["one"], doubled["two"]
    for test in ("shared_dfe_lrt", "ne_only_free_lrt", "ne_only_lrt"):
        a, b = one[test], two[test]
        assert float(b["statistic"]) == pytest.approx(2 * float(a["statistic"]), rel=0.02, abs=0.02)
        ca, dfa, wa = _raw(doubled["one_rows"][test])
        cb, dfb, wb = _raw(doubled["two_rows"][test])
        assert cb == pytest.approx(2 * ca, rel=0.02)
        assert wb == pytest.approx(wa, rel=0.03, abs=0.02)
        assert dfb == pytest.approx(dfa, rel=0.02)
        # the doubled data's eigenvalues (about 2) are not floored: its reported figures
        # are the raw ones
        assert min(doubled["two_rows"][test].extra["linkage_eigenvalues_raw"]) > 1.0
        assert float(b["linkage_factor"]) == pytest.approx(cb, rel=1e-4)
        assert float(b["statistic_linkage"]) == pytest.approx(wb, rel=1e-4)
        # the raw p of the doubled data is smaller: it reads twice the evidence
        assert float(b["p_raw"]) <= float(a["p_raw"]) + 1e-12
        assert "p adjusted for linked sites" in b["note"]


def test_floored_factor_never_makes_the_p_value_smaller(doubled):
    # Linked sites cannot carry more information than as many independent sites (Varin,
    # Reid & Firth 2011, sec. 2.3): every reported λ ≥ 1, so c ≥ 1, and the adjusted p is
    # at least the raw one (Σ λ_j χ²₁ with λ_j ≥ 1 is stochastically larger than χ²(q)).
    n_floored = 0
    for name in ("one", "two"):
        for test, r in doubled[name + "_rows"].items():
            if test == "neutral_share_difference":
                continue
            lam = np.asarray(r.extra["linkage_eigenvalues"])
            raw = np.asarray(r.extra["linkage_eigenvalues_raw"])
            assert np.all(lam >= 1.0) and lam == pytest.approx(np.maximum(raw, 1.0))
            assert r.extra["linkage_factor"] >= 1.0
            assert r.p_value >= r.extra["p_raw"]
            n_floored += bool(np.any(raw < 1.0))
    assert n_floored >= 1  # the unlinked data have some estimated λ below 1


def test_floor_is_applied_eigenvalue_by_eigenvalue():
    # Naive covariance I, true covariance diag(0.5, 3): estimated λ = 0.5 and 3 (as in the
    # hand-worked case above); floored, λ = 1 and 3, c = (1 + 9)/4 = 2.5 and ν = 16/10
    # (Satterthwaite's formulas, by hand).
    rng = np.random.default_rng(11)
    draws = rng.standard_normal((200_000, 2)) * np.sqrt([0.5, 3.0])
    adj = linkage_adjustment(np.eye(2), draws, [0, 1])
    assert sorted(adj.raw_eigenvalues) == pytest.approx([0.5, 3.0], rel=0.02)
    assert sorted(adj.eigenvalues) == pytest.approx([1.0, 3.0], rel=0.02)
    assert adj.factor == pytest.approx(2.5, rel=0.02)
    assert adj.df == pytest.approx(1.6, rel=0.02)
    assert adj.floored
    raw = linkage_adjustment(np.eye(2), draws, [0, 1], floor=False)
    assert raw.factor == pytest.approx(9.25 / 3.5, rel=0.02)  # (0.25 + 9)/(0.5 + 3)
    assert not raw.floored


def test_unlinked_sites_give_factors_near_one(doubled):
    # The simulator's sites are unlinked: every eigenvalue is about 1 (Wilks), up to the
    # sampling error of a covariance from 40 replicates (about sqrt(2/40) = 0.22 each).
    for test, row in doubled["one_rows"].items():
        if test != "neutral_share_difference":
            assert 0.5 < _raw(row)[0] < 1.8, test
            assert 1.0 <= row.extra["linkage_factor"] < 1.8, test


def _neutral_pair(sfs: np.ndarray, n: int) -> SpectrumPair:
    # a selected class equal to the neutral one: only the neutral class matters here
    return SpectrumPair(n, False, sfs[1:n], sfs[1:n], 1e6, 1e6)


def _msprime_sfs(n: int, sizes: list[tuple[float, float]]) -> np.ndarray:
    """Expected neutral SFS (branch lengths, many replicates) under a size history."""
    msprime = pytest.importorskip("msprime")
    dem = msprime.Demography()
    dem.add_population(name="p", initial_size=sizes[0][1])
    for t, size in sizes[1:]:
        dem.add_population_parameters_change(time=t, initial_size=size)
    acc = np.zeros(n + 1)
    reps = msprime.sim_ancestry(
        samples=n // 2, demography=dem, num_replicates=400, random_seed=4, ploidy=2
    )
    for ts in reps:
        acc += ts.allele_frequency_spectrum(mode="branch", polarised=True, span_normalise=False)
    return acc / acc[1:n].sum() * 20_000  # 20,000 segregating sites


def test_equilibrium_departure_flags_a_recent_decline():
    # msprime coalescent spectra: constant size vs a four-fold decline 0.5 Ne generations
    # ago (Tajima's D of about +0.6 by the same simulation with more replicates), vs a
    # four-fold expansion (D about -0.8). Tajima (1989): D is about 0 at equilibrium.
    from driftband.compare.pair import equilibrium_departure
    from driftband.fit.results import PopulationFit

    n = 16
    eq = _msprime_sfs(n, [(0, 400.0)])
    decline = _msprime_sfs(n, [(0, 100.0), (200, 400.0)])
    growth = _msprime_sfs(n, [(0, 400.0), (200, 100.0)])
    flags = {
        name: equilibrium_departure(PopulationFit(name, _neutral_pair(s, n), {}), "gamma")
        for name, s in (("eq", eq), ("decline", decline), ("growth", growth))
    }
    assert flags["eq"] == ""
    assert "Tajima's D of the neutral class is +" in flags["decline"]
    assert "Tajima's D of the neutral class is -" in flags["growth"]


def test_replicate_pi_matches_the_spectrum_pair():
    # The per-replicate π of the bootstrap equals Tajima's π of the replicate's summed
    # spectrum (the same sum as spectra.stats.pi_theta_counts; Tajima 1983).
    from driftband.fit.bootstrap import _replicate_pi  # a private helper

    rng = np.random.default_rng(2)
    n, nb = 10, 6
    bn = rng.integers(0, 50, size=(nb, n + 1)).astype(float)
    ln = bn.sum(axis=1) + 1000
    idx = rng.integers(0, nb, size=(4, nb))
    got = _replicate_pi(_neutral_pair(bn.sum(axis=0), n), bn, ln, idx)
    for r in range(4):
        c = np.bincount(idx[r], minlength=nb)
        pair = SpectrumPair.from_arrays(n, False, c @ bn, c @ bn, float(c @ ln), float(c @ ln))
        assert got[r] == pytest.approx(pair.neutral_pi, rel=1e-12)


@pytest.mark.parametrize(
    "model, values",
    [
        (DfeModel("gamma"), {"shape": 0.3, "mean_abs_S": 250.0}),
        (DfeModel("lognormal"), {"mean_log_abs_S": 2.5, "sd_log_abs_S": 1.7}),
        (
            DfeModel("discrete"),
            {"mass_0": 0.05, "mass_1": 0.2, "mass_2": 0.15, "mass_3": 0.1, "mass_4": 0.5},
        ),
        (
            DfeModel("gamma", beneficial=True),
            {"shape": 0.4, "mean_abs_S": 90.0, "beneficial_fraction": 0.02, "beneficial_S": 30.0},
        ),
    ],
)
def test_from_natural_inverts_natural(model, values):
    x = model.from_natural(values)
    assert model.natural(x) == pytest.approx(values, rel=1e-10)
