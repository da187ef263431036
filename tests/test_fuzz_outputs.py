"""Fuzzing options and output paths of every command: outputs that are folders, lie under
a file, name an input (even with --force) or exist already; two outputs of one command
that cannot both be written. A command leaves all its outputs or none, names the user's
path (never a temporary file), and never changes an existing file it refused to replace
(common practice for command-line tools: atomic, all-or-nothing outputs).
"""

from __future__ import annotations

import logging
import os
import signal
import time
import warnings
from pathlib import Path

import pytest

from fuzz_helpers import expect_refusal, run, snapshot
from test_fuzz_vcf import SAMPLE_TABLE, SITES, vcf_text
from vcf_fixtures import write_vcf

DATA = Path(__file__).parent / "data" / "report"
SIGNALS = [signal.SIGINT, signal.SIGTERM, signal.SIGHUP]


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    """Small valid inputs of every command, in one folder (copied per test)."""
    from driftband.cli import main

    d = tmp_path_factory.mktemp("outputs")
    write_vcf(d / "v.vcf", vcf_text(), "bgzf")
    (d / "v.vcf").unlink()
    (d / "pm.tsv").write_text(SAMPLE_TABLE)
    (d / "s.bed").write_text(SITES)
    sim = ["simulate", "--population", "A:N=50,n=4", "--class-sites", "300", "--seed", "1"]
    assert main([*sim, "--write-vcf", str(d / "g"), "--genome", "-q", "-o", str(d / "g.json")]) == 0
    for name in ("fit.json", "spectra.json", "compare.tsv"):
        (d / name).write_bytes((DATA / name).read_bytes())
    return d


def _copy(src: Path, dst: Path) -> None:
    for p in src.iterdir():
        (dst / p.name).write_bytes(p.read_bytes())


# command -> (argument list before the outputs, first output option, second output option)
COMMANDS = {
    "spectra": (["spectra", "v.vcf.gz", "--samples", "pm.tsv", "--sites", "s.bed",
                 "--all-sites-callable"], "-o", "--tsv"),
    "classify": (["classify", "--fasta", "g.fa", "--gff", "g.gff3"], "-o", "--summary"),
    "fit": (["fit", "spectra.json", "--dfe", "gamma"], "-o", "--bands-tsv"),
    "compare": (["compare", "fit.json"], "-o", None),
    "report": (["report", "fit.json", "--compare", "compare.tsv", "--spectra",
                "lake=spectra.json"], "-o", "--summary"),
    "simulate": (["simulate", "--population", "A:N=50,n=4", "--class-sites", "200", "--seed", "2"],
                 "-o", "--tsv"),
}  # fmt: skip
INPUTS = {
    "spectra": ["v.vcf.gz", "v.vcf.gz.tbi", "pm.tsv", "s.bed"],
    "classify": ["g.fa", "g.gff3"],
    "fit": ["spectra.json"],
    "compare": ["fit.json"],
    "report": ["fit.json", "compare.tsv", "spectra.json"],  # spectra.json as LABEL=PATH
    "simulate": [],
}


def _case(tmp_path, inputs, command):
    _copy(inputs, tmp_path)
    base, o1, o2 = COMMANDS[command]
    os.chdir(tmp_path)
    return [*base, "-q"], o1, o2


@pytest.fixture
def chdir_back():
    cwd = os.getcwd()
    yield
    os.chdir(cwd)


PATH_PROBLEMS = ["folder", "under-a-file", "existing", "existing-nested"]


@pytest.mark.parametrize("problem", PATH_PROBLEMS)
@pytest.mark.parametrize("which", ["first", "second"])
@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_output_path_problems(capfd, inputs, tmp_path, chdir_back, command, which, problem):
    args, o1, o2 = _case(tmp_path, inputs, command)
    if which == "second" and o2 is None:
        pytest.skip("one output only")
    Path("afile").write_text("keep me\n")
    Path("adir").mkdir()
    Path("old").mkdir()
    Path("old/out.x").write_text("old output\n")
    bad = {
        "folder": "adir",
        "under-a-file": "afile/out.x",
        "existing": "afile",
        "existing-nested": "old/out.x",
    }[problem]
    good = "new1.out" if which == "second" else "new2.out"
    outs = {o1: bad if which == "first" else good}
    if o2 is not None:
        outs[o2] = bad if which == "second" else good
    argv = [*args, *(x for kv in outs.items() for x in kv)]
    # existing files need --force; the others are refused even with it
    if problem in ("folder", "under-a-file"):
        argv.append("--force")
    expect_refusal(capfd, tmp_path, argv, [bad], [good])


@pytest.mark.parametrize("command", sorted(c for c in COMMANDS if INPUTS[c]))
def test_an_input_is_never_an_output(capfd, inputs, tmp_path, chdir_back, command):
    args, o1, o2 = _case(tmp_path, inputs, command)
    for inp in INPUTS[command]:
        for opt in [o1] + ([o2] if o2 else []):
            argv = [*args, opt, inp, "--force"]
            if opt != o1:
                argv += [o1, "new.out"]
            line = expect_refusal(capfd, tmp_path, argv, [inp, "input"], ["new.out"])
            assert "tmp" not in line


@pytest.mark.parametrize("command", sorted(c for c in COMMANDS if COMMANDS[c][2]))
def test_two_outputs_that_are_one_file(capfd, inputs, tmp_path, chdir_back, command):
    args, o1, o2 = _case(tmp_path, inputs, command)
    expect_refusal(capfd, tmp_path, [*args, o1, "x.out", o2, "x.out"], [], ["x.out"])


# the commands whose work is quick enough to reach the commit of their outputs
LATE = ["spectra", "classify", "simulate", "report"]


