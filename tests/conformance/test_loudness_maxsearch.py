"""Loudness meter: the sliding-window maximum search (running-sum estimates, exact sums
only for candidates) finds exactly what summing every window would.

Reference: every window of the whole series summed exactly with numpy (the
definition of the 400 ms / 3 s window mean at a 1 ms / 10 ms hop), maximum and
its first position taken directly.
"""

from __future__ import annotations

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from checker.meters.slidingmax import _boundaries, _SlidingMax


def brute_force(sums: np.ndarray, window: int, rate: int, per_second: int):
    totals = sliding_window_view(sums, window).sum(axis=1)
    ends = np.arange(window, sums.size + 1, dtype=np.int64)
    lengths = _boundaries(ends, rate, per_second) - _boundaries(ends - window, rate, per_second)
    power = totals / lengths
    i = int(np.argmax(power))
    return float(power[i]), int(_boundaries(ends[i], rate, per_second))


def streamed(sums: np.ndarray, window: int, rate: int, per_second: int, splits: list[int]):
    m = _SlidingMax(window, rate, per_second)
    pos = 0
    for n in splits:
        m.push(sums[pos : pos + n].copy())
        pos += n
    m.push(sums[pos:].copy())
    return m.max_power, m.max_end_frame


def _cases(rng: np.random.Generator):
    n = 5_000
    levels = 10 ** rng.uniform(-6, 0, size=n // 250).repeat(250)
    yield "programme-like", rng.random(n) * levels
    yield "silence", np.zeros(n)
    yield "constant (ties everywhere)", np.full(n, 0.25)
    yield "one loud step", np.where(np.arange(n) // 300 == 7, 1.0, 1e-9)
    tone = np.tile(np.array([0.5, 0.5000000000000001, 0.49999999999999994]), n // 3 + 1)[:n]
    yield "near-ties", tone


def test_same_maximum_and_position_as_summing_every_window():
    rng = np.random.default_rng(7)
    for name, sums in _cases(rng):
        for window, rate, per_second in (
            (400, 48_000, 1000),
            (400, 44_100, 1000),
            (300, 44_100, 100),
        ):
            want = brute_force(sums, window, rate, per_second)
            for splits in ([5_000], [1, 399, 400, 1_000], list(rng.integers(0, 700, size=20))):
                got = streamed(sums, window, rate, per_second, [int(s) for s in splits])
                assert got == want, (name, window, rate, splits[:5])
