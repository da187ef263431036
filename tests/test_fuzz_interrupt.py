"""Interruption of ``driftband run`` (slow: the demo study, end to end): SIGINT, SIGTERM
and SIGHUP at each stage end the run with one line and exit code 130 (128 + SIGINT, the
shell convention: common practice), leave no temporary file and no worker process, and a
rerun resumes and gives byte-identical tables. Signals while a command writes its outputs
are tested in test_fuzz_outputs.py."""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

SIGNALS = [signal.SIGINT, signal.SIGTERM, signal.SIGHUP]


# ----------------------------------------------------------------- end to end (slow)
TABLES = ["sites.bed", "bands.tsv", "compare.tsv"]
REPLICATES = "10"


def _demo(tmp: Path) -> Path:
    from driftband.run import demo_study_path

    src = demo_study_path().parent
    d = tmp / "demo"
    shutil.copytree(src, d)
    return d / demo_study_path().name


def _argv(study: Path, out: Path) -> list[str]:
    return [
        sys.executable, "-m", "driftband", "run", str(study), "--out-dir", str(out),
        "--bootstrap", REPLICATES, "--workers", "2",
    ]  # fmt: skip


def _group(pgid: int) -> list[int]:
    """Live processes (not zombies) of a process group."""
    out = []
    for p in Path("/proc").iterdir():
        if not p.name.isdigit():
            continue
        try:
            stat = (p / "stat").read_text()
        except OSError:
            continue
        fields = stat.rsplit(")", 1)[1].split()
        if fields[0] != "Z" and int(fields[2]) == pgid:
            out.append(int(p.name))
    return out


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    d = tmp_path_factory.mktemp("ref")
    study = _demo(d)
    r = subprocess.run(_argv(study, d / "out"), capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    return study, {t: (d / "out" / t).read_bytes() for t in TABLES}


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc").is_dir(), reason="reads /proc for the process group")
@pytest.mark.parametrize("stage", ["fit", "bootstrap", "compare"])
@pytest.mark.parametrize("sig", SIGNALS, ids=lambda s: s.name)
def test_interrupted_run_resumes_to_identical_tables(reference, tmp_path, sig, stage):
    study, want = reference
    out = tmp_path / "out"
    p = subprocess.Popen(
        _argv(study, out), stderr=subprocess.PIPE, text=True, start_new_session=True
    )
    assert p.stderr is not None
    seen = ""
    while f"stage {stage}: running" not in seen:
        line = p.stderr.readline()
        assert line, seen
        seen += line
    time.sleep(1.5)
    # SIGINT as from a terminal (the whole group); the others to the main process
    os.killpg(p.pid, sig) if sig == signal.SIGINT else p.send_signal(sig)
    rest = p.stderr.read()
    p.wait(60)
    assert p.returncode == 130, seen + rest
    own = [x for x in rest.splitlines() if not x.startswith("driftband: ")]
    assert own == ["driftband run: interrupted" + ("" if sig == signal.SIGINT else
                   f" by {sig.name}") + "; rerun the same command to resume"], rest  # fmt: skip
    assert "Traceback" not in rest
    deadline = time.monotonic() + 10
    while _group(p.pid) and time.monotonic() < deadline:
        time.sleep(0.2)
    assert not _group(p.pid), "worker processes left behind"
    assert not list(out.rglob("*.tmp"))
    r = subprocess.run(_argv(study, out), capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert "skipped" in r.stderr  # the stages before the interrupted one are kept
    for t in TABLES:
        assert (out / t).read_bytes() == want[t], t
