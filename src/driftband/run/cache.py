"""Stage cache, run log and stage errors of ``driftband run`` (see :mod:`driftband.run`).

``provenance/stages.json`` holds one record per stage: the stage key (SHA-256 of the
stage's name, driftband's version, the SHA-256 of every input file and the options), the
inputs, the options, the SHA-256 of every output, when it finished and how long it took.
A stage is skipped when its key is unchanged and its outputs are still as recorded.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import hashlib
import json
import logging
import os
import sys
import time
import warnings
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any, TextIO

from .._io import atomic_output, output_set, sha256sum
from .._version import __version__
from ..exceptions import DriftbandError, InputError

__all__ = ["RunLog", "StageCache", "StageError", "StageRunner", "run_log", "stage_key"]

log = logging.getLogger("driftband")

_STAGES_SCHEMA = "driftband-run-stages"


class StageError(DriftbandError):
    """A stage of ``driftband run`` failed on a problem the user can fix.

    Parameters
    ----------
    stage : str
        The stage, e.g. ``spectra[snail]``.
    error : Exception
        The original error (its one-line message is kept).
    """

    def __init__(self, stage: str, error: BaseException) -> None:
        self.stage = stage
        self.error = error
        super().__init__(f"stage {stage}: {error}")


# ------------------------------------------------------------------------ stage cache


def _canonical(obj: Any) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), default=str)


def stage_key(stage: str, inputs: dict[str, str | None], options: dict[str, Any]) -> str:
    """Checksum of a stage: its name, driftband's version and output schemas, input
    checksums and options (a stage written under another schema is redone)."""
    from ..fit.io import FIT_SCHEMA_VERSION
    from ..spectra.io import SCHEMA_VERSION as SPECTRA_SCHEMA_VERSION

    blob = {
        "stage": stage,
        "driftband": __version__,
        "schemas": [SPECTRA_SCHEMA_VERSION, FIT_SCHEMA_VERSION],
        "inputs": inputs,
        "options": options,
    }
    return hashlib.sha256(_canonical(blob).encode()).hexdigest()


class StageCache:
    """``provenance/stages.json``: one record per stage (key, inputs, outputs, time)."""

    def __init__(self, path: Path, force: bool) -> None:
        self.path = path
        self.force = force
        self.records: dict[str, Any] = {}
        try:
            doc = json.loads(path.read_text(encoding="utf-8"))
            if doc.get("schema") == _STAGES_SCHEMA and isinstance(doc.get("stages"), dict):
                self.records = doc["stages"]
        except (OSError, ValueError, AttributeError):
            self.records = {}

    def fresh(self, sid: str, key: str, outputs: list[Path]) -> bool:
        """Whether stage ``sid`` can be reused: same key, same outputs, all intact.

        Parameters
        ----------
        sid : str
            Stage id, e.g. ``spectra[lake]``.
        key : str
            The stage key of this run (:func:`stage_key`).
        outputs : list of Path
            The stage's output files; each must exist with its recorded SHA-256.

        Returns
        -------
        bool
            False with ``force``, without a record, or when anything differs.
        """
        rec = self.records.get(sid)
        if self.force or not rec or rec.get("key") != key:
            return False
        want = rec.get("outputs") or {}
        if sorted(want) != sorted(p.name for p in outputs):
            return False
        for p in outputs:
            if not p.is_file() or sha256sum(p) != want.get(p.name):
                return False
        return True

    def record(self, sid: str, rec: dict[str, Any]) -> None:
        """Keep the record of stage ``sid`` and write the file at once."""
        self.records[sid] = rec
        self._write()

    def ran_on(self) -> dict[str, str]:
        """Where each recorded stage ran (``""`` for records of older versions)."""
        return {sid: str(rec.get("ran_on") or "") for sid, rec in self.records.items()}

    def drop(self, sid: str) -> None:
        """Forget stage ``sid`` (the file is rewritten only when it had a record)."""
        if self.records.pop(sid, None) is not None:
            self._write()

    def _write(self) -> None:
        doc = {"schema": _STAGES_SCHEMA, "schema_version": 1, "stages": self.records}
        with atomic_output(self.path, force=True) as fh:
            json.dump(doc, fh, indent=1, sort_keys=True)
            fh.write("\n")


class RunLog(logging.Handler):
    """Keeps the formatted log records of a run and writes each to run.log as it comes.

    Parameters
    ----------
    stream : text file, optional
        Where each line goes at once (run.log opened for appending, line-buffered), so
        that the log of a running study can be watched; None keeps the lines only.
    """

    def __init__(self, stream: TextIO | None = None) -> None:
        super().__init__(logging.INFO)
        self.lines: list[str] = []
        self.stream = stream
        self.setFormatter(
            logging.Formatter("%(asctime)s %(levelname)s %(message)s", "%Y-%m-%d %H:%M:%S")
        )

    def emit(self, record: logging.LogRecord) -> None:
        """Keep ``record`` as one formatted line (and write it to run.log)."""
        try:
            line = self.format(record)
            self.lines.append(line)
            if self.stream is not None:
                self.stream.write(line + "\n")
                self.stream.flush()
        except Exception:  # pragma: no cover - never let logging break a run
            self.handleError(record)

    def note(self, level: int, message: str) -> None:
        """A record for run.log only (not for the console)."""
        self.emit(logging.LogRecord("driftband", level, __file__, 0, message, None, None))


@contextlib.contextmanager
def run_log(path: Path) -> Iterator[RunLog]:
    """Collect the log of ``driftband`` (and warnings) at INFO for run.log.

    Console handlers keep their level; without any handler a stderr handler at WARNING
    stands in for Python's last-resort one. run.log keeps the earlier runs' log; this
    run's lines are appended as they come (line-buffered, from the start of the run), so
    ``tail -f run.log`` follows a run, also one that a pipeline runs without a terminal.
    """
    try:
        stream: TextIO | None = open(path, "a", encoding="utf-8", buffering=1)
    except OSError:  # a log that cannot be written must not stop the run
        stream = None
    col = RunLog(stream)
    extra: list[tuple[logging.Logger, logging.Handler]] = []
    saved: list[tuple[logging.Logger, int]] = []
    fixed: list[logging.Handler] = []
    captured = warnings.showwarning is getattr(logging, "_showwarning", None)
    logging.captureWarnings(True)
    for lg in (logging.getLogger("driftband"), logging.getLogger("py.warnings")):
        eff = lg.getEffectiveLevel()
        if not lg.hasHandlers():
            sh = logging.StreamHandler(sys.stderr)
            sh.setLevel(logging.WARNING)
            sh.setFormatter(logging.Formatter("driftband: %(message)s"))
            lg.addHandler(sh)
            extra.append((lg, sh))
        for h in lg.handlers:
            if h.level == logging.NOTSET:
                h.setLevel(eff)
                fixed.append(h)
        saved.append((lg, lg.level))
        lg.setLevel(min(eff, logging.INFO))
        lg.addHandler(col)
    try:
        yield col
    finally:
        for lg, level in saved:
            lg.removeHandler(col)
            lg.setLevel(level)
        for lg, h in extra:
            lg.removeHandler(h)
        for h in fixed:
            h.setLevel(logging.NOTSET)
        if not captured:
            logging.captureWarnings(False)
        if stream is not None:
            with contextlib.suppress(OSError):
                stream.close()


class StageRunner:
    """Runs stages through the cache; turns user errors into one StageError."""

    def __init__(
        self, cache: StageCache, col: RunLog, stages: dict[str, str], ran_on: str = ""
    ) -> None:
        self.cache = cache
        self.col = col
        self.stages = stages
        #: Where the stages of this run compute (recorded with each stage that runs).
        self.ran_on = ran_on

    def run(
        self,
        sid: str,
        inputs: dict[str, Path | str | None],
        options: dict[str, Any],
        outputs: list[Path],
        fn: Callable[[], Any],
    ) -> bool:
        """Run stage ``sid`` unless cached; returns True when it ran."""
        sums = {k: (None if p is None else sha256sum(p)) for k, p in inputs.items()}
        key = stage_key(sid.split("[")[0], sums, options)
        if self.cache.fresh(sid, key, outputs):
            log.info("stage %s: skipped (inputs and options unchanged)", sid)
            self.stages[sid] = "skipped"
            return False
        log.info("stage %s: running%s", sid, f" ({self.ran_on})" if self.ran_on else "")
        t0 = time.monotonic()
        try:
            with output_set():  # the outputs of a stage are committed together
                fn()
        except StageError:
            raise
        except DriftbandError as err:
            self.col.note(logging.ERROR, f"stage {sid}: {err}")
            raise StageError(sid, err) from None
        except OSError as err:
            msg = f"{err.filename}: {err.strerror}" if err.filename else str(err)
            self.col.note(logging.ERROR, f"stage {sid}: {msg}")
            raise StageError(sid, InputError(msg)) from None
        except KeyboardInterrupt:
            self.col.note(logging.ERROR, f"stage {sid}: interrupted; rerun to resume here")
            raise
        except Exception as err:
            self.col.note(logging.ERROR, f"stage {sid}: internal error {type(err).__name__}: {err}")
            raise
        secs = time.monotonic() - t0
        self.cache.record(
            sid,
            {
                "key": key,
                "inputs": {k: (None if p is None else os.fspath(p)) for k, p in inputs.items()},
                "input_sha256": sums,
                "options": options,
                "outputs": {p.name: sha256sum(p) for p in outputs},
                "finished": _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
                "seconds": round(secs, 2),
                "ran_on": self.ran_on,
            },
        )
        log.info("stage %s: done in %.1f s (%s)", sid, secs, ", ".join(p.name for p in outputs))
        self.stages[sid] = "ran"
        return True
