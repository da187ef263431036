"""Tests of the forward Wright–Fisher simulator (``driftband simulate``).

The simulator is the truth the fit is validated against, so it is checked against outside
results: the one-locus selection recursion worked from genotype frequencies by hand,
Fu (1995)'s neutral spectrum, Kimura (1962)'s fixation probability, an exact Wright–Fisher
transition-matrix computation (scipy), Haldane (1927)'s 2s, coalescent expectations from
msprime under a size change, scipy/mpmath distribution functions for the DFE, and pysam
and bcftools for the VCF. Every statistical check uses a fixed seed and a tolerance of
several Monte Carlo standard errors.
"""

from __future__ import annotations

import gzip
import json
import math
import shutil
import subprocess
from collections import Counter

import numpy as np
import pytest
from scipy import stats

from driftband.cli import main
from driftband.exceptions import DriftbandWarning, OptionError
from driftband.simulate import (
    CODON_PATTERNS,
    CODON_POSITION_CLASSES,
    band_shares,
    build_populations,
    codon_pattern_counts,
    make_layout,
    parse_dfe,
    s_from_S,
    selection_step,
    simulate_fixation,
    simulate_study,
    simulate_trajectories,
    write_study,
)
from driftband.sites.bed import read_site_classes
from driftband.spectra.io import read_spectra_json, spectra_to_dict

# --------------------------------------------------------------------------------------
# Independent references used below
# --------------------------------------------------------------------------------------


def genotype_selection(p: float, s: float) -> float:
    """Allele frequency after selection, worked from genotype frequencies (by hand).

    Random mating gives genotypes AA, Aa, aa (A derived) at p², 2pq, q² with fitnesses
    1+2s, 1+s, 1; the new frequency is (AA + Aa/2) weighted by fitness over the mean
    fitness (the standard one-locus model, e.g. Hartl & Clark, Principles of Population
    Genetics, ch. on selection; from memory).
    """
    q = 1.0 - p
    w_aa, w_het, w_bb = 1 + 2 * s, 1 + s, 1.0
    wbar = p * p * w_aa + 2 * p * q * w_het + q * q * w_bb
    return (p * p * w_aa + p * q * w_het) / wbar


def exact_wf_fixation(N: int, s: float) -> float:
    """Fixation probability of one new copy in the exact diploid Wright–Fisher chain.

    Transition matrix P[i, j] = Binom(j; 2N, p'(i/2N)) with p' from
    :func:`genotype_selection` (scipy's binomial pmf); absorption probabilities solve
    (I − Q) u = P[:, 2N] over the transient states (standard absorbing Markov chain).
    """
    two_n = 2 * N
    i = np.arange(two_n + 1)
    pp = np.array([genotype_selection(x, s) for x in i / two_n])
    P = stats.binom.pmf(i[None, :], two_n, pp[:, None])
    Q = P[1:-1, 1:-1]
    r = P[1:-1, -1]
    u = np.linalg.solve(np.eye(two_n - 1) - Q, r)
    return float(u[0])


def kimura_u(N: int, s: float) -> float:
    """Kimura (1962): u = (1 − e^{−2s}) / (1 − e^{−4Ns}) for a new mutant (p = 1/2N)."""
    if s == 0:
        return 1.0 / (2 * N)
    return -math.expm1(-2 * s) / -math.expm1(-4 * N * s)


def z_ok(obs: np.ndarray, exp: np.ndarray, var: np.ndarray, zmax: float = 4.0) -> bool:
    return bool(np.all(np.abs(obs - exp) <= zmax * np.sqrt(var)))


# --------------------------------------------------------------------------------------
# The generation step
# --------------------------------------------------------------------------------------


def test_selection_step_matches_genotype_calculation_by_hand():
    # Worked by hand: p = 0.2, s = 0.1 -> (0.04*1.2 + 0.16*1.1) / 1.04 = 0.224/1.04.
    assert selection_step(0.2, 0.1) == pytest.approx(0.224 / 1.04, rel=1e-15)
    rng = np.random.default_rng(0)
    p = rng.random(200)
    s = rng.uniform(-0.5, 1.0, 200)
    ref = np.array([genotype_selection(a, b) for a, b in zip(p, s)])
    np.testing.assert_allclose(selection_step(p, s), ref, rtol=1e-13)
    # Neutral sites are untouched bit for bit; a homozygous lethal (s = -1/2) still works.
    np.testing.assert_array_equal(selection_step(p, 0.0), p)
    assert selection_step(0.5, -0.5) == pytest.approx(genotype_selection(0.5, -0.5))


