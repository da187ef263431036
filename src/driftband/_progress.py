"""Progress of long stages: a live line on a terminal, periodic log lines otherwise.

A :class:`Progress` counts the units of one stage (populations fitted, bootstrap
replicates, pairs compared, contigs classified, regions counted). It always writes
log records (logger ``driftband.progress``, level INFO): one when the stage starts,
one at most every :data:`LOG_EVERY` seconds with the count, the elapsed time and an
estimate of the time left, and one when it ends; ``driftband run`` keeps them in
run.log. When the command line has a terminal on stderr (and no ``-q``), it also
redraws one live line there instead of printing those records (:func:`set_live`).

No numerical code here; the stages call :meth:`Progress.advance` as units finish.
"""

from __future__ import annotations

import logging
import sys
import time
from types import TracebackType

__all__ = ["LOG_EVERY", "Progress", "console_filter", "set_live"]

log = logging.getLogger("driftband.progress")

#: Seconds between two periodic progress records.
LOG_EVERY = 30.0
#: Seconds between two redraws of the live line.
_DRAW_EVERY = 0.2
_live = {"on": False}


def set_live(on: bool) -> None:
    """Draw live progress lines on stderr (the command line sets this for a terminal)."""
    _live["on"] = bool(on)


def console_filter(record: logging.LogRecord) -> bool:
    """Drop progress records from the console while live lines are drawn there."""
    return not (_live["on"] and record.name == log.name)


def _duration(seconds: float) -> str:
    """``'42 s'``, ``'3 min 05 s'``, ``'1 h 02 min'``.

    Examples
    --------
    >>> _duration(42.4), _duration(185), _duration(3725)
    ('42 s', '3 min 05 s', '1 h 02 min')
    """
    s = int(round(seconds))
    if s < 60:
        return f"{s} s"
    if s < 3600:
        return f"{s // 60} min {s % 60:02d} s"
    return f"{s // 3600} h {(s % 3600) // 60:02d} min"


class Progress:
    """Count the units of a long stage and report how far it is.

    Parameters
    ----------
    label : str
        What runs, e.g. ``"bootstrap lake"``.
    total : int or None
        Units to do (None: unknown, no estimate of the time left).
    unit : str
        Plural name of the units, e.g. ``"replicates"``.
    clock : callable, optional
        Seconds since an arbitrary origin (default :func:`time.monotonic`; tests pass
        their own).

    Examples
    --------
    >>> p = Progress("bootstrap lake", 4, "replicates", clock=iter(range(0, 100, 10)).__next__)
    >>> p.text(2)
    'bootstrap lake: 2/4 replicates (50 %), 10 s, about 10 s left'
    """

    def __init__(
        self,
        label: str,
        total: int | None,
        unit: str,
        clock: object = None,
    ) -> None:
        self.label = label
        self.total = total if total is None else int(total)
        self.unit = unit
        self._clock = clock if callable(clock) else time.monotonic
        self.done = 0
        self.t0 = float(self._clock())
        self._last_log = self.t0
        self._last_draw = -1.0
        self._drawn = False
        log.info("%s: %s", label, f"{self.total} {unit} to do" if self.total else "started")

    def text(self, done: int, now: float | None = None) -> str:
        """The progress line for ``done`` units at time ``now``."""
        now = float(self._clock()) if now is None else now
        elapsed = now - self.t0
        head = f"{self.label}: {done}"
        if not self.total:
            return f"{head} {self.unit}, {_duration(elapsed)}"
        pct = 100 * done // self.total
        out = f"{head}/{self.total} {self.unit} ({pct} %), {_duration(elapsed)}"
        if 0 < done < self.total:
            out += f", about {_duration(elapsed * (self.total - done) / done)} left"
        return out

    def advance(self, k: int = 1) -> None:
        """Count ``k`` more finished units."""
        self.done += k
        now = float(self._clock())
        if _live["on"] and (now - self._last_draw >= _DRAW_EVERY or self.done == self.total):
            self._last_draw = now
            sys.stderr.write("\r\033[K" + self.text(self.done, now))
            sys.stderr.flush()
            self._drawn = True
        if now - self._last_log >= LOG_EVERY and self.done != self.total:
            self._last_log = now
            log.info("%s", self.text(self.done, now))

    def close(self) -> None:
        """End the live line and log the final count."""
        if self._drawn:
            sys.stderr.write("\n")
            sys.stderr.flush()
            self._drawn = False
        elapsed = float(self._clock()) - self.t0
        log.info("%s: %d %s done in %s", self.label, self.done, self.unit, _duration(elapsed))

    def __enter__(self) -> Progress:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        if exc_type is None:
            self.close()
        elif self._drawn:
            sys.stderr.write("\n")
            sys.stderr.flush()
