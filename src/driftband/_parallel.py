"""Independent tasks on local worker processes or on a Dask cluster.

One small layer serves region counting (``driftband spectra``) and bootstrap refits
(``driftband fit --bootstrap``):

* **Local** (the default, needs nothing beyond the standard library):
  :class:`concurrent.futures.ProcessPoolExecutor` with ``workers`` processes (default: the
  cores this process may use). ``workers=1`` runs the tasks in this process, one after the
  other. A worker process that dies (killed, out of memory) breaks the pool; the pool is
  started again and the tasks that had not returned are submitted again (at most
  ``retries`` times each).
* **Cluster**: ``scheduler`` is the address of a running ``dask.distributed`` scheduler
  (``tcp://HOST:8786``) or a :class:`distributed.Client`. Tasks are submitted with
  ``retries=``; a task whose worker dies is run again elsewhere by the scheduler (up to
  ``distributed.scheduler.allowed-failures`` times). Dask is an optional dependency
  (``pip install 'driftband[cluster]'``).

Whatever runs the tasks, a result is kept once per task index (a task run twice after a
failure is never counted twice, a task never returned is never silently missing), and
:func:`map_reduce` combines results in a tree whose shape depends only on the number of
tasks, in task order, so the outcome is the same for 1, 2 or N workers and for local or
cluster runs. At most a few tasks per worker are in flight, so memory stays bounded by a
few tasks, not by the whole job.

Errors a user can fix (:class:`~driftband.exceptions.DriftbandError`) raised in a task are
sent back as values, not retried, and raised again here, unchanged.

Longer than the ~600-line guide (about 690 lines after formatting): the local and the
dask back ends share one task loop (retries, in-order results, tree sums), and keeping
them together keeps the guarantees of that loop in one place.
"""

from __future__ import annotations

import concurrent.futures as cf
import contextlib
import gc
import logging
import multiprocessing
import os
import signal
import socket
import sys
import threading
import time
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures.process import BrokenProcessPool
from multiprocessing.context import BaseContext
from typing import Any

from threadpoolctl import threadpool_limits

from ._warnings import plain_warnings
from .exceptions import DriftbandError, OptionError

__all__ = [
    "Interrupted",
    "interruptible",
    "CONNECT_TIMEOUT",
    "DEFAULT_RETRIES",
    "WorkerLostError",
    "available_cores",
    "connect",
    "dask_map",
    "map_reduce",
    "parallel_map",
    "resolve_workers",
    "scheduler_address",
    "single_blas_thread",
    "tree_reduce",
]

log = logging.getLogger("driftband")

#: Times a task is submitted again after its worker died (or, on a cluster, after it
#: raised an unexpected error).
DEFAULT_RETRIES = 3
#: Seconds to wait for a dask scheduler to answer (environment variable
#: ``DRIFTBAND_CONNECT_TIMEOUT`` overrides it).
CONNECT_TIMEOUT = 10.0
_CLUSTER_HINT = "pip install 'driftband[cluster]'"


class WorkerLostError(DriftbandError):
    """Worker processes kept dying on the same tasks (e.g. out of memory)."""


# ---------------------------------------------------------------------------- workers


def available_cores() -> int:
    """Cores this process may run on (its CPU affinity where known), at least 1."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def resolve_workers(workers: int | None) -> int:
    """The number of local worker processes: ``workers``, or :func:`available_cores`.

    Raises
    ------
    OptionError
        ``workers`` below 1.
    """
    if workers is None:
        return available_cores()
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise OptionError(f"--workers must be a whole number >= 1, got {workers!r}")
    return workers


def _call(fn: Callable[[Any], Any], task: Any) -> tuple[bool, Any]:
    """Run ``fn(task)`` in a worker; a user-fixable error comes back as a value."""
    try:
        return True, fn(task)
    except DriftbandError as err:
        return False, err


class Interrupted(KeyboardInterrupt):
    """SIGINT, SIGTERM or SIGHUP reached the main process (``signum`` says which)."""

    def __init__(self, signum: int) -> None:
        super().__init__(signal.Signals(signum).name)
        self.signum = signum


def _raise_interrupted(signum: int, frame: Any) -> None:
    raise Interrupted(signum)


@contextlib.contextmanager
def interruptible() -> Iterator[None]:
    """Turn SIGTERM and SIGHUP into :class:`Interrupted` (a KeyboardInterrupt) in the block.

    The usual cleanup then runs for every signal as for Ctrl-C: worker processes are
    ended, temporary outputs removed. Outside the main thread this does nothing.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    saved = {}
    for sig in (signal.SIGTERM, signal.SIGHUP):
        saved[sig] = signal.signal(sig, _raise_interrupted)
    try:
        yield
    finally:
        for sig, old in saved.items():
            signal.signal(sig, old)


