"""Expected spectra under a size history (driftband.prf.history) against outside references.

References, each named beside its check:
- equilibrium PRF spectra (Sawyer & Hartl 1992) as computed by driftband.prf.SfsKernel;
- the neutral spectrum under any size history from coalescent branch lengths: E[T_k] by
  Tavaré's (1984) alternating sums for the number of lineages (from memory; checked here
  against a pure-death chain by matrix exponentials) and E[xi_i] = (theta/2) sum_k k E[T_k]
  C(n-i-1, k-2) / C(n-1, k-1) (Fu 1995; Griffiths & Tavaré 1998, from memory), with
  mpmath for the alternating sums (Polanski & Kimmel 2003 use the same sums);
- msprime coalescent simulations (Baumdicker et al. 2022), branch-mode spectra;
- an exact discrete Wright-Fisher chain built here (fitnesses 1 : 1+s : 1+2s, binomial
  drift, new mutants each generation, hypergeometric sampling).
"""

from __future__ import annotations

import math

import mpmath as mp
import numpy as np
import pytest
from scipy.linalg import expm
from scipy.stats import binom, hypergeom

from driftband.exceptions import OptionError
from driftband.prf.expected import SfsKernel
from driftband.prf.history import (
    ConstantSize,
    ExponentialChange,
    HistorySfs,
    OneChange,
    TwoChanges,
    history_sfs,
)


# -- neutral references ------------------------------------------------------------------
def _first_coal_integrals(n: int, lam) -> dict[int, mp.mpf]:
    """int_0^inf exp(-C(j,2) Lambda(t)) dt for j = 2..n; ``lam(j)`` returns it."""
    return {j: lam(j) for j in range(2, n + 1)}


def _piecewise_lam(epochs):
    """``epochs``: (duration or None, nu) from the present backwards (None = forever)."""

    def lam(j: int) -> mp.mpf:
        c = mp.mpf(j) * (j - 1) / 2
        tot, big_l = mp.mpf(0), mp.mpf(0)
        for dur, nu in epochs:
            r = c / mp.mpf(nu)
            if dur is None:
                tot += mp.e ** (-c * big_l) / r
            else:
                tot += mp.e ** (-c * big_l) * (1 - mp.e ** (-r * mp.mpf(dur))) / r
                big_l += mp.mpf(dur) / mp.mpf(nu)
        return tot

    return lam


def _tavare_ETk(n: int, lam) -> dict[int, mp.mpf]:
    """E[T_k], k = 2..n: P(A_n(t) = k) = sum_{j>=k} e^{-C(j,2)Lambda(t)} (-1)^{j-k} (2j-1)
    k_(j-1) n_[j] / (k! (j-k)! n_(j))  (Tavaré 1984, eq. 6.1, from memory)."""
    integ = _first_coal_integrals(n, lam)
    out = {}
    for k in range(2, n + 1):
        s = mp.mpf(0)
        for j in range(k, n + 1):
            s += (
                (-1) ** (j - k)
                * (2 * j - 1)
                * mp.rf(k, j - 1)
                * mp.ff(n, j)
                / (mp.factorial(k) * mp.factorial(j - k) * mp.rf(n, j))
            ) * integ[j]
        out[k] = s
    return out


def neutral_sfs(n: int, lam, dps: int = 50) -> np.ndarray:
    """E[xi_i] / theta_anc for i = 1..n-1 (time in 2 N_anc generations)."""
    with mp.workdps(dps):
        ET = _tavare_ETk(n, lam)
        res = []
        for i in range(1, n):
            s = sum(
                k * ET[k] * mp.binomial(n - i - 1, k - 2) / mp.binomial(n - 1, k - 1)
                for k in range(2, n - i + 2)
            )
            res.append(float(s / 2))
    return np.array(res)


def _ETk_death_chain(n: int, epochs) -> np.ndarray:
    """E[T_k] from the pure-death chain of lineage numbers (matrix exponentials)."""
    q_of = []
    for _, nu in epochs:
        q = np.zeros((n, n))
        for k in range(2, n + 1):
            r = k * (k - 1) / 2 / nu
            q[k - 1, k - 1], q[k - 1, k - 2] = -r, r
        q_of.append(q)
    p = np.zeros(n)
    p[n - 1] = 1.0
    acc = np.zeros(n)
    for (dur, _), q in zip(epochs, q_of, strict=True):
        if dur is None:
            acc[1:] += -np.linalg.solve(q[1:, 1:].T, p[1:])
        else:
            big = np.zeros((2 * n, 2 * n))
            big[:n, :n], big[:n, n:] = q, np.eye(n)
            e = expm(big * dur)
            acc += p @ e[:n, n:]
            p = p @ e[:n, :n]
    return acc