def test_exact_chain_reference_is_right_where_theory_is_exact():
    # Neutral fixation probability of one copy is exactly 1/(2N) (the frequency is a
    # martingale; Kimura 1962, common practice).
    assert exact_wf_fixation(50, 0.0) == pytest.approx(1 / 100, rel=1e-10)
    # And it approaches Kimura's diffusion result as N grows at fixed S = 4Ns (the
    # diffusion error shrinks like 1/N).
    d = [
        abs(exact_wf_fixation(N, 10 / (4 * N)) / kimura_u(N, 10 / (4 * N)) - 1)
        for N in (25, 50, 100)
    ]
    assert d[0] > d[1] > d[2] and d[2] < 0.012


@pytest.mark.parametrize("S, reps", [(-4.0, 200_000), (0.0, 60_000), (4.0, 40_000), (10.0, 20_000)])
def test_fixation_probability_vs_exact_chain_and_kimura(S, reps):
    N = 50
    s = S / (4 * N)
    res = simulate_fixation(N, s, reps, np.random.default_rng(1000 + int(S)))
    assert res.fixed + res.lost == reps
    u_exact = exact_wf_fixation(N, s)
    # Simulator against the exact Wright–Fisher chain: within 4 binomial standard errors.
    se = math.sqrt(u_exact * (1 - u_exact) / reps)
    assert abs(res.probability - u_exact) < 4 * se
    # Kimura (1962) is the diffusion limit; at N = 50 the exact chain differs from it by
    # a few per cent (up to ~5 % at |S| = 4); allow that plus the Monte Carlo error.
    u_k = kimura_u(N, s)
    assert abs(res.probability - u_k) < 4 * se + 0.06 * u_k


def test_selection_dominates_drift_when_s_exceeds_one_over_2N():
    # Rule of thumb (common practice): selection dominates drift when |s| >> 1/(2N).
    # N = 100, 1/(2N) = 0.005.
    N = 100
    rng = np.random.default_rng(7)
    strong = simulate_fixation(N, 0.1, 8000, rng)
    weak = simulate_fixation(N, 1e-4, 60_000, rng)
    bad = simulate_fixation(N, -0.1, 20_000, rng)
    # s = 0.1 >> 1/(2N): fixation near Haldane's (1927) 2s -- for s this large the exact
    # value is ~12 % below 2s, as Kimura's 1 - e^{-2s} says -- and far above neutral.
    u_exact = exact_wf_fixation(N, 0.1)
    assert abs(strong.probability - u_exact) < 4 * strong.standard_error
    assert 0.8 * 0.2 < strong.probability < 0.2
    assert strong.probability > 20 / (2 * N)
    # s = 1e-4 << 1/(2N): indistinguishable from the neutral 1/(2N).
    assert abs(weak.probability - 1 / (2 * N)) < 4 * math.sqrt(0.005 * 0.995 / 60_000)
    # s = -0.1: never fixes (Kimura: u ~ 1e-18), where 100 neutral fixations are expected.
    assert bad.fixed == 0
    # Trajectories from p = 1/2 over 40 generations: with s = 0.1 the mean follows the
    # deterministic recursion and its change dwarfs the spread drift adds; with
    # s = 1e-4 the mean does not move beyond what 2000 drifting replicates allow.
    gens = 40
    det = 0.5
    for _ in range(gens):
        det = genotype_selection(det, 0.1)
    tr = simulate_trajectories(N, 0.1, 2000, gens, rng, initial_count=N) / (2 * N)
    assert abs(tr[-1].mean() - det) < 0.03
    assert tr[-1].mean() - 0.5 > 5 * tr[-1].std()
    tw = simulate_trajectories(N, 1e-4, 2000, gens, rng, initial_count=N) / (2 * N)
    sd = tw[-1].std()
    assert abs(tw[-1].mean() - 0.5) < 4 * sd / math.sqrt(2000)
    assert abs(tw[-1].mean() - 0.5) < 0.1 * sd


# --------------------------------------------------------------------------------------
# Whole-study spectra
# --------------------------------------------------------------------------------------