def single_blas_thread() -> Any:
    """A context in which BLAS and OpenMP libraries run one thread (threadpoolctl).

    driftband's linear algebra is on small matrices (a few parameters, a spectrum of n
    entries), where a threaded BLAS only adds synchronisation: one L-BFGS-B step of a
    4-parameter problem took 6 ms with OpenBLAS threads on a loaded 2-core machine and
    0.2 ms with one thread. Parallel work goes to worker processes instead.
    """
    return threadpool_limits(limits=1)


def _watch_parent(parent: int) -> None:
    """End this worker process as soon as its parent is gone (whatever ended it)."""
    while True:
        time.sleep(0.5)
        if os.getppid() != parent:
            os._exit(1)


def _init_local_worker() -> None:
    """Initializer of local worker processes."""
    # Ctrl-C and a hang-up go to the whole process group: the parent handles them and
    # stops the workers (SIGTERM, which abort() sends, keeps its default: end at once).
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGHUP, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # not the parent's handler (forked)
    plain_warnings()
    # A parent killed without cleaning up (SIGKILL, or a signal while the pool starts)
    # must not leave its workers behind.
    threading.Thread(
        target=_watch_parent, args=(os.getppid(),), name="driftband-watch-parent", daemon=True
    ).start()
    # One BLAS thread per worker process: the environment for libraries not yet loaded
    # (spawned workers), and threadpoolctl for those already loaded (forked workers
    # inherit the parent's BLAS).
    for key in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(key, "1")
    threadpool_limits(limits=1)


def _foreign_threads() -> list[threading.Thread]:
    """Live threads other than the main one and driftband's own helpers (named
    ``driftband-*``: file hashing, connecting; they hold no lock a forked child needs)."""
    main = threading.main_thread()
    return [
        t for t in threading.enumerate() if t is not main and not t.name.startswith("driftband-")
    ]


def _mp_context() -> BaseContext:
    """Start method of local workers: the platform's default (``fork`` on Linux: workers
    start at once, with everything imported), but ``spawn`` when other threads run in
    this process (forking them can deadlock a child)."""
    method = (
        multiprocessing.get_start_method(allow_none=True)
        or multiprocessing.get_context().get_start_method()
    )
    if method == "fork" and _foreign_threads():
        method = "spawn"
    return multiprocessing.get_context(method)


class _LocalBackend:
    """A ProcessPoolExecutor that is started again when a worker process dies."""

    broken_errors: tuple[type[BaseException], ...] = (BrokenProcessPool,)

    def __init__(self, workers: int) -> None:
        self.workers = workers
        self.pool: cf.ProcessPoolExecutor | None = None
        self.start()

    @property
    def slots(self) -> int:
        return self.workers

    def start(self) -> None:
        self.pool = cf.ProcessPoolExecutor(
            max_workers=self.workers, mp_context=_mp_context(), initializer=_init_local_worker
        )

    def restart(self) -> None:
        self.abort()
        self.start()

    def submit(
        self, fn: Callable[[Any], Any], task: Any, index: int, attempt: int
    ) -> cf.Future[tuple[bool, Any]]:
        if self.pool is None:  # only after abort() or close(), which end the run
            raise RuntimeError("the worker pool is shut down")
        return self.pool.submit(_call, fn, task)

    def wait(
        self, futures: Iterable[cf.Future[tuple[bool, Any]]]
    ) -> set[cf.Future[tuple[bool, Any]]]:
        done, _ = cf.wait(futures, return_when=cf.FIRST_COMPLETED)
        return done

    def abort(self) -> None:
        """Stop at once: cancel queued tasks and end the worker processes."""
        pool, self.pool = self.pool, None
        if pool is None:
            return
        procs = list((getattr(pool, "_processes", None) or {}).values())
        pool.shutdown(wait=False, cancel_futures=True)
        for p in procs:
            with contextlib.suppress(Exception):
                p.terminate()
        for p in procs:
            with contextlib.suppress(Exception):
                p.join(5)

    def close(self) -> None:
        pool, self.pool = self.pool, None
        if pool is not None:
            pool.shutdown(wait=True)


