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


@pytest.mark.parametrize(
    "argv, names",
    [
        (["spectra", "v.vcf", "--samples", "s", "--sites", "b", "-o", "o.json",
          "--regions", "1", "--regions", "2"], ["--regions", "give it once", "comma-separated"]),
        (["spectra", "v.vcf", "--samples", "s", "--sites", "b", "-o", "o.json",
          "--project", "20,,x=3"], ["--project", "empty item"]),
        (["fit", "a.json", "-o", "f.json", "--label", "a.json=x", "--label", "b=y"],
         ["--label", "give it once"]),
        (["compare", "f.json", "-o", "c.tsv", "--relative-mutation-rate", "a=1,"],
         ["--relative-mutation-rate", "empty item"]),
        (["report", "f.json", "-o", "r.html", "--spectra", "a.json", "--spectra", "b.json"],
         ["--spectra", "give it once"]),
        (["simulate", "--population", "a:N=10,n=4", "--dfe", "gamma"], ["--dfe"]),
        (["fit", "a.json", "-o", "f.json", "--nosuch"], ["unrecognized", "--nosuch"]),
    ],
)  # fmt: skip
def test_option_errors_are_one_line_and_exit_2(tmp_path, capfd, monkeypatch, argv, names):
    """List options take one comma-separated list (README, 'Writing lists'); a repeated
    list option, an empty item, an old option name (simulate --dfe is --true-dfe) or an
    unknown one is one line on stderr, exit 2, nothing written."""
    monkeypatch.chdir(tmp_path)
    with pytest.raises(SystemExit) as ex:
        main(argv)
    assert ex.value.code == 2
    err = capfd.readouterr().err
    assert err.count("\n") == 1 and "error:" in err, err
    assert all(n in err for n in names), err
    assert list(tmp_path.iterdir()) == []