@pytest.mark.parametrize("existing", [False, True])
@pytest.mark.parametrize("command", LATE)
def test_a_failed_second_output_leaves_neither(
    capfd, inputs, tmp_path, chdir_back, monkeypatch, command, existing
):
    args, o1, o2 = _case(tmp_path, inputs, command)
    if existing:  # with --force: both old files must come back unchanged
        Path("one.out").write_text("old one\n")
        Path("two.out").write_text("old two\n")
    real = os.replace

    def failing_replace(src, dst, *a, **k):
        # the new file cannot be put in place (putting the old one back still works)
        if os.path.basename(os.fspath(dst)) == "two.out" and ".old." not in os.fspath(src):
            raise PermissionError(13, "Permission denied", os.fspath(dst))
        return real(src, dst, *a, **k)

    monkeypatch.setattr(os, "replace", failing_replace)
    before = snapshot(tmp_path)
    argv = [*args, o1, "one.out", o2, "two.out"] + (["--force"] if existing else [])
    rc, err = run(capfd, argv)
    monkeypatch.setattr(os, "replace", real)
    lines = err.splitlines()
    assert rc == 2, err
    assert len(lines) == 1 and "two.out" in lines[0] and "Permission denied" in lines[0], err
    assert ".tmp" not in lines[0]
    assert snapshot(tmp_path) == before  # neither output, old files unchanged
    assert not list(tmp_path.rglob("*.tmp"))


@pytest.mark.parametrize("command", LATE)
def test_both_outputs_are_written_together(capfd, inputs, tmp_path, chdir_back, command):
    args, o1, o2 = _case(tmp_path, inputs, command)
    rc, err = run(capfd, [*args, o1, "one.out", o2, "two.out"])
    assert rc == 0, err
    assert Path("one.out").stat().st_size > 0 and Path("two.out").stat().st_size > 0
    assert not list(tmp_path.rglob("*.tmp"))


@pytest.mark.parametrize(
    "sig", [signal.SIGINT, signal.SIGTERM, signal.SIGHUP], ids=lambda s: s.name
)
@pytest.mark.parametrize("command", LATE)
def test_signal_while_writing_leaves_nothing(
    capfd, inputs, tmp_path, chdir_back, monkeypatch, command, sig
):
    """The signal arrives while the second output is written (in this process)."""
    args, o1, o2 = _case(tmp_path, inputs, command)
    real = os.replace

    def interrupted_replace(src, dst, *a, **k):
        if os.path.basename(os.fspath(dst)) == "two.out":
            os.kill(os.getpid(), sig)
            time.sleep(1)  # the handler runs before this returns
        return real(src, dst, *a, **k)

    monkeypatch.setattr(os, "replace", interrupted_replace)
    # A shell starts background jobs with SIGINT ignored, and Python then keeps it ignored
    # (as a program should); this test needs Ctrl-C's usual handler.
    old_int = signal.signal(signal.SIGINT, signal.default_int_handler)
    before = snapshot(tmp_path)
    try:
        rc, err = run(capfd, [*args, o1, "one.out", o2, "two.out"])
    finally:
        signal.signal(signal.SIGINT, old_int)
    monkeypatch.setattr(os, "replace", real)
    lines = err.splitlines()
    assert rc == 130, err
    assert len(lines) == 1 and lines[0].startswith(f"driftband {command}: interrupted"), err
    assert snapshot(tmp_path) == before
    assert not list(tmp_path.rglob("*.tmp"))


BAD_OPTIONS = {
    "spectra": [["--min-gq", "-1"], ["--block-size", "0"], ["--project", "x"],
                ["--ancestral", "guess"], ["--regions", "9:5-1"], ["--workers", "0"]],
    "fit": [["--dfe", "nosuch"], ["--bands", "5,1"], ["--misorientation", "fixed:2"],
            ["--bootstrap", "-3"]],
    "compare": [["--model", "nosuch"], ["--tests", "nosuch"], ["--pairs", "a:a"]],
    "simulate": [["--theta", "-1"], ["--class-sites", "0"], ["--true-dfe", "nosuch"]],
}  # fmt: skip
OPTION_CASES = [(c, o) for c, opts in BAD_OPTIONS.items() for o in opts]


@pytest.mark.parametrize("case", OPTION_CASES, ids=[f"{c}{''.join(o)}" for c, o in OPTION_CASES])
def test_bad_option_values(capfd, inputs, tmp_path, chdir_back, case):
    command, opt = case
    args, o1, _o2 = _case(tmp_path, inputs, command)
    expect_refusal(capfd, tmp_path, [*args, *opt, o1, "new.out"], [opt[0]], ["new.out"])


def test_numerical_warnings_are_one_plain_line(capfd, inputs, tmp_path, chdir_back, monkeypatch):
    """A numpy RuntimeWarning inside a command reaches the user as one plain line per
    message (no source line), however often it is raised."""
    import numpy as np

    from driftband.spectra import io as spectra_io

    real = spectra_io.write_spectra_json

    def noisy(*a, **k):
        for _ in range(3):
            np.log(np.zeros(2))  # numpy: "divide by zero encountered in log"
        return real(*a, **k)

    monkeypatch.setattr(spectra_io, "write_spectra_json", noisy)
    warnings.onceregistry.clear()  # 'once' is per process: earlier tests may have warned
    # pytest records warnings per test; let the command route them to its log again
    logging.captureWarnings(False)
    args, o1, _o2 = _case(tmp_path, inputs, "spectra")
    rc, err = run(capfd, [*args, o1, "one.out"])
    assert rc == 0, err
    assert err.splitlines() == [
        "driftband: warning: numerical: divide by zero encountered in log "
        "(tests/test_fuzz_outputs.py)"
    ], err