def test_neutral_spectrum_mean_is_theta_over_i():
    # Fu (1995), Theor. Popul. Biol. 48: E[xi_i] = theta L / i for the neutral standard
    # coalescent (from memory); the diploid Wright–Fisher model with N = 100 matches it
    # up to O(1/N), inside the Monte Carlo error here. Both classes are neutral.
    n, theta, L = 10, 0.01, 100_000
    pops = build_populations(["p:N=100,n=10"])
    st = simulate_study(pops, parse_dfe("neutral"), theta=theta, sites=L, blocks=10, seed=11)
    sp = st.spectra.populations["p"]
    i = np.arange(1, n)
    exp = theta * L / i
    obs = np.concatenate([sp.classes[c].sfs[1:n] for c in ("0fold", "4fold")])
    e2 = np.concatenate([exp, exp])
    # Sites are unlinked, so counts are sums of independent sites: variance <= mean.
    assert z_ok(obs, e2, e2)
    chi2 = float(np.sum((obs - e2) ** 2 / e2))
    assert stats.chi2.sf(chi2, obs.size) > 1e-3
    for c in ("0fold", "4fold"):
        assert sp.classes[c].sfs.sum() == L
        assert sp.classes[c].block_sfs.shape == (10, n + 1)
    # Watterson's estimator recovers theta (Watterson 1975) within its error.
    assert sp.stats["4fold"]["theta_w"] == pytest.approx(theta, rel=0.08)


def exact_wf_sample_spectrum(N: int, s: float, new_per_generation: float, n: int) -> np.ndarray:
    """Expected sample spectrum (entries 0..n, entry 0 without the monomorphic sites) of the
    exact Wright–Fisher chain at mutation–selection–drift equilibrium.

    Expected mutations at j copies = (new mutations per generation) x G[1, j], with G =
    (I − Q)^{-1} the fundamental matrix of the absorbing chain (expected visits to each
    transient state; Kemeny & Snell, Finite Markov Chains, from memory), then a
    hypergeometric sample of n copies (scipy).
    """
    two_n = 2 * N
    i = np.arange(two_n + 1)
    pp = np.array([genotype_selection(x, s) for x in i / two_n])
    P = stats.binom.pmf(i[None, :], two_n, pp[:, None])
    G = np.linalg.inv(np.eye(two_n - 1) - P[1:-1, 1:-1])
    j = np.arange(1, two_n)
    H = stats.hypergeom.pmf(np.arange(n + 1)[:, None], two_n, j[None, :], n)
    return H @ (new_per_generation * G[0])


@pytest.mark.parametrize("S", [-10.0, 4.0])
def test_selected_spectrum_matches_exact_wright_fisher_chain(S):
    # The whole study simulator (mutation input, selection, drift, sampling) against the
    # exact chain's equilibrium spectrum for a fixed S; the neutral class rides along.
    N, n, theta, L = 50, 10, 0.02, 50_000
    pops = build_populations([f"p:N={N},n={n}"])
    st = simulate_study(
        pops, parse_dfe(f"fixed:S={S}"), theta=theta, sites=L, blocks=5, seed=31 + int(S)
    )
    lam = theta * L / 2  # 2 N mu L new mutations per generation
    for c, s in (("0fold", S / (4 * N)), ("4fold", 0.0)):
        exp = exact_wf_sample_spectrum(N, s, lam, n)[1:]
        obs = st.spectra.populations["p"].classes[c].sfs[1:].astype(float)
        big = exp >= 5  # lump the sparse tail into one cell
        o, e = obs[big], exp[big]
        if not big.all():
            o, e = np.append(o, obs[~big].sum()), np.append(e, exp[~big].sum())
        assert z_ok(o, e, e), (c, o, e)
        assert stats.chi2.sf(float(np.sum((o - e) ** 2 / e)), o.size) > 1e-3