class _DaskBackend:
    """Tasks on a dask.distributed cluster through a Client."""

    def __init__(self, client: Any, retries: int, owned: bool, name: str) -> None:
        from distributed import KilledWorker

        self.client: Any = client  # a distributed.Client (no type stubs); None when closed
        self.retries = retries
        self.owned = owned
        self.name = name
        self.broken_errors = (KilledWorker,)
        import dask.config

        self.allowed_failures = int(dask.config.get("distributed.scheduler.allowed-failures", 3))
        self._slots = 0
        self._checked = 0.0
        self._token = os.urandom(4).hex()

    @property
    def slots(self) -> int:
        now = time.monotonic()
        if now - self._checked > 2.0:  # clusters grow and shrink (adaptive, batch jobs)
            self._checked = now
            try:
                self._slots = int(sum(self.client.nthreads().values()))
            except Exception:  # a transient scheduler hiccup: keep the last figure
                pass
        return max(self._slots, 2)

    def submit(self, fn: Callable[[Any], Any], task: Any, index: int, attempt: int) -> Any:
        return self.client.submit(
            _call,
            fn,
            task,
            retries=self.retries,
            pure=False,
            key=f"driftband-{self.name}-{self._token}-{index}-{attempt}",
            priority=-index,
        )

    def wait(self, futures: Iterable[Any]) -> set[Any]:
        from distributed import wait

        with self.client.as_current():
            return set(wait(list(futures), return_when="FIRST_COMPLETED").done)

    def abort(self) -> None:
        self.close()

    def close(self) -> None:
        if self.owned and self.client is not None:
            with _quiet_dask(), contextlib.suppress(Exception):
                self.client.close()
        self.client = None


# ---------------------------------------------------------------------------- dask


@contextlib.contextmanager
def _quiet_dask() -> Iterator[None]:
    """Keep distributed's connection chatter off stderr (driftband says it in one line)."""
    names = ("distributed", "tornado", "asyncio")
    old = {n: logging.getLogger(n).level for n in names}
    for n in names:
        logging.getLogger(n).setLevel(logging.CRITICAL)
    hook = sys.unraisablehook
    sys.unraisablehook = lambda *_: None
    try:
        yield
    finally:
        gc.collect()  # a half-made Client is closed here, silently
        sys.unraisablehook = hook
        for n, lv in old.items():
            logging.getLogger(n).setLevel(lv)


def _connect_timeout(timeout: float | None) -> float:
    if timeout is not None:
        return float(timeout)
    text = os.environ.get("DRIFTBAND_CONNECT_TIMEOUT")
    if not text:
        return CONNECT_TIMEOUT
    try:
        value = float(text)
    except ValueError:
        value = -1.0
    if not value > 0:
        raise OptionError(f"DRIFTBAND_CONNECT_TIMEOUT={text!r}: give a number of seconds > 0")
    return value


def _probe(address: str, timeout: float) -> None:
    """Fail fast, in one line, when nothing listens at a TCP scheduler address."""
    from distributed.comm import parse_address, parse_host_port

    try:
        scheme, loc = parse_address(address)
    except ValueError as err:
        raise OptionError(
            f"--scheduler {address!r}: not a scheduler address ({err}); "
            "expected e.g. tcp://HOST:8786"
        ) from None
    if scheme not in ("tcp", "tls"):
        return
    try:
        host, port = parse_host_port(loc, 8786)
    except ValueError as err:
        raise OptionError(
            f"--scheduler {address!r}: not a scheduler address ({err}); "
            "expected e.g. tcp://HOST:8786"
        ) from None
    try:
        sock = socket.create_connection((host, port), timeout=timeout)
    except OSError as err:
        why = (
            "timed out"
            if isinstance(err, TimeoutError | socket.timeout)
            else (err.strerror or type(err).__name__)
        )
        raise OptionError(
            f"--scheduler {address}: cannot reach a dask scheduler within "
            f"{timeout:g} s ({why}); start one with 'dask scheduler' and check "
            "the host, the port and the firewall"
        ) from None
    with sock:
        if scheme != "tcp":  # TLS: the server waits for the client's hello
            return
        # a dask scheduler starts its handshake as soon as a connection is accepted
        try:
            sock.settimeout(timeout)
            first = sock.recv(1)
        except OSError:
            first = b""
    if not first:
        raise OptionError(
            f"--scheduler {address}: something listens there but does not "
            f"answer like a dask scheduler within {timeout:g} s; check the "
            "port (a scheduler listens on 8786 unless told otherwise)"
        )


