"""Run the PRF reference check (reference_checks/check_prf_mpmath.py) on its reduced grid:
expected spectra, neutral limit, gamma-DFE averages, band shares and mean fixation ratios,
all against mpmath."""

import importlib.util
from pathlib import Path

DIR = Path(__file__).resolve().parents[1] / "reference_checks"


def _load(name):
    spec = importlib.util.spec_from_file_location(name, DIR / f"{name}.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_prf_reference_check_quick(capsys):
    mod = _load("check_prf_mpmath")
    assert mod.main(["--quick"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert len(lines) >= 8
    for ln in lines[:-1]:
        assert ln.startswith("PASS") and "[source: " in ln, ln
        assert "mpmath" in ln or "Fu (1995)" in ln, ln
    assert lines[-1].endswith(" 0 failed")
