"""Where per-file measuring runs: a local process pool, or a Dask cluster.

Both executors take the same tasks and yield ``(task, outcome)`` as files
finish, where an outcome is plain data:

    ("ok", Measurement)
    ("error", one-line message, retry)   # retry: a crash/timeout/memory error, try next run

The local pool is our own small pool of worker processes (one task at a time
each, talking over a pipe), so the parent always knows which file a worker
holds: a worker that dies (segfault, OOM kill, SIGKILL) or overruns its time
limit is killed and replaced, and only that file becomes an error row. Each
worker caps its own address space (RLIMIT_AS) so a runaway file ends in a
MemoryError row instead of swapping the machine.

A worker that exits while starting, before it says "ready" (it imported a user's
unguarded script again, or the engine cannot load), is no file's fault: its file goes
back to the queue. Once more workers in a row have failed that way than the pool holds,
every file left becomes an error row that says why (checker/run/workerstart.py), instead of a
"died while measuring" row and a new worker for each.

Workers never write anything; the parent alone writes the store. What runs inside a
worker (its loop, measuring one file) is checker/run/workerproc.py; the Dask pool
(same tasks and outcomes) is in checker/run/daskpool.py.
"""

from __future__ import annotations

import contextlib
import functools
import math
import os
import time
from collections import deque
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING

from checker.model.errors import UsageError
from checker.run import live
from checker.run.workerproc import Outcome, worker_main
from checker.run.workerstart import exit_text, start_failure

if TYPE_CHECKING:  # annotations only: importing this module must not load numpy (see
    from checker.meters.base import MeasureOptions  # start_worker_server)

#: Default per-worker address-space ceiling (virtual memory, includes libraries).
DEFAULT_MEMORY_MB = 4096
#: Default per-file time limit: this much plus DEFAULT_TIME_PER_AUDIO_S per second of audio.
DEFAULT_TIME_BASE_S = 120.0
DEFAULT_TIME_PER_AUDIO_S = 1.0
#: When the header gives no length, assume at least this many seconds per byte (16 kbit/s).
SECONDS_PER_BYTE_UNKNOWN = 1.0 / 2000.0
#: Allowance for a worker to start and receive its file before the file's own limit runs.
STARTUP_GRACE_S = 60.0


@dataclass(frozen=True)
class Task:
    index: int  # position in the batch (stable id)
    path: str
    size_bytes: int = 0


def time_limit_s(task: Task, duration_s: float | None, fixed_s: float | None = None) -> float:
    """Per-file time limit: ``fixed_s`` if given, else generous and scaled by duration."""
    if fixed_s is not None:
        return float(fixed_s)
    if duration_s is None or not math.isfinite(duration_s):
        duration_s = task.size_bytes * SECONDS_PER_BYTE_UNKNOWN
    return DEFAULT_TIME_BASE_S + DEFAULT_TIME_PER_AUDIO_S * duration_s


