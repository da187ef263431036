"""DFE families, band shares, fixation ratios and DFE-averaged spectra (driftband.prf.dfe).

References: mpmath (Hurwitz-zeta kernel of the gamma average, hyp1f1 for the lognormal
average, gammainc for band shares, quadrature for mean fixation ratios; all in
reference_checks/mpmath_prf.py, no driftband code); scipy.integrate.quad_vec as an
independent quadrature for the discrete family; Monte Carlo draws; closed forms for the
exponential DFE worked by hand; the exact Wright-Fisher chain (tests/wf_chain.py) for the
mean fixation ratio.
"""

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.integrate import quad, quad_vec
from scipy.special import gamma as gamma_fn

from driftband.prf import (
    DfeExpectation,
    DiscreteDfe,
    GammaDfe,
    LognormalDfe,
    WithBeneficial,
    band_shares,
    deleterious_band_shares,
    fixation_ratio,
    kernel,
    mean_fixation_ratio,
    sample_S,
)
from wf_chain import wf_fixation

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "reference_checks"))
import mpmath_prf as ref

#: Gauss-Legendre degrees of the mpmath DFE references here: 24 and 48 nodes per interval,
#: which must agree to 1e-13 or the reference raises (the full check uses 48 and 96).
DEGREES = (4, 5)
_EXP: dict[int, DfeExpectation] = {}


def expectation(n):
    if n not in _EXP:
        _EXP[n] = DfeExpectation(n)
    return _EXP[n]


# ------------------------------------------------------------ gamma: mpmath kernel
# beta = 0.05 with mean 0.1 puts 38% of the mass below t = 1e-8 (the analytic part);
# beta = 1 uses the digamma form of the reference kernel.
@pytest.mark.parametrize("shape,mean", [(0.05, 0.1), (0.05, 1e5), (1.0, 100.0), (5.0, 1e3)])
def test_gamma_mean_spectrum_vs_mpmath(shape, mean):
    # Source: mpmath, C(n,i) int x^(i-1)(1-x)^(n-i-1) lam^b [zeta(b, lam+x) - zeta(b, lam+1)]
    # dx (kernel derived in reference_checks/mpmath_prf.py from the gamma Laplace
    # transform). Checked to 1e-10 relative (the reference check asks 1e-8).
    n = 20
    want = ref.gamma_mean_sfs(n, shape, mean, DEGREES)
    got = expectation(n).mean_g(GammaDfe(shape, mean))
    assert_allclose(got, want, rtol=1e-10)


@pytest.mark.parametrize(
    "n,shape,mean",
    [
        (10, 50.0, 100.0),
        pytest.param(10, 2000.0, 30.0, marks=pytest.mark.slow),
    ],
)
def test_narrow_gamma_vs_mpmath(n, shape, mean):
    # Source: mpmath Hurwitz-zeta kernel (as above). Shapes above 4.48 have sd(ln t) < 0.5
    # and use refined panels over their bulk (16 and 64 panels per decade here).
    want = ref.gamma_mean_sfs(n, shape, mean, DEGREES)
    assert_allclose(expectation(n).mean_g(GammaDfe(shape, mean)), want, rtol=1e-10)


@pytest.mark.slow
def test_very_narrow_lognormal_vs_mpmath():
    # Source: mpmath hyp1f1 quadrature; sigma = 0.005 gets a table of its own.
    want = ref.lognormal_mean_sfs(4, 2.0, 0.005)
    assert_allclose(expectation(4).mean_g(LognormalDfe(2.0, 0.005)), want, rtol=1e-10)


@pytest.mark.slow
@pytest.mark.parametrize("shape", [0.05, 0.1, 0.3, 1.0, 3.0, 5.0])
def test_gamma_mean_spectrum_vs_mpmath_wide(shape):
    # Source: mpmath Hurwitz-zeta kernel, as above, over the whole range of beta and S-bar
    # that reference_checks/check_prf_mpmath.py covers.
    for n in (50, 200):
        for mean in (0.1, 1.0, 10.0, 100.0, 1e3, 1e4, 1e5):
            want = ref.gamma_mean_sfs(n, shape, mean, degrees=(6, 7))
            got = expectation(n).mean_g(GammaDfe(shape, mean))
            assert_allclose(got, want, rtol=1e-8, err_msg=f"n={n} mean={mean}")


