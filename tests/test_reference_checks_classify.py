"""Run reference_checks/check_codon_degeneracy.py (codon degeneracy vs Biopython)."""

import importlib.util
import subprocess
import sys
from pathlib import Path

SCRIPT = Path(__file__).resolve().parents[1] / "reference_checks" / "check_codon_degeneracy.py"


def _load():
    spec = importlib.util.spec_from_file_location("check_codon_degeneracy", SCRIPT)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_codon_degeneracy_reference_checks_pass():
    checks = _load().run_checks()
    assert len(checks) >= 11  # at least tables 1-6, 9-12 and the boxes fact
    failed = [c for c in checks if not c.passed]
    assert not failed, failed
    assert all(c.source for c in checks)


def test_script_prints_pass_lines_and_exits_zero():
    proc = subprocess.run([sys.executable, str(SCRIPT)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    lines = proc.stdout.splitlines()
    assert all(ln.startswith("PASS") for ln in lines[:-1])
    assert "source:" in lines[0] and lines[-1].endswith("0 failed")
