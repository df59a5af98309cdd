"""Library thread pools run one thread wherever deliverycheck measures (checker/dsp/threads.py).

The count comes from threadpoolctl.threadpool_info(), which asks each loaded pool library
(OpenBLAS in numpy's and scipy's wheels) for its current thread count. The doubles that run in
worker processes live at module level so the workers can import them.
"""

from __future__ import annotations

import os
import subprocess
import sys

import pytest
import threadpoolctl
from signals import sine, write

from checker.analysis.onepass import measure
from checker.meters.base import MeasureOptions
from checker.meters.truepeak import TruePeakMeter
from checker.run.workers import LocalPool, Task


def _max_threads() -> int:
    return max([p["num_threads"] for p in threadpoolctl.threadpool_info()] or [1])


def _probe_measure(path, options):
    """Runs in a check worker: the pools' thread count before and inside measure()."""
    seen: list[int] = []
    feed = TruePeakMeter.feed

    def spy(self, block):
        seen.append(_max_threads())
        return feed(self, block)

    TruePeakMeter.feed = spy
    try:
        before = _max_threads()
        measure(path, options)
    finally:
        TruePeakMeter.feed = feed
    return {"before": before, "inside": seen, "env": os.environ.get("OPENBLAS_NUM_THREADS")}


@pytest.fixture
def wav(tmp_path):
    return write(tmp_path / "tone.wav", sine(997.0, -20.0, 1.0, channels=2))


def test_measure_runs_one_thread_pools_and_restores_the_callers(wav, monkeypatch):
    if not threadpoolctl.threadpool_info():
        pytest.skip("no thread pool library loaded")
    seen: list[int] = []
    feed = TruePeakMeter.feed
    monkeypatch.setattr(
        TruePeakMeter, "feed", lambda self, block: (seen.append(_max_threads()), feed(self, block))
    )
    # a library caller that runs its BLAS with two threads
    with threadpoolctl.threadpool_limits(limits=2):
        callers = _max_threads()
        measure(wav)
        after = _max_threads()
    assert seen and max(seen) == 1  # inside measure(): one thread per pool
    assert after == callers  # the caller's setting is back afterwards


def test_check_worker_runs_one_thread_pools(wav):
    pool = LocalPool(1, memory_mb=None, measure_fn=_probe_measure)
    [(task, outcome)] = list(pool.run([Task(0, str(wav))], MeasureOptions()))
    assert outcome[0] == "ok", outcome
    probe = outcome[1]
    assert probe["before"] == 1  # the worker claimed its process at start
    assert probe["inside"] and max(probe["inside"]) == 1
    assert probe["env"] == "1"  # libraries loaded later in the worker start with one thread


def test_command_line_claims_its_process_and_plain_import_does_not():
    most = "max([p['num_threads'] for p in threadpoolctl.threadpool_info()] or [1])"
    env = {k: v for k, v in os.environ.items() if not k.endswith("_NUM_THREADS")}
    env["OPENBLAS_CORETYPE"] = "Haswell"  # the kernel that splits products across threads
    env["OPENBLAS_NUM_THREADS"] = "2"  # what a user's shell might carry

    def run(code: str) -> list[str]:
        done = subprocess.run(
            [sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True
        )
        return done.stdout.split()

    assert run(f"import checker.cli.main, threadpoolctl; print({most})") == ["1"]
    # importing the library leaves the caller's pools as numpy set them up
    plain, imported = run(
        f"import numpy, threadpoolctl; a = {most}; import checker; print(a, {most})"
    )
    assert imported == plain
