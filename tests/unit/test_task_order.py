"""The order a batch hands its files to the workers (checker.run.workers.longest_first)."""

from __future__ import annotations

from checker.meters.base import MeasureOptions
from checker.run.workers import LocalPool, Task, longest_first


def _echo_measure(path, options):
    return path  # stands in for a Measurement: the worker hands it back as "ok"


def test_largest_files_go_first_and_ties_keep_batch_order():
    tasks = [
        Task(0, "a.wav", 10),
        Task(1, "b.wav", 300),
        Task(2, "c.wav", 10),
        Task(3, "d.wav", 0),  # size unknown (0): after every file with a size
        Task(4, "e.wav", 300),
    ]
    assert [t.index for t in longest_first(tasks)] == [1, 4, 0, 2, 3]
    assert [t.index for t in tasks] == [0, 1, 2, 3, 4]  # the caller's list is left alone


def test_one_worker_measures_in_that_order():
    tasks = [Task(0, "short.wav", 1_000), Task(1, "long.wav", 9_000), Task(2, "mid.wav", 5_000)]
    pool = LocalPool(1, memory_mb=None, measure_fn=_echo_measure)
    outcomes = list(pool.run(tasks, MeasureOptions()))
    assert [task.path for task, _ in outcomes] == ["long.wav", "mid.wav", "short.wav"]
    assert [outcome for _, outcome in outcomes] == [
        ("ok", "long.wav"),
        ("ok", "mid.wav"),
        ("ok", "short.wav"),
    ]
