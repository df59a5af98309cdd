"""Progress within a file: a worker's seconds decoded so far, shared with the parent.

Each local worker owns one shared double (``slot``, made by the parent with
``multiprocessing``'s ``RawValue``): the worker sets it to 0 before it says "started"
for a file, and ``measure()`` calls the reporter after every block with the frames
measured so far. The parent reads the slot for the progress line, only between that
file's "started" and its end, so the pipe's ordering keeps one file's seconds from
being counted for another. No lock: one writer, aligned 8-byte stores, and a worker
killed mid-write (time limit, memory ceiling) could never leave a lock held for the
parent to wait on. Cost per block: one Python call and one store
(``make bench``, "progress within a file").

``DELIVERYCHECK_HOLD_UNTIL`` (tests only): a worker that has reported its first block
waits until that path exists (60 s at most), so a test can see the progress line move
inside one file without depending on timing; ``deliverycheck measure`` honours it too.
``DELIVERYCHECK_HOLD_SET_UNTIL`` does the same for a batch's stem-set read (``held``).
"""

from __future__ import annotations

import inspect
import os
import time
from collections.abc import Callable

#: A path: after its first reported block a worker (and ``deliverycheck measure``) waits
#: for it to exist (tests only).
HOLD_ENV = "DELIVERYCHECK_HOLD_UNTIL"
#: The same for the stem-set read in the parent (checker/run/stemsets.py), so a test can
#: let the files go and hold the set.
HOLD_SET_ENV = "DELIVERYCHECK_HOLD_SET_UNTIL"
HOLD_MAX_S = 60.0


def new_slot(ctx):
    """A shared double for one worker (``ctx``: the pool's multiprocessing context)."""
    return ctx.RawValue("d", 0.0)


def reader(slot) -> Callable[[], float]:
    """What the parent's progress line reads: the slot's seconds (checker.run.progress)."""
    return lambda: slot.value


def takes_on_frames(measure_fn: Callable) -> bool:
    """True when ``measure_fn`` accepts ``on_frames=`` (measure() and partials of it; a
    caller's own function may not, and is then called without it)."""
    try:
        params = inspect.signature(measure_fn).parameters
    except (TypeError, ValueError):
        return False
    return "on_frames" in params or any(p.kind is p.VAR_KEYWORD for p in params.values())


def reporter(slot) -> Callable[[int, int], None]:
    """The ``on_frames`` callback of a worker: seconds measured so far into ``slot``."""

    def report(frames: int, sample_rate_hz: int) -> None:
        slot.value = frames / sample_rate_hz if sample_rate_hz > 0 else 0.0

    return held(report)


def held(report: Callable[[int, int], None], env: str = HOLD_ENV) -> Callable[[int, int], None]:
    """``report`` itself, or, when the test hook ``env`` names a path, ``report`` followed
    by a wait until that path exists (60 s at most) after each block with frames."""
    hold = os.environ.get(env)
    if not hold:
        return report

    def report_then_hold(frames: int, sample_rate_hz: int) -> None:
        report(frames, sample_rate_hz)
        deadline = time.monotonic() + HOLD_MAX_S
        while frames and not os.path.exists(hold) and time.monotonic() < deadline:
            time.sleep(0.02)

    return report_then_hold


def outcome_seconds(outcome: tuple, decoded_s: float) -> tuple[float, bool]:
    """(seconds a finished file counts for, whole?): a measurement's duration, else what
    the worker had decoded when it failed or was stopped."""
    if outcome and outcome[0] == "ok":
        get = getattr(outcome[1], "get", None)
        value = get("duration_s") if callable(get) else None
        if isinstance(value, int | float) and value >= 0:
            return float(value), True
        return decoded_s, True
    return decoded_s, False
