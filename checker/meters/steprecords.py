"""Per-100 ms sample records, kept only when a programme span or parts are asked for.

The span of the programme (checker/analysis/span.py) is known only after the pass, so
the levels meter keeps, for every 100 ms step of the file, per channel: the largest
|sample|, the sum of squares and the count of upward zero crossings, plus the frame of
the step's largest |sample| over all channels. Steps follow the loudness meter's grid
(checker/meters/loudness.py): step j holds frames [floor(j fs / 10), floor((j + 1) fs / 10)),
counted from the first frame of the file, so the records do not depend on the block split
(exact for peaks and counts; sums to rounding). Memory: 3 numbers per channel and one
frame index per 100 ms (a one-hour stereo file: 36,000 steps, about 2 MB).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from checker.model.units import amplitude_to_db

#: Steps are joined into one array once this many pieces have piled up.
COMPACT_AFTER = 64


@dataclass(frozen=True)
class StepRecords:
    """Per-step records, the last (possibly incomplete) step included."""

    rate_hz: int
    peak: np.ndarray  # (steps, channels) largest |sample|
    sumsq: np.ndarray  # (steps, channels) sum of squares
    crossings: np.ndarray  # (steps, channels) upward zero crossings
    peak_frame: np.ndarray  # (steps,) frame of the step's largest |sample| (any channel)
    frames: np.ndarray  # (steps,) frames in the step

    @property
    def steps(self) -> int:
        return int(self.frames.size)


def step_boundary(j: int | np.ndarray, rate_hz: int):
    """First frame of 100 ms step j (the loudness meter's grid)."""
    return (j * rate_hz) // 10


class StepRecorder:
    def __init__(self, rate_hz: int, channels: int, *, tone: bool = True) -> None:
        self.rate = int(rate_hz)
        #: False: peaks only (sums of squares and crossings stay 0; no tone detection asked).
        self.tone = tone
        self.channels = channels
        self.frames = 0  # frames fed
        self.done = 0  # complete steps
        self._reset_partial()
        self.last_sign: np.ndarray | None = None  # sign of the previous frame, per channel
        self.kept: list[tuple[np.ndarray, ...]] = []

    def _reset_partial(self) -> None:
        self.p_peak = np.zeros(self.channels)
        self.p_sq = np.zeros(self.channels)
        self.p_up = np.zeros(self.channels, dtype=np.int64)
        self.p_frame = -1
        self.p_top = -1.0

    def feed(self, xt: np.ndarray) -> None:
        """xt: (channels, frames) finite samples, in file order."""
        n = xt.shape[1]
        if n == 0:
            return
        start = self.frames
        end = start + n
        last = ((end + 1) * 10 - 1) // self.rate  # steps whose end boundary is <= end
        cuts = [int(step_boundary(k, self.rate)) - start for k in range(self.done + 1, last + 1)]
        ends = [(c, True) for c in cuts]
        if not cuts or cuts[-1] < n:
            ends.append((n, False))
        starts = [0] + [c for c, _ in ends[:-1]]  # every piece is non-empty (cuts rise)
        a = np.abs(xt)
        peaks = np.maximum.reduceat(a, starts, axis=1)  # (channels, pieces)
        if self.tone:  # sums of squares and upward zero crossings, for tone detection
            sign = xt >= 0.0
            up = sign.copy()
            up[:, 1:] &= ~sign[:, :-1]
            if self.last_sign is None:
                up[:, 0] = False
            else:
                up[:, 0] &= ~self.last_sign
            self.last_sign = sign[:, -1].copy()
            squares = np.add.reduceat(np.square(xt), starts, axis=1)
            edges = np.array([*starts, n])
            ups = np.stack(
                [np.diff(np.searchsorted(np.flatnonzero(row), edges)) for row in up]
            )  # crossings per piece, counted from their positions
        rows: list[tuple[np.ndarray, ...]] = []
        for i, ((hi, closes), lo) in enumerate(zip(ends, starts, strict=True)):
            pk = peaks[:, i]
            c = int(np.argmax(pk))
            if pk[c] > self.p_top:
                self.p_top = float(pk[c])
                self.p_frame = start + lo + int(np.argmax(a[c, lo:hi]))
            self.p_peak = np.maximum(self.p_peak, pk)
            if self.tone:
                self.p_sq = self.p_sq + squares[:, i]
                self.p_up = self.p_up + ups[:, i]
            if closes:
                rows.append(self._close())
        self.frames = end
        if rows:
            self.kept.append(tuple(np.array(col) for col in zip(*rows, strict=True)))
            if len(self.kept) > COMPACT_AFTER:
                self.kept = [self._joined()]

    def _close(self) -> tuple:
        row = (
            self.p_peak,
            self.p_sq,
            self.p_up,
            self.p_frame,
            int(step_boundary(self.done + 1, self.rate) - step_boundary(self.done, self.rate)),
        )
        self.done += 1
        self._reset_partial()
        return row

    def _joined(self) -> tuple[np.ndarray, ...]:
        cols = list(zip(*self.kept, strict=True))
        return tuple(np.concatenate(c) for c in cols)

    def records(self) -> StepRecords:
        """The records so far, the step in progress included (state unchanged)."""
        ch = self.channels
        parts = list(self.kept)
        partial = self.frames - int(step_boundary(self.done, self.rate))
        if partial > 0:
            parts.append(
                (
                    self.p_peak[None],
                    self.p_sq[None],
                    self.p_up[None],
                    np.array([self.p_frame]),
                    np.array([partial]),
                )  # fmt: skip
            )
        if not parts:
            empty = np.zeros((0, ch))
            return StepRecords(self.rate, empty, empty, empty, np.zeros(0, np.int64),
                               np.zeros(0, np.int64))  # fmt: skip
        cols = [np.concatenate(c) for c in zip(*parts, strict=True)]
        return StepRecords(
            self.rate,
            cols[0].reshape(-1, ch),
            cols[1].reshape(-1, ch),
            cols[2].reshape(-1, ch),
            cols[3].astype(np.int64),
            cols[4].astype(np.int64),
        )


def span_peaks(rec: StepRecords, first: int, stop: int) -> dict:
    """Sample peak of steps [first, stop): the LevelsResult peak keys for that span."""
    peak = rec.peak[first:stop]
    per_channel = peak.max(axis=0) if peak.size else np.zeros(rec.peak.shape[1])
    top = float(per_channel.max(initial=0.0))
    time_s = None
    if top > 0.0:
        k = first + int(np.flatnonzero(peak.max(axis=1) == top)[0])
        time_s = float(rec.peak_frame[k]) / rec.rate_hz
    return {
        "sample_peak_dbfs": amplitude_to_db(top),
        "sample_peak_time_s": time_s,
        "sample_peak_channel_dbfs": [amplitude_to_db(float(v)) for v in per_channel],
        "headroom_db": 0.0 - amplitude_to_db(top),
    }
