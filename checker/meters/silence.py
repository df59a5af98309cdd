"""Leading/trailing silence or room tone, digital-zero padding, mid-file dropouts, silent files.

Definitions (common practice, no normative source; the window is our choice):

- Head and tail are judged on short-time RMS, not on single samples: room tone at
  -70 dBFS RMS has sample peaks 10-13 dB higher (docs/standards.md#sample-domain), so
  a per-sample threshold would take it for programme. The level is computed over
  WINDOW_STEPS = 20 steps of STEP_S = 1 ms (20 ms at 48 kHz; a step is
  round(rate / 1000) frames, aligned to frame 0), per channel, and the loudest
  channel decides. For the head the window ends at the step it is reported for
  (looking back), for the tail it starts there (looking ahead), so a loud onset or
  ending is placed within one step; at the file's ends the window is cut short.
- ``leading_silence_s`` is the start of the first step whose window reaches the
  threshold ``options.silence_threshold_dbfs`` (the fixed reference, default
  -60 dBFS RMS, recorded as ``silence_threshold_dbfs``); ``trailing_silence_s``
  the time after the end of the last such step. Head and tail "silence" thus
  includes room tone and dither below the threshold.
- The same two values at every whole threshold from CURVE_FROM_DBFS to
  CURVE_TO_DBFS are kept as a curve (``silence_curve_thresholds_dbfs``: the
  thresholds where a value changes, ``leading_silence_curve_s`` /
  ``trailing_silence_curve_s``: the values from that threshold up), so a profile's
  own ``silence_threshold_dbfs`` re-judges a stored measurement without reading the
  audio (:func:`silence_at`). Measurements never depend on the profile.
- A frame is *digital zero* when every channel is exactly 0.
  ``leading_digital_zero_s`` / ``trailing_digital_zero_s`` likewise (frame exact).
- A *dropout* is a run of digital-zero frames of at least ``options.dropout_min_s``
  that neither starts the file nor ends it (those are padding), in a file that is
  not silent. ``dropout_times_s`` are the start times of the first
  ``options.max_positions``; ``longest_dropout_s`` is 0.0 when there is none.
- ``is_silent``: no window reaches the reference threshold. Then leading and
  trailing silence both equal the whole duration, dropouts are not counted, and
  ``silence_note`` says so.

NaN/Inf samples count as 0 (see checker.meters.samples.finite_x).
"""

from __future__ import annotations

import bisect
import functools
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from checker.dsp import native
from checker.io.audio import Block, StreamInfo
from checker.io.layout import Layout
from checker.meters.base import MeasureOptions
from checker.meters.samples import channels_first, find_runs, finite_x, keep_first
from checker.model.units import db_to_amplitude

STEP_S = 0.001
WINDOW_STEPS = 20
#: Whole-dB thresholds kept in the curve (a profile's threshold must be one of them).
CURVE_FROM_DBFS = -120
CURVE_TO_DBFS = -20


@dataclass(frozen=True)
class SilenceResult:
    is_silent: bool
    silence_threshold_dbfs: float
    leading_silence_s: float
    trailing_silence_s: float
    leading_digital_zero_s: float
    trailing_digital_zero_s: float
    dropouts: int
    dropout_times_s: list[float]
    longest_dropout_s: float
    silence_curve_thresholds_dbfs: list[float]
    leading_silence_curve_s: list[float]
    trailing_silence_curve_s: list[float]
    silence_note: str | None

    def to_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def silence_at(values: Mapping[str, Any], threshold_dbfs: float) -> tuple[float, float] | None:
    """(leading, trailing) silence in seconds at another threshold, from a measurement's
    curve; None when the values hold no curve or the threshold lies below it."""
    ts = values.get("silence_curve_thresholds_dbfs")
    lead = values.get("leading_silence_curve_s")
    trail = values.get("trailing_silence_curve_s")
    if not ts or not isinstance(lead, list) or not isinstance(trail, list):
        return None
    i = bisect.bisect_right(ts, threshold_dbfs + 1e-9) - 1
    if i < 0:
        return None
    return float(lead[i]), float(trail[i])


