"""Every command block of the README runs in a test.

Each ``bash`` or ``sh`` block of README.md belongs to a section. Blocks of the sections in
:data:`RUN_HERE` are run here, as written, in a temporary folder (``/tmp/`` paths moved
into it, ``example_vcfs/`` reachable); blocks of the other sections are run by the named
test of another module. A block in a section listed in neither fails this test, so a
command cannot be documented without being run.
"""

from __future__ import annotations

import csv
import importlib
import os
import re
import shlex
import subprocess
import sys
from pathlib import Path

import pytest
from scipy import stats

from driftband.cli import get_parser

ROOT = Path(__file__).resolve().parents[1]

#: Sections whose blocks run here.
RUN_HERE = (
    "Simulating studies",
    "From a typical VCF to an answer",
    "Classifying sites: `driftband classify`",
)
#: Sections whose blocks another test runs: module and test function.
RUN_ELSEWHERE = {
    "Quick start": ("test_spectra_build", "test_readme_quick_start_runs"),
    "Refitting published spectra": ("test_cli_fit_compare", "test_readme_reviewer_example"),
    "Variants-only VCFs": ("test_variants_only", "test_readme_variants_only_example_runs"),
    "Running on a cluster": ("test_parallel", "test_readme_cluster_commands_use_real_options"),
    "VCF Zarr input": ("test_vcz", "test_readme_vcz_example_runs"),
}


def readme_blocks() -> list[tuple[str, str]]:
    """(section heading, text) of every bash/sh block, in README order."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    out, section = [], ""
    for m in re.finditer(r"^(#{2,3}) ([^\n]+)$|^```(\w*)\n(.*?)^```", text, re.M | re.S):
        if m.group(1):
            section = m.group(2).strip()
        elif m.group(3) in ("bash", "sh"):
            out.append((section, m.group(4)))
    return out


def commands(block: str) -> list[list[str]]:
    """The ``driftband`` command lines of a block (continuations joined, comments off)."""
    joined = block.replace("\\\n", " ")
    lines = [ln.split(" #", 1)[0].strip() for ln in joined.splitlines()]
    return [shlex.split(ln)[1:] for ln in lines if ln.startswith("driftband ")]


def test_every_block_is_run_by_a_test():
    blocks = readme_blocks()
    assert len(blocks) >= 7
    for section, _text in blocks:
        assert section in RUN_HERE or section in RUN_ELSEWHERE, (
            f"README section {section!r} has a command block that no test runs: add it to "
            "RUN_HERE or RUN_ELSEWHERE of tests/test_readme_blocks.py"
        )
    for module, name in RUN_ELSEWHERE.values():
        assert callable(getattr(importlib.import_module(module), name)), (module, name)
    assert {s for s, _t in blocks} >= set(RUN_HERE)


def test_every_driftband_command_of_the_readme_parses():
    """Every documented command uses options the parser knows (SystemExit otherwise)."""
    parser = get_parser()
    found = 0
    for _section, text in readme_blocks():
        for args in commands(text):
            parser.parse_args(args)
            found += 1
    assert found >= 10


def _run_block(text: str, tmp: Path) -> subprocess.CompletedProcess:
    script = text.replace("/tmp/", f"{tmp}/")
    prelude = f'driftband() {{ "{sys.executable}" -m driftband "$@"; }}\n'
    (tmp / "example_vcfs").symlink_to(ROOT / "example_vcfs")
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT / "src"), *sys.path]))
    return subprocess.run(
        ["bash", "-euo", "pipefail", "-c", prelude + script],
        cwd=tmp,
        env=env,
        capture_output=True,
        text=True,
        timeout=900,
    )


def _blocks_of(section: str) -> list[str]:
    return [t for s, t in readme_blocks() if s == section]


def test_simulate_example_runs(tmp_path):
    (block,) = _blocks_of("Simulating studies")
    r = _run_block(block, tmp_path)
    assert r.returncode == 0, r.stderr
    for name in ("study.spectra.json", "study.vcf.gz", "study.fa", "study.gff3"):
        assert (tmp_path / name).is_file(), name


def test_classify_example_runs(tmp_path):
    (block,) = _blocks_of("Classifying sites: `driftband classify`")
    r = _run_block(block, tmp_path)
    assert r.returncode == 0, r.stderr
    assert "classified 3 chromosome(s)" in r.stderr
    rows = (tmp_path / "snail.sites.bed").read_text().splitlines()
    assert {ln.split("\t")[3] for ln in rows} == {"0fold", "4fold"}


def test_walk_through_from_a_typical_vcf_runs(tmp_path):
    """The walk-through, as written, ends with a report; its headline shares are near the
    simulated truth (gamma DFE of shape 0.3 and mean |S| 400 at the lake's N = 1000, so
    mean |Ne*s| 100 in the lake and 25 in the spring of N = 250; true share |Ne*s| < 1
    from scipy.stats.gamma). A loose check: 28,000 class sites and 20 replicates."""
    (block,) = _blocks_of("From a typical VCF to an answer")
    r = _run_block(block, tmp_path)
    assert r.returncode == 0, r.stderr
    assert "'driftband run' would succeed" in r.stdout + r.stderr
    res = tmp_path / "practice-results"
    for name in ("report.html", "summary.md", "bands.tsv", "compare.tsv", "run.log"):
        assert (res / name).is_file(), name
    with open(res / "bands.tsv", newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh, delimiter="\t"))
    first = {
        r["population"]: float(r["share"])
        for r in rows
        if r["role"] == "headline" and r["band"] == "0-1"
    }
    assert set(first) == {"lake", "spring"}
    for pop, mean_nes in (("lake", 100.0), ("spring", 25.0)):
        truth = stats.gamma(0.3, scale=mean_nes / 0.3).cdf(1.0)
        assert first[pop] == pytest.approx(truth, abs=0.08), (pop, first[pop], truth)
