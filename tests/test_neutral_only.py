"""A population whose selected-class mutations are all neutral: a valid answer, share ~1.

Outside fact (common practice): with no selection the expected spectrum of the selected
class is θL/i like the neutral class (Fu 1995), so every new mutation is in the
effectively neutral band and the share to recover is 1.
"""

import json

from driftband.cli import main


def test_neutral_only_population_is_fitted_and_bootstrapped(tmp_path):
    spectra, fit = tmp_path / "s.json", tmp_path / "fit.json"
    args = [
        "simulate",
        "--population",
        "p:N=200,n=10",
        "--true-dfe",
        "neutral",
        "--class-sites",
        "20000",
    ]
    args += ["--theta", "0.02", "--block-count", "20", "--seed", "4", "-o", str(spectra), "-q"]
    assert main(args) == 0
    args = ["fit", str(spectra), "--bootstrap", "4", "--workers", "1", "-o", str(fit), "-q"]
    assert main(args) == 0
    p = json.loads(fit.read_text())["populations"]["p"]
    head = p["headline"]
    assert head["shares"][0] > 0.95
    lo, hi = head["shares_ci"][0]
    assert lo > 0.85 and hi <= 1.0 + 1e-12
    for name, mb in p["bootstrap"]["models"].items():
        assert all(mb["converged"]), name  # no replicate lost at the neutral limit