def _first_last(mask: np.ndarray) -> tuple[int | None, int | None]:
    """First and last index where ``mask`` is True, or (None, None)."""
    first = int(mask.argmax())
    if not mask[first]:
        return None, None
    return first, mask.size - 1 - int(mask[::-1].argmax())


@functools.lru_cache(maxsize=8)
def _curve_grid(threshold_dbfs: float) -> tuple[np.ndarray, int, np.ndarray]:
    """(thresholds in dBFS, index of ``threshold_dbfs`` among them, the same as powers) of the
    silence curve: every whole dB from CURVE_FROM_DBFS to CURVE_TO_DBFS and the threshold.
    Once per threshold; read-only, as every meter shares them."""
    grid = set(range(CURVE_FROM_DBFS, CURVE_TO_DBFS + 1)) | {threshold_dbfs}
    grid_dbfs = np.array(sorted(grid), dtype=np.float64)
    ref = int(np.searchsorted(grid_dbfs, threshold_dbfs))
    grid_power = 10.0 ** (grid_dbfs / 10.0)
    grid_dbfs.flags.writeable = False
    grid_power.flags.writeable = False
    return grid_dbfs, ref, grid_power


class SilenceMeter:
    def __init__(self, info: StreamInfo, layout: Layout, options: MeasureOptions) -> None:
        self.rate = info.sample_rate_hz
        self.options = options
        self.threshold = db_to_amplitude(options.silence_threshold_dbfs)
        self.min_frames = max(1, round(options.dropout_min_s * self.rate))
        self.frames = 0
        self.first_nonzero: int | None = None
        self.last_nonzero: int | None = None
        self.zero_open: int | None = None
        self.dropouts = 0
        self.dropout_first = np.empty(0, dtype=np.int64)
        self.longest_frames = 0
        self.native = native.enabled()
        self.mask = np.empty(0, dtype=np.uint8)  # reused zero-frame mask (compiled path)
        # Short-time RMS: 1 ms steps of sums of squares per channel.
        ch = info.channels
        self.step = max(1, round(self.rate * STEP_S))
        self.grid_dbfs, self.ref, self.grid_power = _curve_grid(options.silence_threshold_dbfs)
        self.part = np.zeros(ch)  # squares of the step in progress
        self.part_frames = 0
        self.hist = np.zeros((ch, 0))  # the last WINDOW_STEPS - 1 complete steps
        self.steps = 0  # complete steps so far
        self.first_step = np.full(self.grid_dbfs.size, -1, dtype=np.int64)
        self.last_step = np.full(self.grid_dbfs.size, -1, dtype=np.int64)

    def prepare(self, block: Block) -> None:
        """The 1 ms sums of squares and the frame scan of an integer PCM block (always
        finite), as soon as it is decoded (measure() may run this in the read-ahead thread,
        so it gets a mask of its own)."""
        if block.raw is not None and block.frames:
            xt = block.xt
            block.memo["silence_steps"] = self._pieces(xt, block.start)  # numpy frees the GIL
            if self.native and "frame_scan" not in block.memo:  # (else: the fused walk's)
                mask = np.empty(block.frames, dtype=np.uint8)
                block.memo["frame_scan"] = (native.frame_scan(xt, self.threshold, mask), mask)

    def feed(self, block: Block) -> None:
        n = block.frames
        if n == 0:
            return
        x = finite_x(block)
        xt = block.xt if x is block.x else channels_first(x)
        start = block.start
        self._levels(block, xt)
        zeros, nonzero, zero = self._scan(block, xt)
        first, last = nonzero
        if first is not None:
            if self.first_nonzero is None:
                self.first_nonzero = start + first
            self.last_nonzero = start + last
        if zeros == 0 and self.zero_open is None:
            self.frames += n
            return  # no zero frame and no open run: no dropout can start or end here
        starts, ends, self.zero_open = find_runs(zero, start, self.zero_open)
        # A run that starts at frame 0 is leading padding, not a dropout.
        length = ends - starts
        hit = (length >= self.min_frames) & (starts > 0)
        if hit.any():
            self.dropouts += int(np.count_nonzero(hit))
            self.longest_frames = max(self.longest_frames, int(length[hit].max()))
            self.dropout_first = keep_first(
                self.dropout_first, starts[hit], self.options.max_positions
            )
        self.frames += n

    # ------------------------------------------------------------ short-time RMS
    def _pieces(self, xt: np.ndarray, start: int) -> tuple:
        """Sums of squares per channel of the block's pieces on the 1 ms step grid (aligned
        to frame 0 of the file): the end of the step in progress, every full step
        (channels, k), the beginning of the next step and its length."""
        ch, n = xt.shape
        s = self.step
        a = min(n, -start % s)
        head = xt[:, :a]
        full = (n - a) // s
        r = xt[:, a : a + full * s].reshape(ch, full, s)
        rest = xt[:, a + full * s :]
        return (
            np.einsum("ij,ij->i", head, head),
            np.einsum("csk,csk->cs", r, r),
            np.einsum("ij,ij->i", rest, rest),
            rest.shape[1],
        )

    def _levels(self, block: Block, xt: np.ndarray) -> None:
        """Add the block's complete 1 ms steps and judge the windows they complete."""
        ch, n = xt.shape
        pieces = block.memo.get("silence_steps")
        if pieces is None:
            pieces = self._pieces(xt, block.start)
        head, full, rest, rest_frames = pieces
        self.part = self.part + head
        self.part_frames += min(n, -block.start % self.step)
        done = []
        if self.part_frames == self.step:
            done.append(self.part[:, None])
            self.part, self.part_frames = np.zeros(ch), 0
        if full.shape[1]:
            done.append(full)
        self.part = self.part + rest
        self.part_frames += rest_frames
        if not done:
            return
        new = np.concatenate(done, axis=1) if len(done) > 1 else done[0]
        k = new.shape[1]
        s = self.step
        # steps (channels, w - 1 + k): the w - 1 steps before the new ones (zeros before
        # the file start), so every window is a slice of the running sum
        w = WINDOW_STEPS
        pad = np.zeros((ch, w - 1 - self.hist.shape[1]))
        steps = np.concatenate((pad, self.hist, new), axis=1)
        # running sums along each row (the same sequential sums as row by row), then the
        # loudest channel of each window ending at a new step
        cum = np.zeros((ch, steps.shape[1] + 1))
        np.cumsum(steps, axis=1, out=cum[:, 1:])
        window = cum[:, w:] - cum[:, :-w]
        sums = window[0] if ch == 1 else window.max(axis=0)
        first = self.steps  # global index of the first new step
        level = sums / (w * s)
        if first < w - 1:  # windows cut short by the file start
            cut = min(k, w - 1 - first)
            level[:cut] = sums[:cut] / (np.arange(first + 1, first + cut + 1) * s)
        todo = np.flatnonzero(self.first_step < 0)
        if todo.size and level.max() >= self.grid_power[todo[0]]:
            idx = np.searchsorted(np.maximum.accumulate(level), self.grid_power, side="left")
            hit = (self.first_step < 0) & (idx < k)
            self.first_step[hit] = first + idx[hit]
        # A full window ending at step g is the look-ahead window starting at g - (w - 1).
        skip = max(0, w - 1 - first)  # windows still cut short by the file start
        if skip < k:
            ahead = level[skip:][::-1]
            idx = np.searchsorted(np.maximum.accumulate(ahead), self.grid_power, side="left")
            hit = idx < ahead.size
            self.last_step[hit] = first + k - 1 - idx[hit] - (w - 1)
        real = min(w - 1, first + k)  # the padding before the file start is not kept
        self.hist = steps[:, steps.shape[1] - real :].copy()
        self.steps += k

    def _final_steps(self) -> tuple[np.ndarray, np.ndarray]:
        """(first step, last step) per threshold, with the step in progress and the
        shortened look-ahead windows at the end of the file (state left untouched)."""
        first_step, last_step = self.first_step.copy(), self.last_step.copy()
        steps, frames = self.hist, np.full(self.hist.shape[1], self.step)
        if self.part_frames:
            steps = np.concatenate((steps, self.part[:, None]), axis=1)
            frames = np.append(frames, self.part_frames)
            # the look-back window ending at the step in progress
            level = steps.sum(axis=1).max() / frames.sum()
            late = (first_step < 0) & (self.grid_power <= level)
            first_step[late] = self.steps
        if steps.shape[1]:
            # look-ahead windows starting at the last 19 complete steps (and the one in
            # progress), cut short by the end of the file
            rsum = np.cumsum(steps[:, ::-1], axis=1)  # reversed: window from the end back
            level = rsum.max(axis=0) / np.cumsum(frames[::-1])
            idx = np.searchsorted(np.maximum.accumulate(level), self.grid_power, side="left")
            hit = idx < level.size
            start = self.steps - self.hist.shape[1]
            last_step[hit] = start + steps.shape[1] - 1 - idx[hit]
        return first_step, last_step

    # ------------------------------------------------------------ digital zero
    def _scan(self, block: Block, xt: np.ndarray) -> tuple[int, tuple, np.ndarray]:
        """(zero frames, -1 when not counted; (first, last) non-zero frame, (None, None)
        when none; (frames,) bool mask of zero frames) of the block, from prepare(), the
        compiled scan or numpy."""
        n = xt.shape[1]
        prepared = block.memo.get("frame_scan")
        if prepared is None and self.native:
            if self.mask.size < n:
                self.mask = np.empty(n, dtype=np.uint8)
            prepared = (native.frame_scan(xt, self.threshold, self.mask), self.mask)
        if prepared is None:
            level = np.abs(xt[0]) if xt.shape[0] == 1 else np.abs(xt).max(axis=0)
            zero = level == 0.0
            return -1, _first_last(~zero), zero
        (zeros, _first, _last, first_nz, last_nz), mask = prepared
        # the mask is only written when the block has zero frames
        zero = mask[:n].view(bool) if zeros else np.zeros(n, dtype=bool)
        nonzero = (first_nz, last_nz) if first_nz >= 0 else (None, None)
        return zeros, nonzero, zero

    # ------------------------------------------------------------ result
    def result(self) -> SilenceResult:
        rate = self.rate
        frames = self.frames
        duration = frames / rate
        first_step, last_step = self._final_steps()
        lead = np.where(first_step >= 0, first_step * self.step, frames) / rate
        end = np.minimum((last_step + 1) * self.step, frames)
        trail = np.where(last_step >= 0, frames - end, frames) / rate
        change = np.ones(lead.size, dtype=bool)
        change[1:] = (lead[1:] != lead[:-1]) | (trail[1:] != trail[:-1])
        silent = bool(first_step[self.ref] < 0)
        note = None
        dropouts, times, longest = self.dropouts, self.dropout_first, self.longest_frames
        if silent:
            note = (
                f"no {WINDOW_STEPS} ms window reaches "
                f"{self.options.silence_threshold_dbfs:g} dBFS RMS: "
                "leading and trailing silence are the whole duration; dropouts not counted"
            )
            if frames == 0:
                note = "no audio frames"
            dropouts, times, longest = 0, times[:0], 0

        def zero_lead(first: int | None) -> float:
            return duration if first is None else first / rate

        def zero_trail(last: int | None) -> float:
            return duration if last is None else (frames - 1 - last) / rate

        return SilenceResult(
            is_silent=silent,
            silence_threshold_dbfs=float(self.options.silence_threshold_dbfs),
            leading_silence_s=float(lead[self.ref]),
            trailing_silence_s=float(trail[self.ref]),
            leading_digital_zero_s=zero_lead(self.first_nonzero),
            trailing_digital_zero_s=zero_trail(self.last_nonzero),
            dropouts=dropouts,
            dropout_times_s=[float(t) / rate for t in times],
            longest_dropout_s=longest / rate,
            silence_curve_thresholds_dbfs=[float(t) for t in self.grid_dbfs[change]],
            leading_silence_curve_s=[float(v) for v in lead[change]],
            trailing_silence_curve_s=[float(v) for v in trail[change]],
            silence_note=note,
        )