def test_gamma_small_shape_small_t_mass():
    # Source: analytic neutral limit (Fu 1995, from memory): if nearly all mass sits at
    # |S| << 1/n the average spectrum is 1/i; beta = 0.05, mean 1e-6 has P(t < 1e-8) = 0.70.
    n = 30
    d = GammaDfe(0.05, 1e-6)
    assert float(d.cdf_t(1e-8)) > 0.69
    got = expectation(n).mean_g(d)
    i = np.arange(1, n)
    # 1/i - E[t]/(2(n+1)) to first order in t
    assert_allclose(got, 1.0 / i - 1e-6 / (2 * (n + 1)), rtol=1e-10)


# -------------------------------------------------------------------- lognormal
@pytest.mark.parametrize("n,mu,sigma", [(8, 1.0, 2.0), (6, 4.0, 0.2)])
def test_lognormal_mean_spectrum_vs_mpmath(n, mu, sigma):
    # Source: mpmath, quadrature over z ~ N(0,1) of g_i(-exp(mu + sigma z)) with g from
    # mpmath.hyp1f1 (Kummer form). sigma = 0.2 exercises the narrow-DFE refinement.
    want = ref.lognormal_mean_sfs(n, mu, sigma, DEGREES)
    got = expectation(n).mean_g(LognormalDfe(mu, sigma))
    assert_allclose(got, want, rtol=1e-10)


# --------------------------------------------------------------------- discrete
def test_discrete_mean_spectrum_vs_scipy_quad():
    # Source: scipy.integrate.quad_vec of g(-t) against the band densities (uniform in t
    # on [4a, 4b); log-uniform on [400, 400000] for the open band), an independent
    # adaptive quadrature.
    n = 12
    k = kernel(n)
    masses = (0.4, 0.3, 0.2, 0.1)
    d = DiscreteDfe(masses)
    want = np.zeros(n - 1)
    for m, (a, b, lg) in zip(masses, d.bands_t):
        if lg:
            v, _ = quad_vec(
                lambda u: k.g(-math.exp(u)), math.log(a), math.log(b), epsrel=1e-13, epsabs=0
            )
            want += m * v / math.log(b / a)
        else:
            v, _ = quad_vec(lambda t: k.g(-t), a, b, epsrel=1e-13, epsabs=0)
            want += m * v / (b - a)
    got = expectation(n).mean_g(d)
    assert_allclose(got, want, rtol=1e-10)
    # linear in the masses
    assert_allclose(np.asarray(masses) @ expectation(n).band_means(), got, rtol=1e-13)


def test_discrete_band_shares_are_the_masses():
    # Definition of the discrete family: the free parameters are the band shares.
    m = (0.1, 0.2, 0.3, 0.4)
    assert band_shares(DiscreteDfe(m)).tolist() == list(m)
    e = (0.0, 0.5, 2.0, 50.0, 1000.0)
    m5 = (0.05, 0.15, 0.25, 0.25, 0.3)
    assert band_shares(DiscreteDfe(m5, e), e).tolist() == list(m5)
    # other edges: uniform density within the band, log-uniform in the open band
    s = band_shares(DiscreteDfe(m), (0.0, 0.5, 1000.0))
    assert_allclose(s, [0.05, 0.05 + 0.2 + 0.3 + 0.4 * (1 / 3), 0.4 * (2 / 3)], rtol=1e-14)


def test_discrete_samples_follow_the_bands():
    # Monte Carlo: draws land in the bands with the given masses and inside the support.
    rng = np.random.default_rng(11)
    m = (0.25, 0.25, 0.25, 0.25)
    S = sample_S(DiscreteDfe(m), 200_000, rng)
    t = -S
    assert t.min() >= 0 and t.max() <= 400_000
    counts = np.histogram(t / 4, bins=[0, 1, 10, 100, np.inf])[0] / t.size
    assert np.all(np.abs(counts - 0.25) < 4.5 * math.sqrt(0.25 * 0.75 / t.size))
    # open band log-uniform: median of ln t at the midpoint of [ln 400, ln 400000]
    top = t[t >= 400]
    assert abs(np.median(np.log(top)) - 0.5 * (math.log(400) + math.log(4e5))) < 0.05