def test_size_history_matches_coalescent_expectation_from_msprime():
    # A four-fold expansion 50 generations ago (ancestral 100 -> 400). Expected neutral
    # spectrum = mu L E[branch length subtending i], the latter averaged over msprime
    # coalescent replicates with the same history (msprime's Hudson model in generations,
    # diploid sizes). The equilibrium expectation is clearly rejected, so the history is
    # really applied.
    msprime = pytest.importorskip("msprime")
    n, theta, L = 10, 0.01, 100_000
    pops = build_populations(["p:n=10"], ["0:400,50:100"])
    st = simulate_study(pops, parse_dfe("neutral"), theta=theta, sites=L, blocks=10, seed=5)
    mu = theta / (4 * 100)
    sp = st.spectra.populations["p"]
    obs = sp.classes["0fold"].sfs[1:n] + sp.classes["4fold"].sfs[1:n]
    dem = msprime.Demography()
    dem.add_population(name="p", initial_size=400)
    dem.add_population_parameters_change(time=50, initial_size=100, population="p")
    R = 2500
    B = np.zeros((R, n + 1))
    for k, ts in enumerate(
        msprime.sim_ancestry(
            samples={"p": n // 2}, demography=dem, ploidy=2, num_replicates=R, random_seed=3
        )
    ):
        B[k] = ts.allele_frequency_spectrum(mode="branch", polarised=True)
    exp = 2 * mu * L * B.mean(axis=0)[1:n]
    var = exp + (2 * mu * L) ** 2 * B.var(axis=0)[1:n] / R
    assert z_ok(obs, exp, var)
    eq = 2 * theta * L / np.arange(1, n)
    assert not z_ok(obs, eq, eq, zmax=6.0)
    assert obs[0] > 1.4 * eq[0]  # the excess of singletons after an expansion


def test_substitution_rate_in_the_study_simulator_matches_exact_chain():
    # At stationarity the fixations per generation are (new mutations per generation) x
    # (fixation probability); the per-mutation probability comes from the exact chain.
    N, theta, L, T = 50, 0.02, 20_000, 400
    pops = build_populations([f"p:N={N},n=10"])
    st = simulate_study(
        pops,
        parse_dfe("fixed:S=10"),
        theta=theta,
        sites=L,
        blocks=4,
        divergence_generations=T,
        seed=21,
    )
    truth = st.spectra.provenance["simulation"]["populations"]["p"]
    new_per_gen = 2 * N * (theta / (4 * N)) * L
    for c, s in (("0fold", 10 / (4 * N)), ("4fold", 0.0)):
        exp = T * new_per_gen * exact_wf_fixation(N, s)
        got = truth["substitutions_in_window"][c]
        assert abs(got - exp) < 4 * math.sqrt(exp), (c, got, exp)
        # Entry n holds those substitutions plus sample-fixed segregating sites.
        assert st.spectra.populations["p"].classes[c].sfs[-1] >= got


def test_reproducible_with_seed_and_independent_of_outputs(tmp_path):
    pops = build_populations(["a:N=100,n=8", "b:N=60,n=6"])
    dfe = parse_dfe("gamma:shape=0.3,mean=50", "p=0.05,S=20")
    kw = dict(theta=0.01, sites=5000, blocks=5, divergence_generations=50)
    one = simulate_study(pops, dfe, seed=99, **kw)
    two = simulate_study(pops, dfe, seed=99, **kw)
    other = simulate_study(pops, dfe, seed=100, **kw)

    def arrays(st):
        d = spectra_to_dict(st.spectra)
        return json.dumps(d["populations"], sort_keys=True)

    assert arrays(one) == arrays(two)
    assert arrays(one) != arrays(other)
    assert one.spectra.provenance["simulation"]["seed"] == 99
    # Files: the same seed gives byte-identical VCF content.
    write_study(one, tmp_path / "one.json", vcf_prefix=tmp_path / "one")
    write_study(two, tmp_path / "two.json", vcf_prefix=tmp_path / "two")
    with gzip.open(tmp_path / "one.vcf.gz") as f1, gzip.open(tmp_path / "two.vcf.gz") as f2:
        assert f1.read() == f2.read()


def test_only_ne_differs_scales_S_with_population_size():
    pops = build_populations(["big:N=400,n=10", "small:N=40,n=10"])
    dfe = parse_dfe("gamma:shape=0.3,mean=400")
    st = simulate_study(pops, dfe, theta=0.01, sites=2000, blocks=2, seed=3)
    info = st.spectra.provenance["simulation"]
    assert info["reference_size"] == 400
    small = info["populations"]["small"]
    assert small["dfe_on_population_scale"]["present_size"]["mean"] == pytest.approx(40)
    assert small["mu"] == info["populations"]["big"]["mu"] == pytest.approx(0.01 / 1600)
    shares_big = info["populations"]["big"]["nes_band_shares"]["present_size"]
    shares_small = small["nes_band_shares"]["present_size"]
    assert shares_small[0] > shares_big[0]


# --------------------------------------------------------------------------------------
# DFE samplers
# --------------------------------------------------------------------------------------


def test_dfe_samplers_match_scipy_distributions():
    rng = np.random.default_rng(4)
    g = parse_dfe("gamma:shape=0.3,mean=200").sample_S(200_000, rng)
    # Kolmogorov–Smirnov against scipy's gamma with scale = mean / shape.
    assert stats.kstest(-g, stats.gamma(0.3, scale=200 / 0.3).cdf).pvalue > 1e-3
    ln = parse_dfe("lognormal:mu=3,sigma=1.5").sample_S(100_000, rng)
    assert stats.kstest(-ln, stats.lognorm(1.5, scale=math.exp(3)).cdf).pvalue > 1e-3
    mix = parse_dfe("fixed:S=-10", "p=0.02,S=50").sample_S(100_000, rng)
    assert set(np.unique(mix)) == {-10.0, 50.0}
    k = int(np.sum(mix == 50.0))
    assert abs(k - 2000) < 4 * math.sqrt(2000 * 0.98)
    # s = S / (4 Nref), clipped at -1/2 so the homozygote fitness 1 + 2s stays >= 0.
    s = s_from_S(np.array([-1e9, -100.0, 0.0, 40.0]), 100)
    np.testing.assert_array_equal(s, [-0.5, -0.25, 0.0, 0.1])


def test_band_shares_match_mpmath_incomplete_gamma():
    # Pr(a <= |N s| < b) for -S ~ Gamma(beta, mean Sbar) is P(beta, 4 b lam) - P(beta,
    # 4 a lam), lam = beta / Sbar (regularised incomplete gamma, mpmath as reference).
    mpmath = pytest.importorskip("mpmath")
    for beta, mean in ((0.1, 1000.0), (0.5, 1000.0), (1.0, 10.0)):
        got = band_shares(parse_dfe(f"gamma:shape={beta},mean={mean}"), 1e6, 1e6)
        lam = beta / mean
        P = [float(mpmath.gammainc(beta, 0, 4 * e * lam, regularized=True)) for e in (1, 10, 100)]
        ref = [P[0], P[1] - P[0], P[2] - P[1], 1 - P[2]]
        np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-15)
    # Scaling with N: a 10x smaller population carries more effectively neutral mass.
    d = parse_dfe("gamma:shape=0.3,mean=400", "p=0.01,S=40")
    big, small = band_shares(d, 1000, 1000), band_shares(d, 1000, 100)
    assert sum(big) == pytest.approx(1) and sum(small) == pytest.approx(1)
    assert small[0] > big[0]


