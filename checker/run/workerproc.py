"""What runs inside a worker process: a local worker's loop (its process set up first) and the
measuring of one file, which Dask workers run too.

One job: the worker's side. The parent's side (the pool, its time limits, replacing workers that
die) is checker/run/workers.py; the protocol is described there.
"""

from __future__ import annotations

import signal
import sys
from collections.abc import Callable
from typing import TYPE_CHECKING

from checker.dsp.heap import keep_freed_memory
from checker.dsp.threads import claim_process
from checker.model.errors import CheckerError
from checker.run import live

if TYPE_CHECKING:  # annotations only: importing this module must not load numpy
    from checker.meters.base import MeasureOptions

MIB = 1024 * 1024

#: ("ok", Measurement) or ("error", one-line message, retry).
Outcome = tuple


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


def worker_main(conn, memory_mb, measure_fn, slot=None) -> None:
    """A local worker's life (checker.run.workers.LocalPool): set the process up, say
    "ready", then for each (index, path, options) received say "started" (with the header's
    duration, for the time limit) and "done" (with the outcome); stop at None or a closed pipe."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)  # the parent decides how to stop
    _die_with_parent()
    claim_process()  # one thread per library pool: parallelism is the pool's workers
    keep_freed_memory()  # no page faults for every file's buffers again
    _limit_memory(memory_mb)
    report = live.reporter(slot) if slot is not None and live.takes_on_frames(measure_fn) else None
    try:
        conn.send(("ready", -1, None))  # started: an exit from now on is not a start failure
    except (BrokenPipeError, OSError):
        return
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