# ------------------------------------------------------------------ band shares
@pytest.mark.parametrize(
    "shape,mean", [(0.1, 10), (0.1, 1000), (0.2, 1000), (0.5, 1000), (1, 10), (3, 1000)]
)
def test_gamma_band_shares(shape, mean):
    # Source: mpmath.gammainc (regularized) at 30 digits.
    got = band_shares(GammaDfe(shape, mean))
    assert_allclose(got, ref.gamma_band_shares(shape, mean), rtol=1e-12, atol=1e-300)
    assert_allclose(got.sum(), 1.0, rtol=1e-14)


@pytest.mark.parametrize("mean", [1.0, 10.0, 1000.0])
def test_exponential_band_shares_closed_form(mean):
    # Source: worked by hand: shape 1 is the exponential distribution of t = -S with rate
    # 1/S-bar, so the band a <= |Ne s| < b (t in [4a, 4b)) holds e^{-4a/S-bar} - e^{-4b/S-bar}.
    edges = np.array([0.0, 1.0, 10.0, 100.0, np.inf])
    want = -np.diff(np.exp(-4 * edges / mean))
    assert_allclose(band_shares(GammaDfe(1.0, mean)), want, rtol=1e-12, atol=0)


def test_gamma_band_share_far_tail_keeps_relative_accuracy():
    # Source: mpmath.gammainc at 30 digits: beta = 3, S-bar = 1, band 10-100 (t in
    # [40, 400), rate 3) has share 5.6e-49; the regularized lower incomplete gamma P is 1
    # to double precision at both edges, so a difference of P would lose it entirely.
    got = band_shares(GammaDfe(3.0, 1.0))
    want = ref.gamma_band_shares(3.0, 1.0)
    assert 5e-49 < want[2] < 6e-49
    assert_allclose(got, want, rtol=1e-12, atol=0)


@pytest.mark.parametrize(
    "dfe",
    [GammaDfe(0.2, 300.0), LognormalDfe(2.0, 2.5), WithBeneficial(GammaDfe(0.5, 50.0), 0.1, 20.0)],
)
def test_band_shares_monte_carlo(dfe):
    # Monte Carlo: 2e5 draws from sample_S; every band within 4.5 binomial s.e.
    rng = np.random.default_rng(3)
    S = sample_S(dfe, 200_000, rng)
    nes = np.abs(S) / 4
    frac = np.histogram(nes, bins=[0, 1, 10, 100, np.inf])[0] / S.size
    p = band_shares(dfe)
    se = np.sqrt(p * (1 - p) / S.size)
    assert np.all(np.abs(frac - p) <= 4.5 * se + 1e-12)


def test_lognormal_band_shares_vs_normal_cdf():
    # Source: mpmath.ncdf of (ln(4 e) - mu)/sigma at 30 digits.
    import mpmath as mp

    mu, sigma = 3.0, 1.5
    cdf = [mp.ncdf((mp.log(4 * e) - mu) / sigma) for e in (1, 10, 100)]
    want = np.diff([0.0] + [float(c) for c in cdf] + [1.0])
    assert_allclose(band_shares(LognormalDfe(mu, sigma)), want, rtol=1e-12)


def test_beneficial_mass_goes_to_its_band():
    # Documented convention: p_b sits in the band of |Ne s| = s_b / 4.
    base = GammaDfe(0.3, 100.0)
    b = deleterious_band_shares(base)
    for s_b, k in ((2.0, 0), (4.0, 1), (100.0, 2), (1e3, 3)):
        got = band_shares(WithBeneficial(base, 0.2, s_b))
        want = 0.8 * b
        want[k] += 0.2
        assert_allclose(got, want, rtol=1e-14)
        assert_allclose(deleterious_band_shares(WithBeneficial(base, 0.2, s_b)), b)