def test_bad_dfe_and_population_texts_raise_one_line_option_errors():
    for text in (
        "gamma:shape=0.3",
        "gamma:shape=-1,mean=3",
        "weird:x=1",
        "lognormal:mu=1,sigma=-2",
        "gamma:shape=a,mean=1",
    ):
        with pytest.raises(OptionError) as err:
            parse_dfe(text)
        assert "\n" not in str(err.value)
    with pytest.raises(OptionError):
        parse_dfe("fixed:S=-1", "p=2,S=10")
    for pops, hist in (
        (["x:N=10"], []),
        (["x:n=4"], []),
        (["x:N=10,n=40"], []),
        (["x:N=10,n=4", "x:N=5,n=4"], []),
        (["x:N=10,n=4"], ["y=0:5"]),
        (["x:N=10,n=4"], ["0:20,10:5"]),
        (["x:N=10,n=4,foo=1"], []),
        (["bad name:N=10,n=4"], []),
    ):
        with pytest.raises(OptionError):
            build_populations(pops, hist)


def test_history_semantics_generations_before_sample():
    (p,) = build_populations(["lake:n=10"], ["lake=0:4000,200:1000,500:2000"])
    assert p.present_size == 4000 and p.ancestral_size == 2000
    assert p.history_generations == 500
    assert [p.size_at(a) for a in (0, 199, 200, 499, 500, 10_000)] == [
        4000,
        4000,
        1000,
        1000,
        2000,
        2000,
    ]
    (q,) = build_populations(["lake:N=300,n=10"], ["250:30"])
    assert (q.present_size, q.ancestral_size) == (300, 30)


def test_infinite_sites_guard_and_short_burn_in_warning():
    pops = build_populations(["p:N=100,n=20"])
    with pytest.raises(OptionError, match="infinite sites"):
        simulate_study(pops, parse_dfe("neutral"), theta=0.5, sites=1000, blocks=2, seed=1)
    with pytest.warns(DriftbandWarning, match="burn-in"):
        simulate_study(
            pops, parse_dfe("neutral"), theta=0.001, sites=100, blocks=1, burn_in=10, seed=1
        )
    with pytest.raises(OptionError, match="divergence"):
        simulate_study(
            pops,
            parse_dfe("neutral"),
            theta=0.001,
            sites=100,
            blocks=1,
            divergence_generations=10**6,
            seed=1,
        )


