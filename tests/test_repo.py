"""Repository-level checks: the README's test command is the one CI runs; the pre-commit
hooks use the ruff pinned in pyproject.toml."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _readme_commands() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = text.split("```bash")[1:]
    return [b.split("```")[0].strip() for b in blocks]


def test_ci_runs_readme_test_command():
    cmds = _readme_commands()
    assert len(cmds) >= 2, "README quick start must have two commands"
    test_cmd = cmds[1]
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    ci_lines = [ln.strip() for ln in ci.splitlines() if ln.strip() and not ln.startswith("#")]
    assert test_cmd in ci_lines


def test_readme_first_paragraph_states_the_job():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    first = text.split("\n\n")[1]
    assert "distribution of" in first and "effectively neutral" in first


def test_pre_commit_uses_the_ruff_pinned_in_pyproject():
    # Both hooks (ruff check, ruff format) install the ruff of the test extra.
    text = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    (pin,) = re.findall(r'"(ruff==[0-9.]+)"', text)
    hooks = (ROOT / ".pre-commit-config.yaml").read_text(encoding="utf-8")
    assert "entry: ruff check" in hooks and "entry: ruff format" in hooks
    deps = re.findall(r"additional_dependencies: \[(.*)\]", hooks)
    assert deps == [f'"{pin}"'] * 2


def test_ruff_check_and_format_are_clean():
    # The lint and format settings of pyproject.toml hold over the whole tree.
    import shutil
    import subprocess
    import sys

    import pytest

    if shutil.which("ruff") is None:  # pragma: no cover - ruff is in the test extra
        pytest.skip("ruff is not installed (pip install '.[test]')")
    for args in (["check", "."], ["format", "--check", "."]):
        res = subprocess.run(
            [sys.executable, "-m", "ruff", *args], cwd=ROOT, capture_output=True, text=True
        )
        assert res.returncode == 0, res.stdout[-3000:] + res.stderr[-1000:]


def test_readme_lists_every_reference_of_the_report():
    """One list of citations: the README's References hold every entry the report shows."""
    from driftband.report._text import REFERENCES

    text = (ROOT / "README.md").read_text(encoding="utf-8")
    refs = text.split("## References", 1)[1]
    missing = [r for r in REFERENCES if f"- {r}" not in refs]
    assert not missing, missing
