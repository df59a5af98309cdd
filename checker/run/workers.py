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

Workers never write anything; the parent alone writes the store.
The Dask pool (same tasks and outcomes) is in checker/run/daskpool.py.
"""

from __future__ import annotations

import contextlib
import functools
import math
import os
import signal
import sys
import time
from collections import deque
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING

from checker.dsp.heap import keep_freed_memory
from checker.dsp.threads import claim_process
from checker.model.errors import CheckerError, UsageError
from checker.run import live

if TYPE_CHECKING:  # annotations only: importing this module must not load numpy (see
    from checker.meters.base import MeasureOptions  # start_worker_server)

MIB = 1024 * 1024
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


Outcome = tuple


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


def measure_task(
    path: str, options: MeasureOptions, measure_fn: Callable, on_frames: Callable | None = None
) -> Outcome:
    """Measure one file; never raises. Runs in a worker (process pool or Dask).
    ``on_frames``: passed to a ``measure_fn`` that takes it (checker.run.live)."""
    try:
        if on_frames is not None:
            return ("ok", measure_fn(path, options, on_frames=on_frames))
        return ("ok", measure_fn(path, options))
    except CheckerError as exc:
        return ("error", str(exc), False)
    except MemoryError:
        return ("error", f"{path}: ran out of memory while measuring (worker memory ceiling)", True)
    except Exception as exc:  # a bug or an OS hiccup: keep the batch going, try again next run
        text = str(exc).strip().replace("\n", " ")
        return ("error", f"{path}: measuring failed ({type(exc).__name__}: {text})", True)


def longest_first(tasks: list[Task]) -> list[Task]:
    """The order files go to the workers: the largest first (size stands in for measuring
    time), ties in batch order. A long file handed out last would be measured alone while
    the other workers sit idle; handed out first, the short ones fill in around it
    (longest-processing-time-first scheduling)."""
    return sorted(tasks, key=lambda task: -task.size_bytes)


def probe_duration_s(path: str) -> float | None:
    """Duration from the header (cheap), or None when unknown or unreadable."""
    try:
        import soundfile as sf

        info = sf.info(path)
        frames, rate = int(info.frames), int(info.samplerate)
        if rate <= 0 or frames < 0 or frames >= 2**62:
            return None
        return frames / rate
    except Exception:
        return None


# -- local process pool ------------------------------------------------------------


def _limit_memory(memory_mb: int | None) -> None:
    if not memory_mb:
        return
    try:
        import resource

        limit = int(memory_mb) * MIB
        soft, hard = resource.getrlimit(resource.RLIMIT_AS)
        if hard != resource.RLIM_INFINITY:
            limit = min(limit, hard)
        resource.setrlimit(resource.RLIMIT_AS, (limit, hard))
    except (ImportError, ValueError, OSError):  # pragma: no cover - non-POSIX
        pass


def _die_with_parent() -> None:
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            ctypes.CDLL(None).prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG
        except Exception:  # pragma: no cover
            pass


def _worker_main(conn, memory_mb, measure_fn, slot=None) -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent decides how to stop
    _die_with_parent()
    claim_process()  # one thread per library pool: parallelism is the pool's workers
    keep_freed_memory()  # no page faults for every file's buffers again
    _limit_memory(memory_mb)
    report = live.reporter(slot) if slot is not None and live.takes_on_frames(measure_fn) else None
    while True:
        try:
            msg = conn.recv()
        except (EOFError, OSError):
            return
        if msg is None:
            return
        index, path, options = msg
        if slot is not None:
            slot.value = 0.0  # before "started": the parent reads it only after that
        try:
            conn.send(("started", index, probe_duration_s(path)))
            conn.send(("done", index, measure_task(path, options, measure_fn, report)))
        except (BrokenPipeError, OSError):
            return


class _Worker:
    def __init__(self, ctx, memory_mb, measure_fn):
        parent_conn, child_conn = ctx.Pipe(duplex=True)
        self.conn = parent_conn
        self.slot = live.new_slot(ctx)  # seconds decoded of its file (checker.run.live)
        self.process = ctx.Process(
            target=_worker_main, args=(child_conn, memory_mb, measure_fn, self.slot), daemon=True
        )
        self.process.start()
        child_conn.close()
        self.task: Task | None = None
        self.deadline = math.inf
        self.started = 0.0

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


def _exit_text(code: int | None) -> str:
    if code is None:
        return "unknown exit"
    if code < 0:
        try:
            return f"killed by {signal.Signals(-code).name}"
        except ValueError:
            return f"killed by signal {-code}"
    return f"exit code {code}"


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
        broken = 0  # workers found dead before they got a file
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
                        w.kill()  # its pipe broke: try a new worker, but not forever
                        workers.remove(w)
                        broken += 1
                        if broken <= 3 * self.jobs:
                            pending.appendleft(task)
                        else:
                            code = _exit_text(w.process.exitcode)
                            if ledger is not None:
                                ledger.finished(task.index, 0.0, whole=False)
                            yield (
                                task,
                                ("error", f"{task.path}: no worker would start ({code})", True),
                            )
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

    def _service(self, w: _Worker, ready: set):
        """Handle what happened to one busy worker; (task, outcome, replace) or None."""
        task = w.task
        assert task is not None
        if w.conn in ready or w.process.sentinel in ready:
            try:
                while w.conn.poll():
                    kind, index, payload = w.conn.recv()
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
                    code = w.process.exitcode
                    return (
                        task,
                        (
                            "error",
                            f"{task.path}: worker process died while measuring "
                            f"({_exit_text(code)}; e.g. out of memory or a decoder crash)",
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