# --------------------------------------------------------------------------------------
# Layout, VCF, BED, sample table
# --------------------------------------------------------------------------------------


def test_codon_patterns_reproduce_class_counts():
    for m0, m4 in ((20, 10), (10, 10), (31, 10), (7, 3), (3, 9), (0, 0), (5, 0)):
        c = codon_pattern_counts(m0, m4)
        assert (c >= 0).all()
        got0 = int(np.sum(c * (CODON_PATTERNS == 0).sum(axis=1)))
        got4 = int(np.sum(c * (CODON_PATTERNS == 1).sum(axis=1)))
        assert (got0, got4) == (m0, m4)
    lay = make_layout((1003, 500), 7, 3)
    assert lay.block_sites[:, 0].sum() == 1003 and lay.block_sites[:, 1].sum() == 500
    blocks = lay.blocks()
    for a, b in zip(blocks, blocks[1:]):
        assert a.chrom != b.chrom or a.end <= b.start
    assert len({b.chrom for b in blocks}) == 3


@pytest.fixture(scope="module")
def vcf_study(tmp_path_factory):
    d = tmp_path_factory.mktemp("simvcf")
    pops = build_populations(["lake:N=300,n=12", "spring:N=60,n=8"])
    st = simulate_study(
        pops,
        parse_dfe("gamma:shape=0.3,mean=100"),
        theta=0.01,
        sites={"0fold": 12_000, "4fold": 6000},
        blocks=12,
        divergence_generations=300,
        seed=8,
        chromosomes=3,
    )
    paths = write_study(
        st,
        d / "s.json",
        d / "s.tsv",
        d / "s",
        outgroup=("sister", 4),
        ref_derived=0.3,
        missing=0.0,
        genome=True,
    )
    return st, paths, d


def _spectra_from_vcf(paths):
    """Recount derived alleles per population and class straight from the VCF (pysam)."""
    pysam = pytest.importorskip("pysam")
    classes = read_site_classes(paths["bed"])
    sample_table = dict(line.split("\t") for line in open(paths["samples"]).read().splitlines()[1:])
    counts: dict = {}
    outgroup_ok = True
    with pysam.VariantFile(paths["vcf"]) as vf:
        for rec in vf:
            aa = rec.info["AA"]
            assert aa in (rec.ref, rec.alts[0])
            der = 1 if aa == rec.ref else 0
            cls = [
                c
                for c, s in classes.classes.items()
                if s.contains(rec.chrom, np.array([rec.pos - 1]))[0]
            ]
            assert len(cls) == 1
            per_pop = Counter()
            for name, smp in rec.samples.items():
                gt = smp["GT"]
                if sample_table[name] == "sister":
                    outgroup_ok &= all(g == 1 - der for g in gt)
                    continue
                per_pop[sample_table[name]] += sum(g == der for g in gt)
            for pop, k in per_pop.items():
                if k:
                    counts[(pop, cls[0], k)] = counts.get((pop, cls[0], k), 0) + 1
    return counts, outgroup_ok


def test_vcf_spectra_equal_the_spectra_written(vcf_study):
    st, paths, _ = vcf_study
    counts, outgroup_ok = _spectra_from_vcf(paths)
    assert outgroup_ok  # outgroup homozygous for the ancestral base
    ss = read_spectra_json(paths["spectra"])
    for name, pop in ss.populations.items():
        assert pop.polarisation == "aa" and not pop.folded
        for c, cs in pop.classes.items():
            sfs = cs.sfs
            for k in range(1, pop.n + 1):
                assert sfs[k] == counts.get((name, c, k), 0), (name, c, k)
            assert cs.sites == {"0fold": 12_000, "4fold": 6000}[c]
    # The spring population's substitutions are in the VCF as fixed-derived records.
    assert ss.populations["spring"].classes["4fold"].sfs[-1] > 0


