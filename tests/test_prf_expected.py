"""Expected spectra of the equilibrium Poisson random field (driftband.prf.expected).

References: mpmath high-precision quadrature of the Sawyer & Hartl (1992) integral
(reference_checks/mpmath_prf.py, 30 digits, no driftband code); scipy's hyp1f1 through
Kummer's closed form (Euler's integral, DLMF 13.4.1, and Kummer's transformation, from
memory); the neutral spectrum theta/i (Fu 1995, from memory); the small-S expansion and
the S -> +inf limit, derived by hand from the Sawyer-Hartl weight (derivations beside the
tests); and the large-|S| expansions of Kummer's function, which terminate for integer
parameters (DLMF section 13.7(i), from memory; checked here against mpmath.hyp1f1 at 60
digits for n = 10, |S| = 100 and 1000: equal in double precision).
"""

import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from driftband.prf import (
    SfsKernel,
    expected_sfs,
    fixation_ratio,
    fold_sfs,
    kernel,
    log_fixation_ratio,
    misorient,
)

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "reference_checks"))
import mpmath_prf as ref

# --------------------------------------------------------------------------- mpmath
# (n, S values, classes); the classes cover both ends and the middle of the spectrum.
MP_GRID = [
    (4, (-1e5, -1e3, -10.0, -1e-8, 1e-8, 1.0, 1e3), (1, 2, 3)),
    (10, (-1e5, -1e2, -1.0, -1e-4, 1e-6, 10.0, 1e3), (1, 5, 9)),
    (50, (-1e4, -30.0, -1e-2, 0.1, 300.0), (1, 25, 49)),
    (200, (-1e5, -100.0, 1e-8, 1e3), (1, 100, 199)),
    (1000, (-1e3, 3.0), (1, 500, 999)),
    (2000, (-1e5, -1e-6, 1e3), (1, 1000, 1999)),
]
MP_CASES = [(n, S, cl) for n, Ss, cl in MP_GRID for S in Ss]


@pytest.mark.parametrize("n,S,classes", MP_CASES)
def test_matches_mpmath_quadrature(n, S, classes):
    # Source: mpmath.quad of the Sawyer-Hartl integral at 30 digits (reference_checks).
    # Checked to 1e-10 relative over n <= 2000, S in [-1e5, 1e3] (driftband.prf.expected
    # documents about 1e-13).
    v, logv = ref.sfs(n, S, classes)
    idx = np.array(classes) - 1
    g = kernel(n).g(S)[idx]
    lg = kernel(n).log_g(S)[idx]
    ok = v > 1e-280
    assert_allclose(g[ok], v[ok], rtol=1e-10, atol=0)
    # log-space variant everywhere, including values far below the double range
    assert_allclose(lg, logv, rtol=0, atol=1e-10)


def test_log_g_far_below_double_range():
    # Source: mpmath (as above). n = 1000, S = -1e5: g_999 is about 1e-2400.
    v, logv = ref.sfs(1000, -1e5, (500, 999))
    assert logv[-1] < -5000
    lg = kernel(1000).log_g(-1e5)[[499, 998]]
    assert_allclose(lg, logv, rtol=1e-12, atol=0)
    assert kernel(1000).g(-1e5)[998] == 0.0  # underflows in g; log_g keeps it


