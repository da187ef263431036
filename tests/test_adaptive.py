"""McDonald–Kreitman table and α estimators on worked examples."""

import math

import numpy as np
import pytest
from scipy import stats

from driftband.fit.adaptive import (
    MIN_SUBSTITUTIONS,
    adaptive_replicate,
    adaptive_summary,
    alpha_asymptotic,
    alpha_classic,
    alpha_dfe,
    mk_table,
    small_count_caveat,
)
from driftband.fit.likelihood import SpectrumPair
from driftband.fit.mle import FitResult, fit_model
from driftband.fit.models import DfeModel
from driftband.prf import DfeExpectation, GammaDfe, LognormalDfe, WithBeneficial
from driftband.prf.dfe import mean_fixation_ratio

# McDonald & Kreitman (1991), Drosophila Adh: fixed replacement 7, fixed synonymous 17,
# polymorphic replacement 2, polymorphic synonymous 42 (counts from memory).
ADH = {
    "divergent_selected": 7,
    "divergent_neutral": 17,
    "polymorphic_selected": 2,
    "polymorphic_neutral": 42,
}


def _pair_with(pn, ps, dn, ds, n=10):
    sel = np.zeros(n - 1)
    neu = np.zeros(n - 1)
    sel[0], neu[0] = pn, ps
    return SpectrumPair(n, False, neu, sel, 1000.0, 1000.0, float(ds), float(dn))


def test_mk_table_fisher_matches_scipy():
    mk = mk_table(
        _pair_with(
            ADH["polymorphic_selected"],
            ADH["polymorphic_neutral"],
            ADH["divergent_selected"],
            ADH["divergent_neutral"],
        )
    )
    odds, p = stats.fisher_exact([[7, 17], [2, 42]])  # scipy.stats.fisher_exact
    assert mk["fisher_p"] == pytest.approx(p, rel=1e-12)
    assert mk["fisher_odds_ratio"] == pytest.approx(odds)
    # The Adh table is the textbook significant MK result (p < 0.01; common practice).
    assert mk["fisher_p"] < 0.01


def test_alpha_classic_adh():
    # Smith & Eyre-Walker (2002): alpha = 1 - Ds*Pn/(Dn*Ps) = 1 - 34/294 for Adh.
    assert alpha_classic(2, 42, 7, 17) == pytest.approx(1 - 34 / 294, rel=1e-12)
    assert alpha_classic(2, 42, 0, 17) != alpha_classic(2, 42, 0, 17)  # NaN when Dn = 0


def test_alpha_dfe_zero_when_divergence_matches_fixation_ratio():
    # Eyre-Walker & Keightley (2009): with dN/dS equal to the DFE's non-adaptive
    # substitution ratio r, alpha = 0 and omega_a = 0.
    r = 0.2
    d = SpectrumPair(10, False, np.ones(9), np.ones(9), 1e4, 2e4, 100.0, 2 * 100.0 * r)
    out = alpha_dfe(d, r)
    assert out["alpha"] == pytest.approx(0.0, abs=1e-12)
    assert out["omega_a"] == pytest.approx(0.0, abs=1e-12)


def test_alpha_asymptotic_recovers_plateau():
    # Messer & Petrov (2013): alpha(x) = a + b exp(-c x); at x -> 1 it approaches the
    # true alpha. Build counts that follow the curve exactly.
    n = 40
    x = np.arange(1, n) / n
    a, b, c = 0.4, -0.6, 6.0
    alpha_x = a + b * np.exp(-c * x)
    neu = 1e4 / np.arange(1, n)
    ds, dn = 1000.0, 800.0
    sel = (1 - alpha_x) * neu * dn / ds
    d = SpectrumPair(n, False, neu, sel, 1e6, 1e6, ds, dn)
    out = alpha_asymptotic(d, x_min=0.0)
    assert out["fit"] == "exponential"
    assert out["alpha"] == pytest.approx(a + b * np.exp(-c), abs=1e-6)


