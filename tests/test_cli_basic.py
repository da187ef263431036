"""The command line as a whole: help, version, error handling."""

import subprocess
import sys

import pytest

from driftband import __version__
from driftband.cli import get_parser, main


def test_version(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    assert __version__ in capsys.readouterr().out


def test_no_subcommand_prints_help_and_fails(capsys):
    assert main([]) == 2
    assert "usage" in capsys.readouterr().err


def test_every_subcommand_has_help_with_examples():
    parser = get_parser()
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    assert sub.choices, "no subcommands registered"
    for name, p in sub.choices.items():
        assert "examples:" in (p.epilog or ""), name


def test_python_m_entry_point():
    out = subprocess.run(
        [sys.executable, "-m", "driftband", "--version"], capture_output=True, text=True, check=True
    )
    assert out.stdout.startswith("driftband")