def test_vcf_is_valid_for_bcftools_and_indexed(vcf_study):
    st, paths, _ = vcf_study
    bcftools = shutil.which("bcftools")
    if bcftools is None:
        pytest.skip("bcftools is not installed")
    out = subprocess.run([bcftools, "view", "-H", paths["vcf"]], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    n_rec = len(out.stdout.splitlines())
    n_var = sum(s.classes[c].derived.size for s in st.samples for c in s.classes)
    assert n_rec == n_var
    q = subprocess.run(
        [bcftools, "query", "-r", "chr2", "-f", "%CHROM\t%REF\t%ALT\t%AA\n", paths["vcf"]],
        capture_output=True,
        text=True,
        check=True,
    )
    rows = [r.split("\t") for r in q.stdout.splitlines()]
    assert rows and all(r[0] == "chr2" for r in rows)
    flipped = sum(r[3] == r[2] for r in rows) / len(rows)
    assert 0.15 < flipped < 0.45  # --ref-derived 0.3
    # Every sample is in the sample table, diploid, with GT:DP:GQ.
    samples = subprocess.run(
        [bcftools, "query", "-l", paths["vcf"]], capture_output=True, text=True, check=True
    ).stdout.split()
    rows = open(paths["samples"]).read().splitlines()
    assert rows[0] == "sample\tpopulation"
    sample_table = [ln.split("\t")[0] for ln in rows[1:]]
    assert samples == sample_table and len(samples) == 6 + 4 + 2
    bed = read_site_classes(paths["bed"])
    assert bed.classes["0fold"].length() == 12_000 and bed.classes["4fold"].length() == 6000


def test_vcf_missing_genotypes_leave_the_true_spectra_unchanged(tmp_path):
    pops = build_populations(["a:N=100,n=10"])
    dfe = parse_dfe("gamma:shape=0.3,mean=50")
    st = simulate_study(pops, dfe, theta=0.01, sites=4000, blocks=4, seed=12)
    paths = write_study(st, tmp_path / "m.json", vcf_prefix=tmp_path / "m", missing=0.2)
    pysam = pytest.importorskip("pysam")
    n_gt = n_miss = 0
    with pysam.VariantFile(paths["vcf"]) as vf:
        for rec in vf:
            for smp in rec.samples.values():
                n_gt += 1
                n_miss += smp["GT"] == (None, None)
    assert abs(n_miss / n_gt - 0.2) < 4 * math.sqrt(0.2 * 0.8 / n_gt)
    st2 = simulate_study(pops, dfe, theta=0.01, sites=4000, blocks=4, seed=12)
    assert np.array_equal(
        read_spectra_json(paths["spectra"]).populations["a"].classes["0fold"].block_sfs,
        st2.spectra.populations["a"].classes["0fold"].block_sfs,
    )


# --------------------------------------------------------------------------------------
# Command line
# --------------------------------------------------------------------------------------


def test_cli_writes_spectra_and_vcf(tmp_path, capsys):
    out = tmp_path / "cli.json"
    rc = main(
        [
            "simulate",
            "--population",
            "lake:N=100,n=8",
            "--population",
            "spring:N=30,n=6",
            "--class-sites-0fold",
            "3000",
            "--class-sites-4fold",
            "1500",
            "--block-count",
            "5",
            "--gene-codons",
            "50",
            "--intergenic",
            "2000",
            "--seed",
            "4",
            "--divergence-generations",
            "100",
            "--true-dfe",
            "lognormal:mu=3,sigma=1",
            "--true-beneficial",
            "p=0.01,S=20",
            "--write-vcf",
            str(tmp_path / "cli"),
            "--outgroup",
            "sis:n=2",
            "--tsv",
            str(tmp_path / "cli.tsv"),
            "-o",
            str(out),
        ]
    )
    assert rc == 0, capsys.readouterr().err
    ss = read_spectra_json(out)
    assert set(ss.populations) == {"lake", "spring"}
    assert len(ss.blocks) == 5
    assert ss.provenance["simulation"]["dfe"]["family"] == "lognormal"
    for suffix in (".vcf.gz", ".vcf.gz.tbi", ".sites.bed", ".samples.tsv"):
        assert (tmp_path / f"cli{suffix}").exists()
    # Layout options: 3000 + 1500 sites in genes of <= 50 codons with 2 kb before each.
    blocks = ss.blocks
    assert sum(b.end - b.start for b in blocks) > 2000 * (3000 // 100)
    # A rerun refuses to overwrite, naming the file; --force redoes it identically.
    rc = main(["simulate", "--population", "lake:N=100,n=8", "--seed", "4", "-o", str(out)])
    assert rc == 2 and "use --force" in capsys.readouterr().err


@pytest.mark.parametrize(
    "argv, msg",
    [
        (["--population", "lake:N=100,n=9", "--write-vcf", "V"], "odd"),
        (["--population", "lake:N=100,n=8", "--true-dfe", "gamma:shape=0.3"], "mean"),
        (["--population", "lake:N=100,n=8", "--history", "other=0:10"], "other"),
        (["--population", "lake:N=100,n=8", "--write-vcf", "V", "--missing", "1.5"], "--missing"),
        (["--population", "lake:N=100,n=8", "--write-vcf", "V", "--outgroup", "sis"], "--outgroup"),
        (["--population", "lake:N=100,n=8", "--block-count", "0"], "--block-count"),
        (
            ["--population", "lake:N=100,n=8", "--class-sites", "10", "--block-count", "20"],
            "blocks",
        ),
        ([], "--population"),
    ],
)
def test_cli_bad_options_exit_2_with_one_line_and_write_nothing(tmp_path, capsys, argv, msg):
    argv = [a.replace("V", str(tmp_path / "v")) if a == "V" else a for a in argv]
    rc = main(
        ["simulate", *argv, "--class-sites", "200", "-o", str(tmp_path / "x.json")]
        if "--class-sites" not in argv
        else ["simulate", *argv, "-o", str(tmp_path / "x.json")]
    )
    err = capsys.readouterr().err
    assert rc == 2
    assert err.count("\n") == 1 and msg in err
    assert list(tmp_path.iterdir()) == []


# --------------------------------------------------------------------------------------
# Reference genome (FASTA + GFF3) behind the site classes
# --------------------------------------------------------------------------------------


def test_codon_position_classes_match_biopython_standard_table():
    # Degeneracy of each codon position from Biopython's standard table (NCBI table 1):
    # 0 synonymous changes -> 0-fold, 3 -> 4-fold (common practice; a change to a stop
    # codon is nonsynonymous).
    from Bio.Data import CodonTable

    table = CodonTable.unambiguous_dna_by_id[1]
    aa = dict(table.forward_table)
    for stop in table.stop_codons:
        aa[stop] = "*"
    for idx in range(64):
        codon = "ACGT"[idx // 16] + "ACGT"[(idx // 4) % 4] + "ACGT"[idx % 4]
        if aa[codon] == "*":
            assert (CODON_POSITION_CLASSES[idx] == -2).all()
            continue
        for k in range(3):
            syn = sum(
                aa[codon[:k] + b + codon[k + 1 :]] == aa[codon] for b in "ACGT" if b != codon[k]
            )
            want = 0 if syn == 0 else (1 if syn == 3 else -1)
            assert CODON_POSITION_CLASSES[idx, k] == want, (codon, k)


def test_genome_fasta_and_gff3_give_back_the_sites_bed(vcf_study):
    # The project's own classifier (FASTA + GFF3 -> classes) reproduces the BED the
    # simulator wrote, and REF agrees with the FASTA at every record (bcftools norm -c e).
    _, paths, _ = vcf_study
    from driftband.sites.classify import classify_sites

    got = classify_sites(paths["fasta"], paths["gff"]).to_site_classes()
    want = read_site_classes(paths["bed"])
    for c in ("0fold", "4fold"):
        assert set(got.classes[c].chroms) == set(want.classes[c].chroms)
        for chrom, (s, e) in want.classes[c].chroms.items():
            np.testing.assert_array_equal(got.classes[c].chroms[chrom][0], s)
            np.testing.assert_array_equal(got.classes[c].chroms[chrom][1], e)
    bcftools = shutil.which("bcftools")
    if bcftools is None:
        pytest.skip("bcftools is not installed")
    out = subprocess.run(
        [bcftools, "norm", "-c", "e", "-f", paths["fasta"], "-o", "/dev/null", paths["vcf"]],
        capture_output=True,
        text=True,
    )
    assert out.returncode == 0, out.stderr


def test_genome_needs_more_0fold_than_4fold_sites(tmp_path, capsys):
    rc = main(
        [
            "simulate",
            "--population",
            "a:N=50,n=4",
            "--class-sites-0fold",
            "100",
            "--class-sites-4fold",
            "200",
            "--block-count",
            "2",
            "--write-vcf",
            str(tmp_path / "g"),
            "--genome",
            "-o",
            str(tmp_path / "g.json"),
        ]
    )
    assert rc == 2 and "--genome" in capsys.readouterr().err
    assert list(tmp_path.iterdir()) == []


def test_cli_short_burn_in_warns_in_one_line(tmp_path, capsys):
    rc = main(
        [
            "simulate",
            "--population",
            "a:N=50,n=4",
            "--class-sites",
            "100",
            "--block-count",
            "2",
            "--burn-in",
            "10",
            "-o",
            str(tmp_path / "w.json"),
        ]
    )
    err = capsys.readouterr().err
    assert rc == 0
    assert err.count("\n") == 1 and "burn-in of 10 generations" in err
