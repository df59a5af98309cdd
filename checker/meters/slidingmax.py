"""The largest momentary (400 ms) and short-term (3 s) loudness of a file at 1 ms / 10 ms hops:
a running maximum of sliding-window means over sub-step power sums, plus the per-step records
that span values need.

One job: _SlidingMax, used by checker/meters/loudness.py.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from checker.model import units

#: 100 ms records are joined into one array once this many pieces have piled up.
COMPACT_AFTER = 64
#: Unit roundoff of float64 (bounds the running-sum estimate's error in _SlidingMax).
EPS = float(np.finfo(np.float64).eps)


def _boundaries(index: np.ndarray, rate: int, per_second: int) -> np.ndarray:
    """Frame index where sub-step ``index`` ends: floor(index * rate / per_second)."""
    return (index * rate) // per_second


class _SlidingMax:
    """Running maximum of a sliding-window mean over sub-step power sums.

    Keeps only the last ``window - 1`` sums. Window sums use a fixed summation
    per window (sliding_window_view), so the result is the same for any split.
    """

    def __init__(self, window: int, rate: int, per_second: int, per_step: int = 0) -> None:
        self.window = window
        self.rate = rate
        self.per_second = per_second
        #: Span records (per_step > 0: sub-steps per 100 ms step): per step, the largest
        #: window mean ending in it (running-sum estimate, within 1e-12 of the exact sum)
        #: and that window's end frame, as (steps, powers, end frames) pieces.
        self.per_step = per_step
        self.step_records: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
        self.ring = np.zeros(0)
        self.count = 0  # sub-steps completed so far
        self.max_power = -1.0  # no complete window yet
        self.max_end_frame = -1

    def push(self, sums: np.ndarray) -> None:
        if sums.size == 0:
            return
        buf = np.concatenate((self.ring, sums))
        self.count += sums.size
        if buf.size >= self.window:
            count = buf.size - self.window + 1
            # window i of buf ends at sub-step index `last_end - (len - 1 - i)`
            last_end = self.count
            ends = np.arange(last_end - count + 1, last_end + 1, dtype=np.int64)
            lengths = _boundaries(ends, self.rate, self.per_second) - _boundaries(
                ends - self.window, self.rate, self.per_second
            )
            # Cheap running-sum estimates first; exact window sums only where one could be
            # the maximum (sums of powers are >= 0, so the estimate's error is at most
            # `slack`): the same windows win, with the same exact values, as if every
            # window were summed exactly.
            run = np.cumsum(buf)
            estimate = run[self.window - 1 :].copy()
            estimate[1:] -= run[: -self.window]
            estimate /= lengths
            slack = (4 * buf.size + 64) * EPS * float(run[-1]) / float(lengths.min())
            if self.per_step:
                self._record(ends, estimate)
            top = float(estimate.max())
            if top + slack > self.max_power:
                cand = np.flatnonzero(estimate >= top - 2.0 * slack)
                totals = sliding_window_view(buf, self.window)[cand].sum(axis=1)
                power = totals / lengths[cand]
                i = int(np.argmax(power))
                if power[i] > self.max_power:
                    self.max_power = float(power[i])
                    end = ends[cand[i]]
                    self.max_end_frame = int(_boundaries(end, self.rate, self.per_second))
        self.ring = buf[-(self.window - 1) :].copy()

    def _record(self, ends: np.ndarray, estimate: np.ndarray) -> None:
        step = (ends - 1) // self.per_step  # window ending at sub-step e: e in (k p, (k+1) p]
        starts = np.concatenate(([0], np.flatnonzero(np.diff(step)) + 1))
        top = np.maximum.reduceat(estimate, starts)
        counts = np.diff(np.append(starts, estimate.size))
        first = np.flatnonzero(estimate == np.repeat(top, counts))
        at = first[np.unique(step[first], return_index=True)[1]]
        frames = _boundaries(ends[at], self.rate, self.per_second)
        self.step_records.append((step[starts], np.maximum(top, 0.0), frames))
        if len(self.step_records) > COMPACT_AFTER:
            self.step_records = [
                tuple(np.concatenate(c) for c in zip(*self.step_records, strict=True))
            ]

    def step_maxima(self, steps: int) -> tuple[np.ndarray, np.ndarray]:
        """(largest window mean power ending in each of the first ``steps`` steps, -1 where
        none; its end frame)."""
        power = np.full(steps, -1.0)
        frame = np.full(steps, -1, dtype=np.int64)
        if not self.step_records:
            return power, frame
        k, v, f = (np.concatenate(c) for c in zip(*self.step_records, strict=True))
        order = np.lexsort((f, -v, k))  # by step, largest first, earliest on ties
        k, v, f = k[order], v[order], f[order]
        keep = np.concatenate(([True], k[1:] != k[:-1])) & (k < steps)
        power[k[keep]], frame[k[keep]] = v[keep], f[keep]
        return power, frame

    def level(self) -> tuple[float | None, float | None]:
        """(max loudness LUFS, window end s); None when no window completed; -inf for silence."""
        if self.max_power < 0.0:
            return None, None
        lufs = units.power_to_lufs(self.max_power)
        if lufs == -math.inf:
            return lufs, None
        return lufs, self.max_end_frame / self.rate