@pytest.mark.slow
@pytest.mark.parametrize("n", [4, 10, 50, 200, 1000, 2000])
def test_matches_mpmath_wide_grid(n):
    # Source: mpmath quadrature (reference_checks/mpmath_prf.py); S = -1e5..1e5, with
    # ten classes per n.
    Ss = [-(10.0**e) for e in range(-8, 6)] + [10.0**e for e in range(-8, 6)] + [0.0]
    cl = sorted({1, 2, 3, n // 10, n // 4, n // 2, 3 * n // 4, n - 3, n - 2, n - 1} - {0})
    cl = [c for c in cl if 1 <= c <= n - 1]
    for S in Ss:
        v, logv = ref.sfs(n, S, cl)
        g = kernel(n).g(S)[np.array(cl) - 1]
        ok = v > 1e-280
        assert_allclose(g[ok], v[ok], rtol=1e-10, atol=0, err_msg=f"S={S}")
        assert_allclose(kernel(n).log_g(S)[np.array(cl) - 1], logv, atol=1e-10)


# -------------------------------------------------------------------- scipy hyp1f1
@pytest.mark.parametrize("n", [10, 50, 200])
@pytest.mark.parametrize("S", [-1e3, -100.0, -7.5, -1.0, 1.0, 7.5, 100.0, 1e3])
def test_matches_scipy_hyp1f1_kummer_form(n, S):
    # Source: scipy.special.hyp1f1 in Kummer's form, argument -|S| (a second,
    # double-precision oracle; accurate for |S| >= 1 but not below 1e-2, where 1 - M
    # cancels). Implementations of hyp1f1 change between versions, so this also
    # regression-tests scipy.
    want = ref.kummer_scipy(n, S)
    ok = want > 1e-280
    assert_allclose(kernel(n).g(S)[ok], want[ok], rtol=1e-10)


# ------------------------------------------------------------------------- limits
@pytest.mark.parametrize("n", [2, 3, 10, 101, 1000])
def test_neutral_limit_one_over_i(n):
    # Source: Fu (1995), E[xi_i] = theta / i for the neutral standard coalescent
    # (from memory); the Sawyer-Hartl weight is 1 - x at S = 0.
    want = 1.0 / np.arange(1, n)
    assert_allclose(expected_sfs(n, 0.0), want, rtol=1e-12)
    for S in (1e-300, -1e-300, 1e-12, -1e-12, 1e-10, -1e-10):
        assert_allclose(expected_sfs(n, S), want, rtol=1e-9)


@pytest.mark.parametrize("n", [10, 30, 200])
@pytest.mark.parametrize("S", [1e-3, -1e-3, 1e-4, -1e-4])
def test_small_S_expansion(n, S):
    # Source: derived by hand, g_i = 1/i + S/(2(n+1)) + O(S^2): the Sawyer-Hartl weight
    # (1 - e^{-S(1-x)})/(1 - e^{-S}) is (1-x)(1 + S x/2 + O(S^2)), C(n,i) B(i, n-i+1) = 1/i
    # and C(n,i) B(i+1, n-i+1) = 1/(n+1).
    i = np.arange(1, n)
    lin = 1.0 / i + S / (2 * (n + 1))
    err = np.abs(expected_sfs(n, S) / lin - 1)
    # second-order remainder: relative error O(S^2) (a bound of 2 S^2 here; about
    # 0.07 S^2 at n = 30), and the linear term is well above rounding, so it is checked
    assert np.all(err < 2 * S * S)
    assert np.all(np.abs(expected_sfs(n, S) - 1.0 / i) > 0.4 * abs(S) / (2 * (n + 1)))


@pytest.mark.parametrize("n", [4, 10, 50, 200])
def test_strongly_beneficial_limit(n):
    # Source: derived by hand: as S -> +inf the weight tends to 1 on [0, 1), so
    # g_i -> C(n,i) B(i, n-i) = n/(i(n-i)) = 1/i + 1/(n-i).
    i = np.arange(1, n)
    assert_allclose(expected_sfs(n, np.inf), n / (i * (n - i)), rtol=1e-13)


def _series(ratio, nterms):
    """sum_{k < nterms} of terms with term_0 = 1 and term_{k+1} = term_k * ratio(k), stopped
    once terms fall below 1e-40 of the sum (mpmath numbers)."""
    import mpmath as mp

    term = tot = mp.mpf(1)
    for k in range(nterms - 1):
        term *= ratio(k)
        tot += term
        if abs(term) < mp.mpf(10) ** -40 * abs(tot):
            break
    return tot


def _asym_pos(n, S):
    """Terminating large-S expansion for S > 0 (exact up to O(e^-S)), in mpmath.

    g_i(S) = n/(i(n-i)) [1 - (n-1)!/(i-1)! S^-(n-i) sum_{k<i} (n-i)_k (1-i)_k / k! S^-k],
    from the large-|z| expansion of M(n-i, n, -S) (DLMF section 13.7(i), from memory).
    """
    import mpmath as mp

    out = []
    with mp.workdps(60):
        S = mp.mpf(S)
        for i in range(1, n):
            tot = _series(lambda k, i=i: (n - i + k) * (k + 1 - i) / ((k + 1) * S), i)
            corr = mp.factorial(n - 1) / mp.factorial(i - 1) * S ** (-(n - i)) * tot
            out.append(float(mp.mpf(n) / (i * (n - i)) * (1 - corr)))
    return np.array(out)


def _asym_neg(n, t):
    """Terminating expansion of ln g_i(-t) for t > 0 (exact up to O(e^-t)), in mpmath.

    g_i(-t) = C(n,i) (i-1)! t^-i sum_{k<n-i} (i)_k (i+1-n)_k / k! t^-k, from the
    large-|z| expansion of M(i, n, -t) (DLMF section 13.7(i), from memory).
    """
    import mpmath as mp

    out = []
    with mp.workdps(60):
        t = mp.mpf(t)
        for i in range(1, n):
            tot = _series(lambda k, i=i: (i + k) * (i + 1 - n + k) / ((k + 1) * t), n - i)
            out.append(mp.log(mp.binomial(n, i) * mp.factorial(i - 1) * tot) - i * mp.log(t))
    return np.array([float(v) for v in out])


@pytest.mark.parametrize("n,S", [(10, 100.0), (10, 1e5), (50, 1e3), (50, 1e5), (200, 1e5)])
def test_large_positive_S_expansion(n, S):
    # Source: terminating large-|z| expansion of Kummer's M for integer parameters
    # (DLMF section 13.7(i), from memory), evaluated with mpmath.
    assert_allclose(expected_sfs(n, S), _asym_pos(n, S), rtol=1e-12)


@pytest.mark.parametrize(
    "n,t", [(10, 1e3), (10, 1e8), (50, 1e4), (200, 1e5), (200, 1e8), (1000, 1e8)]
)
def test_large_negative_S_expansion(n, t):
    # Source: g_i(-t) = C(n,i)(i-1)! t^-i sum_k (i)_k (i+1-n)_k / k! t^-k + O(e^-t)
    # (DLMF section 13.7(i), from memory), evaluated with mpmath; covers |S| up to 1e8.
    assert_allclose(kernel(n).log_g(-t), _asym_neg(n, t), rtol=0, atol=1e-11)


def test_g1_for_strong_purifying_selection():
    # Source: the terminating expansion above at i = 1: g_1(-t) = n/t (1 - (n-2)/t
    # + O(n^2/t^2)), so g_1 ~ n/t for S = -t -> -inf.
    for n in (10, 200):
        t = 1e7
        assert_allclose(expected_sfs(n, -t)[0], n / t, rtol=2 * n / t)
        assert_allclose(expected_sfs(n, -t)[0], n / t * (1 - (n - 2) / t), rtol=(n / t) ** 2)


# ---------------------------------------------------------------- shapes and values
def test_shapes_and_finiteness():
    k = SfsKernel(12)
    S = np.array([[-np.inf, -1e300, -1e5], [0.0, 1e300, np.inf]])
    g = k.g(S)
    assert g.shape == (2, 3, 11)
    assert np.all(np.isfinite(g)) and np.all(g >= 0)
    assert np.all(g[0, 0] == 0.0)  # S = -inf: no polymorphism
    assert k.g(0.5).shape == (11,)
    assert k.log_g([[1.0]]).shape == (1, 1, 11)
    assert np.all(np.isnan(k.g(np.nan)))
    # vectorised evaluation equals one-at-a-time evaluation (to rounding: BLAS blocks a
    # matrix product differently from a vector product)
    Ss = np.linspace(-50, 50, 7)
    assert_allclose(k.g(Ss), np.array([k.g(s) for s in Ss]), rtol=1e-13)


def test_monotone_in_S_and_watterson_sum():
    # Common practice: purifying selection lowers every class; at S = 0 the total is
    # Watterson's a_n = sum 1/i.
    g = expected_sfs(30, np.array([-100.0, -10.0, -1.0, 0.0, 1.0, 10.0]))
    assert np.all(np.diff(g, axis=0) > 0)
    assert_allclose(g[3].sum(), sum(1.0 / i for i in range(1, 30)), rtol=1e-13)


def test_kernel_cache_and_bad_n():
    assert kernel(37) is kernel(37)
    with pytest.raises(ValueError, match="n"):
        SfsKernel(1)
    with pytest.raises(TypeError):
        SfsKernel(4.5)


# ---------------------------------------------------------- folding and misorienting
def test_fold_by_definition():
    # Source: definition of the folded (minor-allele) spectrum, common practice:
    # eta_j = E_j + E_{n-j}, and eta_{n/2} = E_{n/2} for even n.
    rng = np.random.default_rng(5)
    for n in (2, 3, 4, 9, 10):
        E = rng.random((3, n - 1))
        eta = fold_sfs(E, n)
        assert eta.shape == (3, n // 2)
        for j in range(1, n // 2 + 1):
            want = E[:, j - 1] + (E[:, n - j - 1] if j != n - j else 0.0)
            assert_allclose(eta[:, j - 1], want, rtol=1e-15)
        assert_allclose(eta.sum(axis=1), E.sum(axis=1), rtol=1e-14)
    with pytest.raises(ValueError, match="n - 1"):
        fold_sfs(np.ones(5), 5)


def test_misorientation():
    # Source: definition (common practice): a share eps of sites has its ancestral allele
    # misidentified, so i derived copies are read as n - i: xi_i = (1-eps) E_i
    # + eps E_{n-i}; folding merges i and n - i, so it removes eps.
    n = 20
    E = expected_sfs(n, -5.0)
    for eps in (0.0, 0.03, 0.5, 1.0):
        xi = misorient(E, eps)
        i = np.arange(1, n)
        assert_allclose(xi, (1 - eps) * E[i - 1] + eps * E[n - i - 1], rtol=1e-15)
        assert_allclose(fold_sfs(xi, n), fold_sfs(E, n), rtol=1e-15)
    assert_allclose(misorient(E, 1.0), E[::-1], rtol=1e-15)
    # one eps per spectrum broadcasts over a stack of spectra
    stack = misorient(np.stack([E, E]), np.array([0.0, 0.1]))
    assert_allclose(stack[1], misorient(E, 0.1))
    with pytest.raises(ValueError, match="eps"):
        misorient(E, -0.1)


# ------------------------------------------------------------------ fixation ratio
@pytest.mark.parametrize(
    "S", [-1e5, -745.0, -700.0, -40.0, -1.0, -1e-9, 0.0, 1e-9, 1.0, 4.0, 40.0, 1e3]
)
def test_fixation_ratio_against_mpmath(S):
    # Source: Kimura (1962) u/u0 = S/(1 - e^-S), evaluated with mpmath at 30 digits.
    import mpmath as mp

    with mp.workdps(30):
        Sm = mp.mpf(S)
        want = mp.mpf(1) if S == 0 else Sm / -mp.expm1(-Sm)
        assert_allclose(float(log_fixation_ratio(S)), float(mp.log(want)), atol=1e-14)
        if want > 1e-300:
            assert_allclose(float(fixation_ratio(S)), float(want), rtol=1e-14)
    assert fixation_ratio(np.array([S])).shape == (1,)


def test_fixation_ratio_table_values():
    # Source: Kimura (1962) u/u0 = S/(1 - e^-S) (from memory), worked by hand with
    # e = 2.71828: 1/(1 - e^-1) = 1.582, and r(-S) = r(S) e^-S gives 0.582 at S = -1;
    # 2.313 / 0.313 at S = +-2; 4.075 / 0.0746 at S = +-4.
    assert_allclose(
        fixation_ratio([1, -1, 2, -2, 4, -4]),
        [1.582, 0.582, 2.313, 0.313, 4.075, 0.0746],
        rtol=2e-3,
    )
    assert fixation_ratio(np.inf) == np.inf and fixation_ratio(-np.inf) == 0.0
    assert log_fixation_ratio(-np.inf) == -np.inf and log_fixation_ratio(np.inf) == np.inf
