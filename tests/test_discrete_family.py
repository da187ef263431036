"""The discrete DFE family fitted on the report bands with the first band split.

Outside references: scipy.stats.gamma for the true share of a gamma DFE; the uniform
density's own property (a uniform band split at a point is two uniform bands whose masses
are in the ratio of their widths), for the identity check.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from driftband.cli import main
from driftband.fit.api import fit_population
from driftband.fit.likelihood import SpectrumPair
from driftband.fit.models import DfeModel, parse_models
from driftband.fit.options import FitOptions
from driftband.prf.dfe import DfeExpectation
from driftband.prf.families import DiscreteDfe, GammaDfe, band_shares, discrete_family_edges

DATA = Path(__file__).parent / "data" / "report"
N = 20


def _exact_pair(dfe, sites: float = 1e5, theta: float = 0.01) -> SpectrumPair:
    """Spectra equal to their expectation (no noise), neutral θ/i, selected θ·ḡ."""
    g = DfeExpectation(N).mean_g(dfe)
    i = np.arange(1, N)
    neu, sel = np.zeros(N + 1), np.zeros(N + 1)
    neu[1:N] = theta * sites / i
    sel[1:N] = theta * sites * g
    neu[0], sel[0] = sites - neu.sum(), sites - sel.sum()
    return SpectrumPair.from_arrays(N, False, neu, sel, sites, sites)


def test_family_bands_split_the_first_report_band():
    m = DfeModel("discrete")
    assert m.family_edges == (0.0, 0.25, 1.0, 10.0, 100.0)
    assert m.param_names == tuple(f"mass_{k}" for k in range(5)) and m.n_free == 4
    # other report bands (e.g. the homozygote convention's) are split the same way
    assert discrete_family_edges((0, 0.5, 5, 50)) == (0.0, 0.125, 0.5, 5.0, 50.0)
    # the shares are still on the report bands: the first two masses add up
    d = m.to_dfe(m.from_natural({f"mass_{k}": v for k, v in enumerate((0.1, 0.2, 0.3, 0.2, 0.2))}))
    assert band_shares(d, m.edges_nes) == pytest.approx([0.3, 0.3, 0.2, 0.2], abs=1e-12)


def test_a_uniform_first_band_is_two_uniform_bands_in_the_ratio_of_their_widths():
    """The old family (one uniform mass on |S| in [0, 4)) is a member of the new one: the
    band split at |S| = 1 holds a quarter of it (widths 1 and 3)."""
    old = DiscreteDfe((0.3, 0.1, 0.2, 0.4))
    new = DiscreteDfe((0.075, 0.225, 0.1, 0.2, 0.4), discrete_family_edges(old.edges_nes))
    ex = DfeExpectation(N)
    assert ex.mean_g(new) == pytest.approx(ex.mean_g(old), rel=1e-9)


def test_split_family_is_close_to_the_truth_on_a_gamma_dfe():
    """On exact spectra of a gamma DFE (shape 0.3, mean |S| 200; n = 20, 1e5 sites) the
    discrete family's share of |Ne·s| < 1 is within 0.02 of the truth from
    scipy.stats.gamma (0.240). With one uniform mass on the first band it was 0.333."""
    truth = float(stats.gamma(0.3, scale=200.0 / 0.3).cdf(4.0))
    opts = FitOptions(models=tuple(parse_models("discrete")))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pf = fit_population(_exact_pair(GammaDfe(shape=0.3, mean=200.0)), opts, "g")
    share = float(pf.fits["discrete"].shares[0])
    assert abs(share - truth) < 0.02, (share, truth)


def test_compare_refuses_a_discrete_fit_of_an_older_schema(tmp_path, capsys):
    """fit.v1.json (an old file) has four discrete masses: compare says to refit, exit 2,
    nothing written; another model of the same file is compared."""
    out = tmp_path / "c.tsv"
    code = main(["compare", str(DATA / "fit.v1.json"), "--model", "discrete", "-o", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and not out.exists()
    last = err.strip().splitlines()[-1]
    assert "refit it with 'driftband fit'" in last and "mass_4" in last


def test_old_schema_warning_names_discrete_fits_only_when_there_are_some(caplog):
    from driftband.fit.io import upgrade_fit_doc

    def doc(models):
        return {
            "schema": "driftband-fit",
            "schema_version": 3,
            "populations": {"p": {"models": {m: {} for m in models}}},
        }

    with caplog.at_level("WARNING", logger="driftband"):
        upgrade_fit_doc(doc(["gamma", "discrete+beneficial"]), "a.json")
        upgrade_fit_doc(doc(["gamma", "lognormal"]), "b.json")
    a, b = (r.getMessage() for r in caplog.records[-2:])
    assert "a.json" in a and "discrete fits" in a
    assert "b.json" in b and "discrete" not in b and "schema version 3" in b