def _within(make: Callable[[], Any], seconds: float) -> Any:
    """``make()`` in a helper thread, given up (OptionError by the caller) after
    ``seconds``: a peer that stalls mid-handshake must not hang driftband."""
    box: dict[str, Any] = {}

    def run() -> None:
        try:
            box["value"] = make()
        except BaseException as err:  # handed to the calling thread
            box["error"] = err

    t = threading.Thread(target=run, name="driftband-connect", daemon=True)
    t.start()
    t.join(seconds)
    if t.is_alive():
        raise TimeoutError(f"no complete handshake after {seconds:g} s")
    if "error" in box:
        raise box["error"]
    return box["value"]


def connect(address: str, timeout: float | None = None) -> Any:
    """A :class:`distributed.Client` of the scheduler at ``address``.

    Parameters
    ----------
    address : str
        E.g. ``tcp://node17:8786`` (a bare ``HOST:PORT`` means TCP).
    timeout : float, optional
        Seconds to wait (default :data:`CONNECT_TIMEOUT`, or the environment variable
        ``DRIFTBAND_CONNECT_TIMEOUT``).

    Raises
    ------
    OptionError
        dask.distributed is not installed, the address is malformed, or no scheduler
        answers within the timeout (one line).
    """
    try:
        from distributed import Client
    except ImportError:
        raise OptionError(
            "--scheduler needs dask.distributed, which is not installed; "
            f"install it with: {_CLUSTER_HINT}"
        ) from None
    t = _connect_timeout(timeout)
    address = address.strip()
    if "://" not in address:
        address = "tcp://" + address
    _probe(address, t)
    with _quiet_dask():
        try:
            client = _within(lambda: Client(address, timeout=t, set_as_default=False), t + 5)
        except Exception as err:  # whatever a wrong peer makes the handshake raise
            msg = str(err).splitlines()[0] if str(err) else type(err).__name__
            msg = msg if len(msg) < 120 else msg[:117] + "..."
            raise OptionError(
                f"--scheduler {address}: cannot connect to a dask scheduler "
                f"within {t:g} s ({msg}); check that 'dask scheduler' runs "
                "there and that the client and the cluster use compatible "
                "dask versions"
            ) from None
    n = len(client.scheduler_info().get("workers", {}))
    log.info("connected to the dask scheduler at %s (%d worker(s))", address, n)
    if n == 0:
        log.warning(
            "the dask scheduler at %s has no workers yet; tasks wait until "
            "workers connect (dask worker %s ...)",
            address,
            address,
        )
    return client


def scheduler_address(scheduler: Any) -> str | None:
    """The address of a scheduler given as an address or a Client (for provenance)."""
    if scheduler is None or isinstance(scheduler, str):
        return scheduler
    return str(getattr(getattr(scheduler, "scheduler", None), "address", scheduler))


def _backend(
    workers: int | None, scheduler: Any, retries: int, name: str
) -> _LocalBackend | _DaskBackend | None:
    """``None`` (run in this process), a local pool or a dask backend."""
    if scheduler is not None and not (isinstance(scheduler, str) and not scheduler.strip()):
        if isinstance(scheduler, str):
            return _DaskBackend(connect(scheduler), retries, owned=True, name=name)
        return _DaskBackend(scheduler, retries, owned=False, name=name)
    n = resolve_workers(workers)
    return None if n <= 1 else _LocalBackend(n)


# ---------------------------------------------------------------------------- running


def _lost(index: int, attempts: int, err: BaseException | None) -> WorkerLostError:
    what = f" ({type(err).__name__}: {err})" if err is not None and str(err) else ""
    return WorkerLostError(
        f"task {index} was lost {attempts} times because its worker "
        f"process died{what}; it may need more memory than a worker has: "
        "use fewer workers per machine or smaller tasks (e.g. "
        "--region-size)"
    )


