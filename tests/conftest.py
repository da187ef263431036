"""Test-session settings.

One BLAS thread per process, set before numpy is first imported (worker processes inherit
it). The suite runs on a few shared cores and starts worker processes of its own, and
threaded BLAS on busy cores is far slower than one thread: a 199 x 199 solve of the exact
Wright-Fisher chain took 0.12 s with OpenBLAS's threads against 0.001 s on one thread on
the 2-core development machine under load, and the demo run's fit stage 10.9 s against
3.5 s (same results). Set the variables in the environment to override.
"""

import logging
import os

import pytest

for _key in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_key, "1")


@pytest.fixture
def failing_optimizer(monkeypatch):
    """Every scipy.optimize.minimize call of the fit optimiser stops after one iteration
    and reports failure (to test how non-convergence is flagged and warned about)."""
    from driftband.fit import optimize as fit_optimize

    real = fit_optimize.optimize.minimize

    def failing(*args, **kwargs):
        r = real(*args, **{**kwargs, "options": {"maxiter": 1}})
        r.success = False
        return r

    monkeypatch.setattr(fit_optimize.optimize, "minimize", failing)


@pytest.fixture(autouse=True)
def _restore_loggers():
    """Give each test the loggers as it found them: ``driftband.cli.main`` points the
    "driftband" and "py.warnings" loggers at the sys.stderr of its call (a test's capture
    stream, closed afterwards), which would otherwise receive the next test's records."""
    saved = [
        (lg, lg.handlers[:], lg.level, lg.propagate)
        for lg in (logging.getLogger("driftband"), logging.getLogger("py.warnings"))
    ]
    yield
    for lg, handlers, level, propagate in saved:
        lg.handlers[:] = handlers
        lg.setLevel(level)
        lg.propagate = propagate