# ------------------------------------------------------------ α with a beneficial class
def test_alpha_dfe_beneficial_worked_case():
    # Worked by hand. Definitions: Eyre-Walker & Keightley (2009), from memory: the
    # non-adaptive substitution rate of selected sites relative to neutral is
    # omega_na = (1 - p_b) r_del with r_del = E[u(S)] over the deleterious part,
    # u(S) = S/(1 - e^-S) (Kimura 1962); alpha = 1 - omega_na d_S/d_N,
    # omega_a = d_N/d_S - omega_na.
    # DFE: deleterious point mass at S = -2, beneficial mass p_b = 0.2 at S_b = 5.
    #   u(-2) = -2/(1 - e^2) = 2/(e^2 - 1) = 2/6.389056 = 0.3130353 = r_del
    #   u(5)  = 5/(1 - e^-5) = 5/0.9932621 = 5.033918
    #   omega_na = 0.8 * 0.3130353 = 0.2504282
    #   adaptive rate p_b u(S_b) = 0.2 * 5.033918 = 1.0067836
    #   r (whole DFE) = 0.2504282 + 1.0067836 = 1.2572118
    #   alpha_model = 1.0067836 / 1.2572118 = 0.800806
    # Divergence: L_N = L_S = 1e4, D_S = 100, D_N = 126 (d_N/d_S = 1.26):
    #   alpha = 1 - 0.2504282 * 100/126 = 1 - 0.198753 = 0.801247
    #   omega_a = 1.26 - 0.2504282 = 1.0095718
    # The old rule, 1 - r d_S/d_N with the whole-DFE r = 1.2572118, gives 0.002213.
    d = _pair_with(10, 10, 126, 100)
    d.sites_selected = d.sites_neutral = 1e4
    r_del = 2 / math.expm1(2)
    out = alpha_dfe(d, r_del, p_b=0.2, s_b=5.0)
    assert r_del == pytest.approx(0.3130353, abs=1e-7)
    assert out["omega_na"] == pytest.approx(0.2504282, abs=1e-7)
    assert out["alpha"] == pytest.approx(0.801247, abs=1e-6)
    assert out["omega_a"] == pytest.approx(1.0095718, abs=1e-7)
    assert out["omega"] == pytest.approx(1.26, abs=1e-12)
    assert out["alpha_model"] == pytest.approx(0.800806, abs=1e-6)
    # divergence exactly as the DFE predicts (D_N = 125.72118): both α agree (hand:
    # 1 - omega_na / r = p_b u(S_b) / r = alpha_model)
    d.fixed_selected = 100 * 1.2572118
    out = alpha_dfe(d, r_del, p_b=0.2, s_b=5.0)
    assert out["alpha"] == pytest.approx(out["alpha_model"], abs=1e-6)
    assert out["alpha"] == pytest.approx(0.800806, abs=1e-6)


def test_deleterious_fixation_ratio_exponential_plus_beneficial():
    # Worked by hand (as in tests/test_prf_dfe.py): t ~ Exp(1) gives
    # E[t/(e^t - 1)] = sum_k 1/(k+1)^2 = pi^2/6 - 1 (Euler's sum, common knowledge); the
    # beneficial mass does not enter r_del and adds p_b u(S_b) to the whole-DFE r.
    dfe = WithBeneficial(GammaDfe(1.0, 1.0), 0.1, 10.0)
    r_del = math.pi**2 / 6 - 1
    assert mean_fixation_ratio(dfe, "deleterious") == pytest.approx(r_del, rel=1e-13)
    u10 = 10 / -math.expm1(-10)
    assert mean_fixation_ratio(dfe) == pytest.approx(0.9 * r_del + 0.1 * u10, rel=1e-13)


def test_deleterious_fixation_ratio_mpmath():
    # Source: mpmath.quad of E[t/(e^t - 1)] over the lognormal density of t = -S (30
    # digits); the beneficial mass must not change it.
    import mpmath as mp

    mu, sigma = 1.0, 1.2
    with mp.workdps(30):

        def f(z):
            return mp.npdf(z) * mp.exp(mu + sigma * z) / mp.expm1(mp.exp(mu + sigma * z))

        want = float(mp.quad(f, list(range(-12, 13, 2))))
    got = mean_fixation_ratio(WithBeneficial(LognormalDfe(mu, sigma), 0.05, 30.0), "deleterious")
    assert got == pytest.approx(want, rel=1e-10)