def _run(
    fn: Callable[[Any], Any],
    tasks: Iterable[Any],
    backend: _LocalBackend | _DaskBackend | None,
    on_result: Callable[[int, Any], None],
    window: int | None = None,
    retries: int = DEFAULT_RETRIES,
) -> int:
    """Run every task, calling ``on_result(index, result)`` once per task index.

    ``window`` bounds how far submission may run ahead of the lowest unfinished index
    (it bounds the results an in-order consumer must buffer). Returns the task count.
    """
    it = enumerate(tasks)
    if backend is None:
        n = 0
        for i, task in it:
            ok, value = _call(fn, task)
            if not ok:
                raise value
            on_result(i, value)
            n = i + 1
        return n
    pending: dict[Any, tuple[int, Any, int]] = {}
    finished: set[int] = set()
    lowest_open = [0]  # smallest index not finished yet (for the window)
    state = {"next": 0, "exhausted": False}

    # after a worker died: the tasks to submit again, and the suspects (tasks that were
    # running or queued in the pool that broke). While there are suspects one task at a
    # time is in flight, so that a task that kills its worker is found and blamed alone.
    retry: list[tuple[int, Any, int]] = []
    suspects: set[int] = set()

    def fill() -> None:
        while len(pending) < (1 if suspects else 2 * backend.slots + 1):
            if retry:
                i, task, attempts = retry.pop(0)
                pending[backend.submit(fn, task, i, attempts)] = (i, task, attempts)
                continue
            if state["exhausted"]:
                return
            if window is not None and state["next"] >= lowest_open[0] + window:
                return
            try:
                i, task = next(it)
            except StopIteration:
                state["exhausted"] = True
                return
            state["next"] = i + 1
            pending[backend.submit(fn, task, i, 0)] = (i, task, 0)

    try:
        fill()
        while pending:
            done = backend.wait(list(pending))
            broken: list[tuple[int, Any, int, BaseException | None]] = []
            for fut in sorted(done, key=lambda f: pending[f][0]):
                i, task, attempts = pending.pop(fut)
                try:
                    ok, value = fut.result()
                except backend.broken_errors as err:
                    broken.append((i, task, attempts, err))
                    continue
                except cf.CancelledError:
                    broken.append((i, task, attempts, None))
                    continue
                if not ok:
                    raise value
                if i < lowest_open[0] or i in finished:  # cannot happen: one future
                    # per index at a time
                    raise RuntimeError(f"task {i} returned twice")
                finished.add(i)
                suspects.discard(i)
                on_result(i, value)
            if broken:
                if not isinstance(backend, _LocalBackend):
                    # the scheduler already reran the task on other workers, up to
                    # distributed.scheduler.allowed-failures times
                    i, _task, _attempts, why = broken[0]
                    raise _lost(i, backend.allowed_failures + 1, why)
                # the whole pool is gone: every task not returned is submitted again
                broken += [(i, t, a, None) for i, t, a in pending.values()]
                pending.clear()
                log.warning(
                    "a worker process died; restarting the workers and resubmitting %d task(s)",
                    len(broken),
                )
                backend.restart()
                alone = len(broken) == 1  # the only task in flight: it killed its worker
                for i, task, attempts, why in sorted(broken, key=lambda x: x[0]):
                    if alone and attempts >= retries:
                        raise _lost(i, attempts + 1, why)
                    suspects.add(i)
                    retry.append((i, task, attempts + 1))
                retry.sort(key=lambda x: x[0])
            while lowest_open[0] in finished:
                finished.discard(lowest_open[0])
                lowest_open[0] += 1
            fill()
    except BaseException:
        backend.abort()
        raise
    backend.close()
    return state["next"]


