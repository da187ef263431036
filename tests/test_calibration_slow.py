"""Slow calibration checks on replicate simulated studies (run with ``-m slow``).

A reduced version of ``benchmarks/calibrate.py`` (R = 6 replicate studies per scenario):
with so few replicates only gross miscalibration can be detected, so the thresholds are
binomial bounds: for a true coverage of 0.95, 12 intervals cover the truth at least 9
times with probability > 0.99 (scipy.stats.binom); a test of size 0.05 rejects at most
2 of 6 times with probability > 0.99.
"""

import importlib.util
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

pytestmark = pytest.mark.slow

_spec = importlib.util.spec_from_file_location(
    "calibrate", Path(__file__).resolve().parents[1] / "benchmarks" / "calibrate.py"
)
calibrate = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(calibrate)

R = 6


@pytest.fixture(scope="module")
def results():
    return {
        sc: [calibrate.one_replicate((sc, r, 50)) for r in range(R)] for sc in calibrate.SCENARIOS
    }


def test_binomial_bounds_hold():
    # The thresholds below, from scipy.stats.binom.
    assert stats.binom.cdf(8, 2 * R, 0.95) < 0.01
    assert stats.binom.sf(2, R, 0.05) < 0.01


def test_coverage(results):
    cov = [r[k] for r in results["same"] for k in ("cover_A", "cover_B")]
    assert sum(cov) >= 9


def test_size_of_tests_same_dfe(results):
    for t in ("p_shared_dfe_lrt", "p_neutral_share_difference"):
        assert sum(r[t] < 0.05 for r in results["same"]) <= 2, t


def test_size_of_ne_only_when_true(results):
    assert sum(r["p_ne_only_lrt"] < 0.05 for r in results["ne_only"]) <= 2


def test_power_big_vs_small(results):
    # A true difference of about 0.12 in neutral share with 1e5 sites per class should be
    # detected nearly always.
    assert sum(r["p_shared_dfe_lrt"] < 0.05 for r in results["ne_only"]) >= R - 1
    est = np.array([r["share_B"] - r["share_A"] for r in results["ne_only"]])
    assert np.all(est > 0)
