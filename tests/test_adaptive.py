"""McDonald–Kreitman table and α estimators on worked examples."""

import numpy as np
import pytest
from scipy import stats

from driftband.fit.adaptive import alpha_asymptotic, alpha_classic, alpha_dfe, mk_table
from driftband.fit.likelihood import SpectrumPair

# McDonald & Kreitman (1991), Drosophila Adh: fixed replacement 7, fixed synonymous 17,
# polymorphic replacement 2, polymorphic synonymous 42 (counts from memory).
ADH = {"D_N": 7, "D_S": 17, "P_N": 2, "P_S": 42}


def _pair_with(pn, ps, dn, ds, n=10):
    sel = np.zeros(n - 1)
    neu = np.zeros(n - 1)
    sel[0], neu[0] = pn, ps
    return SpectrumPair(n, False, neu, sel, 1000.0, 1000.0, float(ds), float(dn))


def test_mk_table_fisher_matches_scipy():
    mk = mk_table(_pair_with(ADH["P_N"], ADH["P_S"], ADH["D_N"], ADH["D_S"]))
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
