"""Leading/trailing silence, digital-zero padding, mid-file dropouts, silent files.

Definitions (common practice, no normative source):

- A frame is *quiet* when every channel's |sample| is below
  ``options.silence_threshold_dbfs`` (default -60 dBFS, sample level, so the
  loudest channel decides). ``leading_silence_s`` is the time before the first
  frame that is not quiet; ``trailing_silence_s`` the time after the last one.
- A frame is *digital zero* when every channel is exactly 0.
  ``leading_digital_zero_s`` / ``trailing_digital_zero_s`` likewise.
- A *dropout* is a run of digital-zero frames of at least ``options.dropout_min_s``
  that neither starts the file nor ends it (those are padding), in a file that is
  not silent. ``dropout_times_s`` are the start times of the first
  ``options.max_positions``; ``longest_dropout_s`` is 0.0 when there is none.
- ``is_silent``: no frame reaches the threshold. Then leading and trailing
  silence both equal the whole duration, dropouts are not counted, and
  ``silence_note`` says so.

NaN/Inf samples count as 0 (see checker.meters.levels.finite_x).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from checker.audio import Block, StreamInfo
from checker.dsp import native
from checker.layout import Layout
from checker.meters.base import MeasureOptions
from checker.meters.levels import channels_first, find_runs, finite_x, keep_first
from checker.units import db_to_amplitude


@dataclass(frozen=True)
class SilenceResult:
    is_silent: bool
    leading_silence_s: float
    trailing_silence_s: float
    leading_digital_zero_s: float
    trailing_digital_zero_s: float
    dropouts: int
    dropout_times_s: list[float]
    longest_dropout_s: float
    silence_note: str | None

    def to_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def _first_last(mask: np.ndarray) -> tuple[int | None, int | None]:
    """First and last index where ``mask`` is True, or (None, None)."""
    first = int(mask.argmax())
    if not mask[first]:
        return None, None
    return first, mask.size - 1 - int(mask[::-1].argmax())


class SilenceMeter:
    def __init__(self, info: StreamInfo, layout: Layout, options: MeasureOptions) -> None:
        self.rate = info.sample_rate_hz
        self.options = options
        self.threshold = db_to_amplitude(options.silence_threshold_dbfs)
        self.min_frames = max(1, round(options.dropout_min_s * self.rate))
        self.frames = 0
        self.first_loud: int | None = None
        self.last_loud: int | None = None
        self.first_nonzero: int | None = None
        self.last_nonzero: int | None = None
        self.zero_open: int | None = None
        self.dropouts = 0
        self.dropout_first = np.empty(0, dtype=np.int64)
        self.longest_frames = 0
        self.native = native.enabled()
        self.mask = np.empty(0, dtype=np.uint8)  # reused zero-frame mask (compiled path)

    def prepare(self, block: Block) -> None:
        """The frame scan of an integer PCM block (always finite), as soon as it is decoded
        (measure() may run this in the read-ahead thread, so it gets a mask of its own)."""
        if self.native and block.raw is not None and block.frames:
            mask = np.empty(block.frames, dtype=np.uint8)
            block.memo["frame_scan"] = (native.frame_scan(block.xt, self.threshold, mask), mask)

    def feed(self, block: Block) -> None:
        n = block.frames
        if n == 0:
            return
        xt = channels_first(finite_x(block))
        start = block.start
        zeros, loud, nonzero, zero = self._scan(block, xt)
        first, last = loud
        if first is not None:
            if self.first_loud is None:
                self.first_loud = start + first
            self.last_loud = start + last
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

    def _scan(self, block: Block, xt: np.ndarray) -> tuple[int, tuple, tuple, np.ndarray]:
        """(zero frames, -1 when not counted; (first, last) loud frame; (first, last) non-zero
        frame, (None, None) when none; (frames,) bool mask of zero frames) of the block,
        from prepare(), the compiled scan or numpy."""
        n = xt.shape[1]
        prepared = block.memo.get("frame_scan")
        if prepared is None and self.native:
            if self.mask.size < n:
                self.mask = np.empty(n, dtype=np.uint8)
            prepared = (native.frame_scan(xt, self.threshold, self.mask), self.mask)
        if prepared is None:
            level = np.abs(xt[0]) if xt.shape[0] == 1 else np.abs(xt).max(axis=0)
            zero = level == 0.0
            return -1, _first_last(level >= self.threshold), _first_last(~zero), zero
        (zeros, first, last, first_nz, last_nz), mask = prepared
        # the mask is only written when the block has zero frames
        zero = mask[:n].view(bool) if zeros else np.zeros(n, dtype=bool)
        loud = (first, last) if first >= 0 else (None, None)
        nonzero = (first_nz, last_nz) if first_nz >= 0 else (None, None)
        return zeros, loud, nonzero, zero

    def result(self) -> SilenceResult:
        rate = self.rate
        frames = self.frames
        duration = frames / rate

        def lead(first: int | None) -> float:
            return duration if first is None else first / rate

        def trail(last: int | None) -> float:
            return duration if last is None else (frames - 1 - last) / rate

        silent = self.first_loud is None
        note = None
        dropouts, times, longest = self.dropouts, self.dropout_first, self.longest_frames
        if silent:
            note = (
                f"no sample reaches {self.options.silence_threshold_dbfs:g} dBFS: "
                "leading and trailing silence are the whole duration; dropouts not counted"
            )
            if frames == 0:
                note = "no audio frames"
            dropouts, times, longest = 0, times[:0], 0
        return SilenceResult(
            is_silent=silent,
            leading_silence_s=lead(self.first_loud),
            trailing_silence_s=trail(self.last_loud),
            leading_digital_zero_s=lead(self.first_nonzero),
            trailing_digital_zero_s=trail(self.last_nonzero),
            dropouts=dropouts,
            dropout_times_s=[float(t) / rate for t in times],
            longest_dropout_s=longest / rate,
            silence_note=note,
        )