def _rel(a: np.ndarray, b: np.ndarray) -> float:
    """Worst relative error on entries holding at least 1e-6 of the total."""
    b = np.asarray(b)
    keep = b >= 1e-6 * b.sum(axis=-1, keepdims=True)
    return float(np.max(np.abs(a - b)[keep] / b[keep]))


# -- equilibrium -------------------------------------------------------------------------
def test_constant_size_is_the_equilibrium_prf():
    # Sawyer & Hartl (1992) spectra, as computed by SfsKernel
    S = np.array([-1e4, -30.0, -1.0, 0.0, 1e-9, 2.0, 100.0])
    for n in (2, 3, 25):
        assert np.allclose(
            HistorySfs(n, ConstantSize()).g(S), SfsKernel(n).g(S), rtol=1e-13, atol=0
        )


def test_change_to_the_same_size_is_the_equilibrium():
    # no change of size: the Sawyer & Hartl (1992) spectrum, to 1e-8 relative
    S = np.array([-300.0, -3.0, 0.0, 5.0])
    for hist in (OneChange(1.0, 0.3), TwoChanges(1.0, 0.1, 1.0, 0.2)):
        got = HistorySfs(12, hist).g(S)
        assert _rel(got, SfsKernel(12).g(S)) <= 1e-8


# -- neutral spectra under size changes --------------------------------------------------
def test_tavare_sums_agree_with_a_death_chain():
    # the test's own neutral reference: the alternating sums (from memory) against an
    # independent computation of E[T_k] by matrix exponentials
    n, epochs = 9, [(0.05, 2.0), (0.3, 0.1), (None, 1.0)]
    with mp.workdps(40):
        ET = _tavare_ETk(n, _piecewise_lam(epochs))
    chain = _ETk_death_chain(n, epochs)
    for k in range(2, n + 1):
        assert float(ET[k]) == pytest.approx(chain[k - 1], rel=1e-12)


@pytest.mark.parametrize(
    "hist, epochs",
    [
        (OneChange(0.1, 0.3), [(0.3, 0.1), (None, 1.0)]),
        (OneChange(50.0, 0.01), [(0.01, 50.0), (None, 1.0)]),
        (OneChange(0.01, 0.002), [(0.002, 0.01), (None, 1.0)]),
        (TwoChanges(0.05, 0.02, 3.0, 0.1), [(0.1, 3.0), (0.02, 0.05), (None, 1.0)]),
    ],
)
def test_neutral_piecewise_constant_against_closed_form(hist, epochs):
    # Tavaré (1984) / Polanski & Kimmel (2003) closed form with mpmath (see module doc)
    n = 10
    ref = neutral_sfs(n, _piecewise_lam(epochs))
    got = HistorySfs(n, hist, reference="ancestral").g(0.0)
    assert _rel(got, ref) <= 1e-5
    # the current-size reference divides S and theta by nu_now
    cur = HistorySfs(n, hist).g(0.0)
    assert np.allclose(cur, got / hist.nu_now, rtol=1e-12)


def test_neutral_exponential_growth_against_closed_form():
    # Tavaré (1984) sums with Lambda(t) of an exponential size change (mpmath quadrature)
    n, nu, tau = 8, 20.0, 0.1
    r = math.log(nu) / tau  # N(t ago) = nu * exp(-r t) until tau

    def big_lam(t):
        if t <= tau:
            return (mp.e ** (r * t) - 1) / (r * nu)
        return (mp.e ** (r * tau) - 1) / (r * nu) + (t - tau)

    def lam(j):
        c = mp.mpf(j) * (j - 1) / 2
        head = mp.quad(lambda t: mp.e ** (-c * big_lam(t)), [0, tau / 4, tau / 2, tau])
        return head + mp.e ** (-c * big_lam(tau)) / c

    with mp.workdps(30):
        ref = neutral_sfs(n, lam, dps=30)
    got = HistorySfs(n, ExponentialChange(nu, tau), reference="ancestral").g(0.0)
    assert _rel(got, ref) <= 1e-5


