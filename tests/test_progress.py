"""Progress of long stages and the run log written as the run goes.

Checks of behaviour (no outside reference is involved): the time-left estimate is the
elapsed time scaled by the units left (linear extrapolation, common practice for
progress meters), periodic records reach the log, live lines go to a terminal only,
and run.log holds each line as soon as it is logged.
"""

from __future__ import annotations

import logging
from pathlib import Path

import pytest

from driftband import _progress
from driftband._progress import LOG_EVERY, Progress, console_filter, set_live
from driftband.run.cache import run_log


class Clock:
    def __init__(self) -> None:
        self.t = 0.0

    def __call__(self) -> float:
        return self.t


@pytest.fixture(autouse=True)
def not_live():
    yield
    set_live(False)


def test_estimate_of_time_left_is_linear_in_the_units_left():
    clock = Clock()
    p = Progress("bootstrap lake", 200, "refits", clock=clock)
    clock.t = 50.0
    # 50 of 200 done in 50 s: 150 left at 1 s each
    assert p.text(50) == "bootstrap lake: 50/200 refits (25 %), 50 s, about 2 min 30 s left"
    assert p.text(200).endswith("(100 %), 50 s")  # no estimate when done
    q = Progress("spectra", None, "records", clock=clock)
    assert q.text(1234) == "spectra: 1234 records, 0 s"


def test_periodic_records_and_a_final_one_reach_the_log(caplog):
    clock = Clock()
    with caplog.at_level(logging.INFO, logger="driftband"):
        with Progress("fit", 10, "models fitted", clock=clock) as p:
            for _ in range(10):
                clock.t += LOG_EVERY / 3
                p.advance()
    msgs = [r.getMessage() for r in caplog.records if r.name == "driftband.progress"]
    assert msgs[0] == "fit: 10 models fitted to do"
    periodic = [m for m in msgs[1:-1]]
    # 10 units of LOG_EVERY/3 s: a record at 3, 6 and 9 units (not at the last)
    assert [m.split(":")[1].split()[0] for m in periodic] == ["3/10", "6/10", "9/10"]
    assert all("left" in m for m in periodic)
    assert msgs[-1].startswith("fit: 10 models fitted done in")


def test_live_line_on_a_terminal_and_records_kept_off_the_console(capsys):
    rec = logging.LogRecord("driftband.progress", logging.INFO, __file__, 0, "x", None, None)
    other = logging.LogRecord("driftband", logging.WARNING, __file__, 0, "y", None, None)
    assert console_filter(rec) and console_filter(other)
    set_live(True)
    assert not console_filter(rec) and console_filter(other)
    clock = Clock()
    with Progress("compare", 2, "tests", clock=clock) as p:
        clock.t = 1.0
        p.advance()
        clock.t = 2.0
        p.advance()
    err = capsys.readouterr().err
    assert "\rcompare: 1/2 tests (50 %)" in err.replace("\x1b[K", "")
    assert err.endswith("compare: 2/2 tests (100 %), 2 s\n")
    set_live(False)
    with Progress("compare", 2, "tests", clock=clock) as p:
        p.advance(2)
    assert capsys.readouterr().err == ""  # not live: log records only


def test_run_log_holds_each_line_while_the_run_goes(tmp_path: Path):
    path = tmp_path / "run.log"
    path.write_text("an earlier run\n", encoding="utf-8")
    lg = logging.getLogger("driftband")
    with run_log(path):
        lg.info("stage one started")
        during = path.read_text(encoding="utf-8")
        with Progress("fit", 1, "models fitted") as p:
            p.advance()
        lg.warning("something to look at")
        during2 = path.read_text(encoding="utf-8")
    assert during.startswith("an earlier run\n") and "INFO stage one started" in during
    assert "fit: 1 models fitted done in" in during2
    assert "WARNING something to look at" in during2
    assert path.read_text(encoding="utf-8") == during2


def test_cli_prints_warnings_as_one_plain_line(tmp_path, capsys):
    """A warning of the tool itself reads ``driftband: warning: ...`` (one line)."""
    from driftband.cli import main

    data = Path(__file__).parent / "data" / "report"
    rc = main(["report", str(data / "fit.v1.json"), "-o", str(tmp_path / "r.html")])
    assert rc == 0
    lines = capsys.readouterr().err.splitlines()
    assert any(ln.startswith("driftband: warning: ") and "fit.v1.json" in ln for ln in lines)
    assert not any("Warning:" in ln or ".py:" in ln for ln in lines)


def test_quiet_silences_warnings_on_the_terminal(tmp_path, capsys):
    from driftband.cli import main

    data = Path(__file__).parent / "data" / "report"
    rc = main(["report", str(data / "fit.v1.json"), "-o", str(tmp_path / "r.html"), "-q"])
    assert rc == 0
    assert capsys.readouterr().err == ""
    assert not _progress._live["on"]
