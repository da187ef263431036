"""Run the spectra reference checks (reference_checks/check_spectra_*.py): scikit-allel,
Tajima (1989) / Watterson (1975) with tskit, neutral msprime simulations, scipy hypergeom."""

import importlib.util
import subprocess
import sys
from pathlib import Path

import pytest

DIR = Path(__file__).resolve().parents[1] / "reference_checks"
SCRIPTS = [
    "check_spectra_allel",
    "check_spectra_tajima",
    "check_spectra_neutral_msprime",
    "check_spectra_projection",
]


def _load(name):
    spec = importlib.util.spec_from_file_location(name, DIR / f"{name}.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


@pytest.mark.parametrize("name", SCRIPTS)
def test_spectra_reference_checks_pass(name):
    checks = _load(name).run_checks()
    assert len(checks) >= 3
    failed = [c for c in checks if not c.passed]
    assert not failed, failed
    assert all(c.source for c in checks)


def test_script_prints_pass_lines_and_exits_zero():
    proc = subprocess.run(
        [sys.executable, str(DIR / "check_spectra_projection.py")], capture_output=True, text=True
    )
    assert proc.returncode == 0, proc.stdout + proc.stderr
    lines = proc.stdout.splitlines()
    assert all(ln.startswith("PASS") and "[source: " in ln for ln in lines[:-1])
    assert lines[-1].endswith("0 failed")
