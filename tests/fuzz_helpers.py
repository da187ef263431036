"""Helpers of the fuzzing tests (tests/test_fuzz_*.py): run one command in-process and
check the promise made for bad input -- one line on stderr naming the file and the record
or key, exit code 2, no traceback, no output and no temporary file left, every existing
file unchanged (common practice for command-line tools: an error leaves no trace)."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

from driftband.cli import main


def snapshot(root: Path) -> dict[str, str]:
    """SHA-256 of every file under ``root`` (to prove nothing was changed)."""
    return {
        str(p.relative_to(root)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(root.rglob("*"))
        if p.is_file()
    }


def run(capfd, args) -> tuple[int, str]:
    """Exit code and stderr of ``driftband ARGS`` (run in this process)."""
    capfd.readouterr()
    rc = main([str(a) for a in args])
    return rc, capfd.readouterr().err.strip()


def expect_refusal(capfd, root: Path, args, names=(), outputs=()) -> str:
    """Run ``args``; assert the bad-input promise (see the module docstring).

    ``names`` are substrings the one line must hold (the file, ``file:line``, the key);
    ``outputs`` the paths that must not exist afterwards. Returns the line.
    """
    before = snapshot(root)
    rc, err = run(capfd, args)
    prog = f"driftband {args[0]}: error: "
    lines = err.splitlines()
    assert rc == 2, err
    assert len(lines) == 1, err
    assert lines[0].startswith(prog), err
    assert "Traceback" not in err
    assert "internal error" not in err
    for n in names:
        assert str(n) in lines[0], (n, lines[0])
    for o in outputs:
        assert not Path(o).exists(), o
    assert not [p for p in root.rglob("*.tmp")], list(root.rglob("*.tmp"))
    assert not [p for p in root.rglob(".*.tmp*")], list(root.rglob(".*.tmp*"))
    assert snapshot(root) == before, "an existing file was changed"
    return lines[0]


def expect_success(capfd, args) -> str:
    """Run ``args``; assert exit code 0 and no traceback. Returns stderr."""
    rc, err = run(capfd, args)
    assert rc == 0, err
    assert "Traceback" not in err
    return err


def spectra_content(path: Path) -> dict:
    """The populations of a spectra file (what must be equal between spellings)."""
    doc = json.loads(Path(path).read_text(encoding="utf-8"))
    return {"populations": doc["populations"], "blocks": doc["blocks"], "skipped": doc["skipped"]}