def test_without_beneficial_class_nothing_changes():
    # Without a beneficial class p_b = 0: omega_na = r and alpha = 1 - r d_S/d_N, the
    # Eyre-Walker & Keightley (2009) rule as before; the DFE implies no α of its own.
    dfe = GammaDfe(0.3, 200.0)
    r = mean_fixation_ratio(dfe)
    assert mean_fixation_ratio(dfe, "deleterious") == r
    d = _pair_with(30, 60, 50, 80)
    out = alpha_dfe(d, r)
    assert out["alpha"] == pytest.approx(1 - r * 80 / 50, rel=1e-14)
    assert out["omega_a"] == pytest.approx(50 / 80 - r, rel=1e-14)
    assert math.isnan(out["alpha_model"])


def _beneficial_fit():
    """A gamma+beneficial fit to expected spectra (n = 8, one start: a wiring check)."""
    n, model = 8, DfeModel("gamma", beneficial=True)
    x0 = np.array([np.log(0.5), np.log(100.0), np.log(0.05 / 0.95), np.log(20.0)])
    dfe = model.to_dfe(x0)
    i = np.arange(1, n)
    xn, xs = 0.01 * 1e5 / i, 0.01 * 1e5 * DfeExpectation(n).mean_g(dfe)
    full = lambda x, L, dd: np.concatenate([[L - x.sum() - dd], x, [dd]])  # noqa: E731
    data = SpectrumPair.from_arrays(n, False, full(xn, 1e5, 300.0), full(xs, 1e5, 250.0), 1e5, 1e5)
    return data, fit_model(data, model, eps=0.0, starts=[x0], stderr=False)


def test_fit_carries_deleterious_ratio_and_alpha_uses_it():
    # The fit stores r_del of its own DFE; its α entry is alpha_dfe with (r_del, p_b, S_b);
    # a fit file written before r_del was stored gives it back from
    # r = (1 - p_b) r_del + p_b u(S_b) (the identity of the worked case above).
    data, f = _beneficial_fit()
    p_b, s_b = f.params["beneficial_fraction"], f.params["beneficial_S"]
    want = mean_fixation_ratio(
        WithBeneficial(GammaDfe(f.params["shape"], f.params["mean_abs_S"]), p_b, s_b), "deleterious"
    )
    assert f.fixation_ratio_deleterious == pytest.approx(want, rel=1e-12)
    assert f.fixation_ratio > f.fixation_ratio_deleterious
    ad = adaptive_summary(data, f)
    assert ad is not None
    hand = alpha_dfe(data, want, p_b, s_b)
    assert ad["alpha_dfe"]["alpha"] == pytest.approx(hand["alpha"], rel=1e-12)
    assert ad["caveat"] is None  # 300 and 250 substitutions
    rep = adaptive_replicate(data, f)
    assert rep["alpha_dfe"] == ad["alpha_dfe"]["alpha"]
    assert rep["alpha_model"] == ad["alpha_dfe"]["alpha_model"]
    old = f.to_dict()
    old.pop("fixation_ratio_deleterious")
    back = FitResult.from_dict(old)
    assert back.fixation_ratio_deleterious == pytest.approx(want, rel=1e-9)


# ------------------------------------------------------------------------ small counts
@pytest.mark.parametrize(
    "dn,ds,flagged",
    [(4, 10, True), (19, 300, True), (300, 19, True), (20, 20, False), (126, 100, False)],
)
def test_small_divergence_counts_carry_a_caveat(dn, ds, flagged):
    # The threshold is a choice of this project (fewer than 20 substitutions in either
    # class; at 20 the Poisson relative s.e. 1/sqrt(D) of one count is already 0.22).
    assert MIN_SUBSTITUTIONS == 20
    cav = small_count_caveat(dn, ds)
    assert (cav is not None) == flagged
    if flagged:
        assert f"only {dn} selected and {ds} neutral substitutions" in cav
    d = _pair_with(30, 60, dn, ds)
    f = FitResult.from_dict(_beneficial_fit_dict())
    ad = adaptive_summary(d, f)
    assert (ad["caveat"] is not None) == flagged


_FIT_DICT: dict = {}


def _beneficial_fit_dict():
    if not _FIT_DICT:
        _FIT_DICT.update(_beneficial_fit()[1].to_dict())
    return _FIT_DICT