def test_neutral_one_change_against_msprime():
    # msprime coalescent (Baumdicker et al. 2022): expected branch-mode spectrum over
    # replicates; tolerance 4.5 standard errors per class
    msprime = pytest.importorskip("msprime")
    n, N_now, nu, tau = 8, 500, 0.5, 0.2
    N_anc = N_now / nu
    dem = msprime.Demography()
    dem.add_population(name="p", initial_size=N_now)
    dem.add_population_parameters_change(time=tau * 2 * N_anc, initial_size=N_anc)
    reps = msprime.sim_ancestry(
        samples={"p": n // 2}, ploidy=2, demography=dem, num_replicates=6000, random_seed=14
    )
    afs = np.array(
        [
            ts.allele_frequency_spectrum(mode="branch", polarised=True, span_normalise=True)[1:n]
            for ts in reps
        ]
    )
    afs /= 4 * N_now  # branch length (generations) / (4 N mu) per unit mu
    mean, se = afs.mean(axis=0), afs.std(axis=0, ddof=1) / math.sqrt(afs.shape[0])
    got = history_sfs(n, 0.0, OneChange(nu, tau))
    assert np.all(np.abs(got - mean) <= 4.5 * se), (got, mean, se)


# -- selection and a size change against the exact Wright-Fisher chain --------------------
def _wf_matrix(two_n_from: int, two_n_to: int, s: float) -> np.ndarray:
    """Transient-to-transient transition matrix (counts 1..2N-1) of one generation."""
    p = np.arange(1, two_n_from) / two_n_from
    pp = p * (1 + s + s * p) / (1 + 2 * s * p)
    k = np.arange(1, two_n_to)
    return binom.pmf(k[None, :], two_n_to, pp[:, None])


def wf_sfs(n: int, N_anc: int, N_now: int, gens: int, s: float) -> np.ndarray:
    """E[xi_i] / (4 N_now mu L): equilibrium at N_anc, then ``gens`` generations at N_now,
    with 2 N_t mu L new mutants (count 1) in each generation's offspring."""
    P = _wf_matrix(2 * N_anc, 2 * N_anc, s)
    v = np.zeros(2 * N_anc - 1)
    v[0] = 2 * N_anc
    c = np.linalg.solve((np.eye(P.shape[0]) - P).T, v)
    if gens:
        c = c @ _wf_matrix(2 * N_anc, 2 * N_now, s)
        c[0] += 2 * N_now
        P2 = _wf_matrix(2 * N_now, 2 * N_now, s)
        for _ in range(gens - 1):
            c = c @ P2
            c[0] += 2 * N_now
    two_n = 2 * (N_now if gens else N_anc)
    j = np.arange(1, two_n)
    samp = hypergeom.pmf(np.arange(1, n)[:, None], two_n, j[None, :], n)
    return samp @ c / (4 * (N_now if gens else N_anc))


@pytest.mark.parametrize(
    "nu, tau, S, sizes",
    [
        (0.5, 0.1, -8.0, (120, 240)),  # decline, purifying selection
        (3.0, 0.2, -20.0, (60, 120)),  # expansion, stronger purifying selection
        (0.5, 0.1, 5.0, (120, 240)),  # decline, positive selection
    ],
)
def test_selection_and_size_change_against_wright_fisher_chain(nu, tau, S, sizes):
    # exact discrete Wright-Fisher chain (built above). It differs from the diffusion by
    # O(1/N) (common practice; measured up to ~8 % on the rarest high class at N = 120),
    # so the chain at N and 2N is extrapolated in 1/N (Richardson) and must then agree to
    # O(1/N^2): within 1 % and at least 4 times closer than the chain at 2N.
    n = 6
    w = []
    for N_anc in sizes:
        N_now = int(N_anc * nu)
        w.append(wf_sfs(n, N_anc, N_now, int(round(tau * 2 * N_anc)), S / (4 * N_now)))
    dif = HistorySfs(n, OneChange(nu, tau)).g(S)
    raw = np.max(np.abs(w[1] / dif - 1))
    ext = np.max(np.abs((2 * w[1] - w[0]) / dif - 1))
    assert raw <= 15.0 / min(sizes[1], sizes[1] * nu)
    assert ext <= 0.01 and ext <= raw / 4, (raw, ext)


# -- limits and edge cases ---------------------------------------------------------------
def _unchecked(cls, **kw):
    """A history outside the validated ranges (to test limits)."""
    obj = object.__new__(cls)
    for k, v in kw.items():
        object.__setattr__(obj, k, v)
    return obj


def test_old_change_reaches_the_new_equilibrium():
    # exact statement: long after a change to nu, the spectrum on the ancestral reference is
    # nu * g_eq(nu S) (equilibrium at the new size: theta and S both scale by nu)
    S = np.array([-200.0, -2.0, 0.0, 3.0])
    hist = _unchecked(OneChange, nu=0.5, tau=40.0)
    got = HistorySfs(9, hist, reference="ancestral").g(S)
    assert _rel(got, 0.5 * SfsKernel(9).g(0.5 * S)) <= 1e-8


def test_very_recent_change_keeps_the_ancestral_spectrum():
    # a change 1e-9 ago has touched only frequencies below ~1e-9: the Sawyer & Hartl
    # spectrum at the ancestral size
    S = np.array([-50.0, 0.0, 4.0])
    hist = _unchecked(OneChange, nu=4.0, tau=1e-9)
    got = HistorySfs(9, hist, reference="ancestral").g(S)
    assert _rel(got, SfsKernel(9).g(S)) <= 1e-6


def test_strong_purifying_selection_is_at_the_current_equilibrium():
    # |S| = 1e4 on the current size: variants live ~2/|S| of 2N generations, far less than
    # tau, so the spectrum is the current equilibrium (Sawyer & Hartl 1992)
    got = HistorySfs(20, OneChange(0.2, 0.5)).g(-1e4)
    assert np.all(np.isfinite(got)) and np.all(got >= 0)
    assert _rel(got, SfsKernel(20).g(-1e4)) <= 1e-8


def test_small_S_is_continuous_with_neutral():
    k = HistorySfs(7, OneChange(3.0, 0.05))
    g = k.g(np.array([0.0, 1e-9, -1e-9]))
    assert np.allclose(g[1], g[0], rtol=1e-8) and np.allclose(g[2], g[0], rtol=1e-8)


@pytest.mark.parametrize("n", [2, 3])
def test_tiny_samples_neutral(n):
    # closed form of Tavaré (1984) (see module doc)
    epochs = [(0.04, 0.2), (None, 1.0)]
    ref = neutral_sfs(n, _piecewise_lam(epochs))
    got = HistorySfs(n, OneChange(0.2, 0.04), reference="ancestral").g(0.0)
    assert _rel(got, ref) <= 1e-5


def test_large_sample_neutral():
    # n = 200: E[T_k] from the pure-death chain of lineage numbers (matrix exponentials;
    # Tavaré 1984's sums lose ~120 digits here), then the branch-length formula (Fu 1995)
    n, nu, tau = 200, 4.0, 0.05
    ET = _ETk_death_chain(n, [(tau, nu), (None, 1.0)])
    k = np.arange(2, n + 1)
    ref = np.array(
        [
            np.sum(
                k[: n - i]
                * ET[1 : n - i + 1]
                * np.exp(
                    [
                        math.lgamma(n - i)
                        - math.lgamma(kk - 1)
                        - math.lgamma(n - i - kk + 2)
                        - math.lgamma(n)
                        + math.lgamma(kk)
                        + math.lgamma(n - kk + 1)
                        for kk in k[: n - i]
                    ]
                )
            )
            / 2
            for i in range(1, n)
        ]
    )
    got = HistorySfs(n, OneChange(nu, tau), reference="ancestral").g(0.0)
    assert _rel(got, ref) <= 1e-5


# -- validation and mapping --------------------------------------------------------------
@pytest.mark.parametrize(
    "make, words",
    [
        (lambda: OneChange(0.0, 0.1), ["`nu`", "positive", "got 0.0"]),
        (lambda: OneChange(200.0, 0.1), ["`nu`", "[0.01, 100]", "got 200"]),
        (lambda: OneChange(2.0, 10.0), ["`tau`", "[0.001, 5]", "got 10"]),
        (lambda: TwoChanges(0.5, 0.1, 2.0, -1.0), ["`tau2`", "positive", "got -1.0"]),
        (lambda: ExponentialChange(0.005, 0.1), ["`nu`", "[0.01, 100]", "got 0.005"]),
        (lambda: OneChange("big", 0.1), ["`nu`", "number", "'big'"]),
        (lambda: HistorySfs(5, ConstantSize(), reference="mean"), ["`reference`", "'mean'"]),
    ],
)
def test_validation_messages(make, words):
    with pytest.raises(OptionError) as err:
        make()
    for w in words:
        assert w in str(err.value)


def test_simulator_epochs():
    # driftband.simulate histories: (generations_ago, diploid_size), oldest = ancestral
    from driftband.simulate._model import PopulationModel

    ep = OneChange(0.5, 0.1).simulator_epochs(1000)
    assert ep == ((0, 500), (200, 1000))
    assert TwoChanges(0.1, 0.05, 2.0, 0.01).simulator_epochs(1000) == (
        (0, 2000),
        (20, 100),
        (120, 1000),
    )
    pm = PopulationModel(name="a", n=10, epochs=ep)
    assert pm.ancestral_size == 1000 and pm.present_size == 500