def test_bad_edges_and_parameters():
    for edges in ((1, 10), (0,), (0, 10, 10), (0, 1, np.inf)):
        with pytest.raises(ValueError, match="edges"):
            band_shares(GammaDfe(1, 1), edges)
    with pytest.raises(ValueError, match="shape"):
        GammaDfe(0.0, 1.0)
    with pytest.raises(ValueError, match="mean"):
        GammaDfe(1.0, -5.0)
    with pytest.raises(ValueError, match="sigma"):
        LognormalDfe(0.0, 0.0)
    with pytest.raises(ValueError, match="sum to 1"):
        DiscreteDfe((0.5, 0.2, 0.2, 0.2))
    with pytest.raises(ValueError, match="one value per band"):
        DiscreteDfe((0.5, 0.5))
    with pytest.raises(ValueError, match="p_b"):
        WithBeneficial(GammaDfe(1, 1), 1.0, 1.0)
    with pytest.raises(ValueError, match="s_b"):
        WithBeneficial(GammaDfe(1, 1), 0.1, -1.0)


# ----------------------------------------------------------- mean fixation ratio
@pytest.mark.parametrize(
    "shape,mean", [(0.1, 1), (0.1, 1e4), (0.2, 10), (0.5, 100), (1, 1e3), (3, 10), (3, 1e4)]
)
def test_gamma_mean_fixation_ratio(shape, mean):
    # Source: mpmath.quad of E[t/(e^t - 1)] over the gamma density, 30 digits.
    got = mean_fixation_ratio(GammaDfe(shape, mean))
    assert_allclose(got, ref.gamma_fixation_ratio(shape, mean), rtol=1e-12)


def test_exponential_mean_fixation_ratio_closed_form():
    # Source: worked by hand: t/(e^t - 1) = sum_{k>=1} t e^{-kt}, and for t ~ Exp(1)
    # (shape 1, S-bar 1) E[t e^{-kt}] = 1/(k+1)^2, so the mean is pi^2/6 - 1 (Euler's
    # sum of 1/k^2, common knowledge).
    assert_allclose(mean_fixation_ratio(GammaDfe(1.0, 1.0)), math.pi**2 / 6 - 1, rtol=1e-13)


def _wf_mean_ratio(N, shape, mean):
    """E[2N u] of the exact WF chain over t = -S ~ Gamma(shape, mean), s = -t/(4N), by
    scipy.integrate.quad in u = t**shape (which removes the t**(shape-1) singularity); the
    integrand beyond t = 60 (below 60 e^-60 relative) is left out, which also keeps s > -1/2.
    """
    lam = shape / mean

    def f(v):
        t = v ** (1 / shape)
        return math.exp(-lam * t) * 2 * N * wf_fixation(N, -t / (4 * N))[1]

    val, _ = quad(f, 0, 60.0**shape, epsabs=1e-12, epsrel=1e-10, limit=200)
    return lam**shape / gamma_fn(shape + 1) * val


def test_gamma_fixation_ratio_wright_fisher_average():
    # Source: the exact diploid Wright-Fisher chain averaged over Gamma(0.3, mean 10) at
    # N = 50 and 100. The diffusion value E[S/(1 - e^-S)] differs from it by O(1/N)
    # (common practice), so the relative difference is small and halves as N doubles.
    want = mean_fixation_ratio(GammaDfe(0.3, 10.0))
    d50 = abs(_wf_mean_ratio(50, 0.3, 10.0) / want - 1)
    d100 = abs(_wf_mean_ratio(100, 0.3, 10.0) / want - 1)
    assert d50 < 3e-4 and d100 < 1.5e-4
    assert 1.7 < d50 / d100 < 2.3


def test_fixation_ratio_other_families():
    # Source: mpmath.quad of the defining expectation.
    import mpmath as mp

    for mu, sigma in ((1.0, 1.2), (1.0, 0.1)):  # 0.1: a narrow DFE (refined panels)
        with mp.workdps(30):

            def f(z, mu=mu, sigma=sigma):
                return mp.npdf(z) * mp.exp(mu + sigma * z) / mp.expm1(mp.exp(mu + sigma * z))

            # |z| > 12 holds mass < 4e-33 (and mpmath would meet exp(exp(large)) there)
            want = float(mp.quad(f, list(range(-12, 13, 2))))
        assert_allclose(mean_fixation_ratio(LognormalDfe(mu, sigma)), want, rtol=1e-10)
    # discrete: uniform band [0, 4): (1/4) int_0^4 t/(e^t - 1) dt, by mpmath.quad
    with mp.workdps(30):
        want0 = float(mp.quad(lambda t: t / mp.expm1(t) if t else 1, [0, 4]) / 4)
    assert_allclose(mean_fixation_ratio(DiscreteDfe((1.0, 0, 0, 0))), want0, rtol=1e-10)
    # beneficial point mass adds p_b S_b / (1 - e^-S_b) (Kimura 1962)
    base = GammaDfe(0.3, 10.0)
    got = mean_fixation_ratio(WithBeneficial(base, 0.05, 30.0))
    want = 0.95 * mean_fixation_ratio(base) + 0.05 * 30 / -math.expm1(-30)
    assert_allclose(got, want, rtol=1e-14)