def parallel_map(
    fn: Callable[[Any], Any],
    tasks: Iterable[Any],
    *,
    workers: int | None = None,
    scheduler: Any = None,
    retries: int = DEFAULT_RETRIES,
    name: str = "task",
    on_result: Callable[[int, Any], None] | None = None,
) -> list[Any]:
    """``[fn(t) for t in tasks]``, run on worker processes or a dask cluster.

    Parameters
    ----------
    fn : callable
        A module-level function (it is pickled by reference for local workers).
    tasks : iterable
        Picklable task arguments; consumed lazily (a few per worker in flight).
    workers : int, optional
        Local worker processes (default :func:`available_cores`; 1 runs here, in turn).
    scheduler : str or distributed.Client, optional
        Run on this dask cluster instead (``workers`` is then ignored).
    retries : int
        Resubmissions of a task whose worker died.
    name : str
        Label of the tasks (dask keys, messages).
    on_result : callable, optional
        Called as ``on_result(index, result)`` as each task finishes (any order).

    Returns
    -------
    list
        Results in task order.
    """
    out: dict[int, Any] = {}

    def keep(i: int, value: Any) -> None:
        out[i] = value
        if on_result is not None:
            on_result(i, value)

    n = _run(fn, tasks, _backend(workers, scheduler, retries, name), keep, retries=retries)
    missing = [i for i in range(n) if i not in out]
    if missing:  # a guard: _run returns only when every task has returned
        raise RuntimeError(f"tasks {missing[:5]} returned no result")
    return [out[i] for i in range(n)]


def dask_map(
    fn: Callable[[Any], Any], tasks: Iterable[Any], scheduler: Any, retries: int = DEFAULT_RETRIES
) -> list[Any]:
    """:func:`parallel_map` on a dask cluster (address or Client)."""
    return parallel_map(fn, tasks, scheduler=scheduler, retries=retries)


class _OrderedTree:
    """Combine values pushed in order in a balanced binary tree of fixed shape.

    The shape depends only on how many values are pushed (a binary counter: two partial
    results of equal size are combined as soon as both exist), and the left operand is
    always the earlier one, so the result is the same however the values were computed.
    At most log2(n) partial results are held.
    """

    def __init__(self, combine: Callable[[Any, Any], Any]) -> None:
        self.combine = combine
        self.stack: list[tuple[int, Any]] = []

    def push(self, value: Any) -> None:
        size = 1
        while self.stack and self.stack[-1][0] == size:
            _, left = self.stack.pop()
            value = self.combine(left, value)
            size *= 2
        self.stack.append((size, value))

    def result(self, empty: Callable[[], Any] | None = None) -> Any:
        if not self.stack:
            if empty is None:
                raise ValueError("nothing to combine")
            return empty()
        value = self.stack[-1][1]
        for _, left in reversed(self.stack[:-1]):
            value = self.combine(left, value)
        return value


def tree_reduce(
    values: Iterable[Any],
    combine: Callable[[Any, Any], Any],
    empty: Callable[[], Any] | None = None,
) -> Any:
    """Combine ``values`` in order in a fixed-shape binary tree (see :func:`map_reduce`)."""
    tree = _OrderedTree(combine)
    for v in values:
        tree.push(v)
    return tree.result(empty)


def map_reduce(
    fn: Callable[[Any], Any],
    tasks: Iterable[Any],
    combine: Callable[[Any, Any], Any],
    *,
    empty: Callable[[], Any] | None = None,
    workers: int | None = None,
    scheduler: Any = None,
    retries: int = DEFAULT_RETRIES,
    name: str = "task",
    on_result: Callable[[int, Any], None] | None = None,
) -> Any:
    """Run ``fn`` over ``tasks`` in parallel and combine the results in a fixed tree.

    Results are folded in task order as soon as the earlier ones are in, into a binary tree
    whose shape depends only on the number of tasks: ``((r0+r1)+(r2+r3))+...``. Only the
    results that arrived ahead of an unfinished task and log2(n) partial sums are held.

    Parameters
    ----------
    fn, tasks, workers, scheduler, retries, name, on_result
        As for :func:`parallel_map`.
    combine : callable
        ``combine(earlier, later)``, associative.
    empty : callable, optional
        Result for no tasks (an error without it).

    Returns
    -------
    object
        The combined result.
    """
    tree = _OrderedTree(combine)
    buffer: dict[int, Any] = {}
    nxt = [0]

    def take(i: int, value: Any) -> None:
        if on_result is not None:
            on_result(i, value)
        buffer[i] = value
        while nxt[0] in buffer:
            tree.push(buffer.pop(nxt[0]))
            nxt[0] += 1

    backend = _backend(workers, scheduler, retries, name)
    window = None if backend is None else max(8, 8 * backend.slots)
    n = _run(fn, tasks, backend, take, window=window, retries=retries)
    if buffer or nxt[0] != n:  # a guard: every index is pushed exactly once
        raise RuntimeError(f"{n - nxt[0]} task result(s) were not combined")
    return tree.result(empty)