def usable_cores() -> int:
    """Cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def worker_measure_fn(workers: int, cores: int) -> Callable:
    """What a local worker measures with: with at least two of the ``cores`` it may use per
    worker, each file uses a second thread (read-ahead and the meters' prepare steps, as
    ``deliverycheck measure`` does); else one thread each, so workers do not compete."""
    from checker.analysis.onepass import measure

    return functools.partial(measure, read_ahead=True) if cores >= 2 * workers else measure


def longest_first(tasks: list[Task]) -> list[Task]:
    """The order files go to the workers: the largest first (size stands in for measuring
    time), ties in batch order. A long file handed out last would be measured alone while
    the other workers sit idle; handed out first, the short ones fill in around it
    (longest-processing-time-first scheduling)."""
    return sorted(tasks, key=lambda task: -task.size_bytes)


# -- local process pool ------------------------------------------------------------


class _Worker:
    def __init__(self, ctx, memory_mb, measure_fn):
        parent_conn, child_conn = ctx.Pipe(duplex=True)
        self.conn = parent_conn
        self.slot = live.new_slot(ctx)  # seconds decoded of its file (checker.run.live)
        self.process = ctx.Process(
            target=worker_main, args=(child_conn, memory_mb, measure_fn, self.slot), daemon=True
        )
        self.process.start()
        child_conn.close()
        self.task: Task | None = None
        self.deadline = math.inf
        self.started = 0.0
        self.ready = False  # it said so: it got through its start (the main module's import)

    def assign(self, task: Task, options: MeasureOptions, provisional_limit_s: float) -> bool:
        """Hand over one file; False when the worker is gone (its pipe is closed)."""
        try:
            self.conn.send((task.index, task.path, options))
        except OSError:
            return False
        self.task = task
        self.started = time.monotonic()
        self.deadline = self.started + STARTUP_GRACE_S + provisional_limit_s
        return True

    def kill(self) -> None:
        try:
            self.process.kill()
            self.process.join(timeout=5)
        except Exception:  # pragma: no cover
            pass
        self.conn.close()

    def stop(self) -> None:
        with contextlib.suppress(OSError):
            self.conn.send(None)
        self.process.join(timeout=1)
        if self.process.is_alive():
            self.kill()
        else:
            self.conn.close()


#: Modules the first measure() of a process imports on first use (the bandwidth meter's FFT,
#: numpy.ma under np.median, threadpoolctl under the one-thread rule): loaded once in the fork
#: server, so no worker imports them again (about 25 ms of CPU per worker here).
LATE = ("numpy.fft", "numpy.ma", "threadpoolctl")


def _context():
    import multiprocessing as mp  # here: `deliverycheck --help` and `measure` do not need it

    methods = mp.get_all_start_methods()
    # forkserver: workers start from a clean process (no inherited threads or
    # pipes of siblings), with the engine preloaded so starting one is cheap.
    if "forkserver" in methods:
        ctx = mp.get_context("forkserver")
        from checker.meters import METERS

        ctx.set_forkserver_preload(
            ["checker.run.workers", "checker.analysis.onepass", *(m for m, _ in METERS), *LATE]
        )
        return ctx
    return mp.get_context("spawn")  # pragma: no cover - Windows


def start_worker_server() -> None:
    """Start the process the local workers are forked from now, if it is not running yet.

    It loads the engine (numpy, soundfile, every meter: about 0.3-0.4 s of CPU) on its own
    core while this process goes on (the command's own imports, the profile, discovery, the
    store); without this call the first worker start waits for it (0.4-0.85 s of wall time
    measured here). The command line calls it as soon as it knows files may be measured
    locally; ``LocalPool.run`` starts it anyway. Idempotent, and never raises: a server that
    cannot start now is started (or reported) by the pool."""
    if _context().get_start_method() != "forkserver":  # pragma: no cover - Windows
        return
    with contextlib.suppress(Exception):
        from multiprocessing import forkserver

        forkserver.ensure_running()


class LocalPool:
    """A pool of ``jobs`` worker processes with per-file time limits and crash recovery."""

    def __init__(
        self,
        jobs: int,
        memory_mb: int | None = DEFAULT_MEMORY_MB,
        measure_fn: Callable | None = None,
        timeout_s: float | None = None,
    ):
        if jobs < 1:
            raise UsageError(f"jobs: {jobs} (expected >= 1)", parameter="jobs")
        from checker.analysis.onepass import measure

        self.jobs = jobs
        self.memory_mb = memory_mb
        self.measure_fn = measure_fn or measure
        self.timeout_s = timeout_s
        self.workers_started = 0
        self.start_failures = 0  # workers that exited before they took a file, in a row
        self.ledger = None

    def run(
        self, tasks: list[Task], options: MeasureOptions, ledger=None
    ) -> Iterator[tuple[Task, Outcome]]:
        """``ledger`` (checker.run.progress.AudioLedger): told each file's size, declared
        length, seconds decoded as it goes and seconds at the end."""
        from multiprocessing.connection import wait

        pending = deque(longest_first(tasks))
        if not pending:
            return
        self.ledger = ledger
        for task in tasks if ledger is not None else ():
            ledger.plan(task.index, task.size_bytes)
        ctx = _context()
        workers: list[_Worker] = []
        self.start_failures = 0
        try:
            while pending or any(w.task for w in workers):
                for w in [w for w in workers if w.task is None and not w.process.is_alive()]:
                    w.kill()  # an idle worker that exited after its last file: replace it
                    workers.remove(w)
                while pending and len(workers) < self.jobs:
                    workers.append(_Worker(ctx, self.memory_mb, self.measure_fn))
                    self.workers_started += 1
                for w in list(workers):
                    if w.task is None and pending:
                        task = pending.popleft()
                        if w.assign(task, options, self._limit(task)):
                            continue
                        # its pipe broke: try a new worker, but not forever
                        yield from self._lost_at_start(w, workers, task, pending)
                busy = [w for w in workers if w.task is not None]
                if not busy:
                    continue
                now = time.monotonic()
                wait_s = max(0.0, min(w.deadline for w in busy) - now)
                handles = [w.conn for w in busy] + [w.process.sentinel for w in busy]
                ready = set(wait(handles, timeout=min(wait_s, 3600.0)))
                finished = []
                for w in busy:
                    result = self._service(w, ready)
                    if result is None:
                        continue
                    task, outcome, replace = result
                    if outcome is None:  # it exited while starting: not this file's doing
                        finished.extend(self._lost_at_start(w, workers, task, pending))
                        continue
                    if ledger is not None:
                        ledger.finished(task.index, *live.outcome_seconds(outcome, w.slot.value))
                    if replace:
                        w.kill()
                        workers.remove(w)
                    elif pending and w.assign(pending[0], options, self._limit(pending[0])):
                        pending.popleft()  # its next file first: it measures while we store
                    finished.append((task, outcome))
                yield from finished
        finally:
            for w in workers:
                if w.task is not None:
                    w.kill()
                else:
                    w.stop()

    def _limit(self, task: Task) -> float:
        return time_limit_s(task, None, self.timeout_s)

    def _lost_at_start(
        self, w: _Worker, workers: list[_Worker], task: Task, pending: deque
    ) -> list[tuple[Task, Outcome]]:
        """A worker exited before it took ``task`` (its pipe closed when given the file, or it
        exited before saying "ready"): drop it and put the file back. Once this has happened
        more times in a row (no worker said "ready" in between) than the pool has workers,
        every file still waiting becomes an error row at once (checker/run/workerstart.py
        says why and what to do), and none is left to start another worker for."""
        w.kill()
        workers.remove(w)
        self.start_failures += 1
        pending.appendleft(task)
        if self.start_failures <= self.jobs:
            return []
        code = exit_text(w.process.exitcode)
        rows = []
        while pending:
            task = pending.popleft()
            if self.ledger is not None:
                self.ledger.finished(task.index, 0.0, whole=False)
            text = start_failure(task.path, code, self.start_failures)
            rows.append((task, ("error", text, True)))
        return rows

    def _service(self, w: _Worker, ready: set):
        """Handle what happened to one busy worker; (task, outcome, replace) or None.
        Outcome None: the worker exited before saying "ready" (run() hands it, file and all,
        to _lost_at_start, which drops the worker itself)."""
        task = w.task
        assert task is not None
        if w.conn in ready or w.process.sentinel in ready:
            try:
                while w.conn.poll():
                    kind, index, payload = w.conn.recv()
                    if kind == "ready":
                        w.ready = True
                        self.start_failures = 0  # workers can start: earlier exits were chance
                        continue
                    if index != task.index:  # pragma: no cover - protocol guard
                        continue
                    if kind == "started":  # the file's own clock starts now
                        w.started = time.monotonic()
                        w.deadline = w.started + time_limit_s(task, payload, self.timeout_s)
                        if self.ledger is not None:
                            self.ledger.started(task.index, payload, live.reader(w.slot))
                    elif kind == "done":
                        w.task = None
                        return task, payload, False
            except (EOFError, OSError):
                pass
            if not w.process.is_alive() or w.process.sentinel in ready:
                w.process.join(timeout=5)
                if not w.process.is_alive():
                    if not w.ready:  # it never got through its start: no file's fault
                        w.task = None
                        return task, None, False
                    code = w.process.exitcode
                    return (
                        task,
                        (
                            "error",
                            f"{task.path}: worker process died while measuring "
                            f"({exit_text(code)}; e.g. out of memory or a decoder crash)",
                            True,
                        ),
                        True,
                    )
        if time.monotonic() >= w.deadline:
            limit = w.deadline - w.started
            return (
                task,
                (
                    "error",
                    f"{task.path}: measuring took longer than the time limit "
                    f"({limit:.0f} s) and was stopped",
                    True,
                ),
                True,
            )
        return None