# ---------------------------------------------------------- expectation interface
def test_beneficial_mixture_and_linear_form():
    # Mixture definition: (1 - p_b) E_base[g] + p_b g(+s_b), with g from the kernel.
    n = 25
    ex = expectation(n)
    base = GammaDfe(0.4, 200.0)
    d = WithBeneficial(base, 0.03, 12.0)
    want = 0.97 * ex.mean_g(base) + 0.03 * kernel(n).g(12.0)
    assert_allclose(ex.mean_g(d), want, rtol=1e-14)
    # weights @ table + beneficial part reproduces mean_g for every family
    for dfe in (
        base,
        d,
        LognormalDfe(2.0, 1.0),
        LognormalDfe(2.0, 0.1),
        DiscreteDfe((0.1, 0.2, 0.3, 0.4)),
    ):
        lin = ex.weights(dfe) @ ex.table(dfe) + ex.beneficial_part(dfe)
        assert_allclose(lin, ex.mean_g(dfe), rtol=1e-13)
    assert ex.table(base) is ex.G
    assert ex.G.shape == (ex.t.size + 2, n - 1)


def test_mean_g_grad():
    # Central differences against a wider-step finite difference (consistency) and the
    # exact linearity of the discrete family.
    n = 15
    ex = expectation(n)
    d = WithBeneficial(GammaDfe(0.5, 30.0), 0.05, 8.0)
    J = ex.mean_g_grad(d)
    assert J.shape == (4, n - 1)
    for k, name in enumerate(d.param_names):
        v = d.params[name]
        h = 1e-4 * v
        fd = (
            ex.mean_g(d.with_params(**{name: v + h})) - ex.mean_g(d.with_params(**{name: v - h}))
        ) / (2 * h)
        assert_allclose(J[k], fd, rtol=1e-5, atol=1e-12)
    dd = DiscreteDfe((0.1, 0.2, 0.3, 0.4))
    assert_allclose(ex.mean_g_grad(dd), ex.band_means(), rtol=1e-15)


def test_param_names_and_with_params():
    g = GammaDfe(0.3, 10.0)
    assert g.param_names == ("shape", "mean") and g.params == {"shape": 0.3, "mean": 10.0}
    assert LognormalDfe(1.0, 2.0).param_names == ("mu", "sigma")
    dd = DiscreteDfe((0.25,) * 4)
    assert dd.param_names == ("mass_0", "mass_1", "mass_2", "mass_3")
    w = WithBeneficial(g, 0.1, 5.0)
    assert w.param_names == ("shape", "mean", "p_b", "s_b")
    assert w.with_params(mean=20.0, p_b=0.2) == WithBeneficial(GammaDfe(0.3, 20.0), 0.2, 5.0)
    assert w.family == "gamma+beneficial"


def test_sample_S_gamma_moments():
    # Monte Carlo: mean of -S equals S-bar; variance S-bar^2 / beta (gamma moments).
    rng = np.random.default_rng(2)
    S = sample_S(GammaDfe(2.0, 50.0), 400_000, rng)
    assert np.all(S < 0)
    assert abs(-S.mean() / 50.0 - 1) < 4.5 * math.sqrt(1 / 2.0 / S.size)
    assert abs(S.var() / (50.0**2 / 2.0) - 1) < 0.02
    S2 = sample_S(WithBeneficial(GammaDfe(2.0, 50.0), 0.3, 7.0), 100_000, rng)
    frac = np.mean(S2 == 7.0)
    assert abs(frac - 0.3) < 4.5 * math.sqrt(0.3 * 0.7 / S2.size)
    assert fixation_ratio(7.0) > 1
