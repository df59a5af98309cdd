"""Streaming BS.1770 loudness: momentary, short-term, integrated, and loudness range.

One pass, block by block:

1. K-weight every channel that counts (weight > 0; the LFE is skipped) with
   :func:`checker.dsp.kweighting.k_weighting_sos`, filter state ``zi`` kept
   between blocks.
2. Weighted power per sample ``sum_i G_i y_i**2`` (BS.1770-4 eq. 2 before the
   mean; weights from :attr:`Layout.weights`). Summing per channel first and
   weighting afterwards is the same linear operation.
3. Sums over 1 ms sub-steps (frame boundaries ``floor(j * fs / 1000)``, counted
   from the first frame of the file, with the partial sub-step carried across
   blocks). Ten 1 ms sums make a 10 ms sum, ten 10 ms sums a 100 ms step; the
   grouping is by absolute index, so the result does not depend on the split.
4. Kept for the whole file: one float per 100 ms step (the weighted power
   sum). Momentary (400 ms) and short-term (3 s) series at a 100 ms hop,
   integrated loudness and loudness range are computed from these at
   :meth:`LoudnessMeter.result`.
5. Maxima: a sliding 400 ms window at a 1 ms hop and a sliding 3 s window at a
   10 ms hop over small ring buffers (399 and 299 values), so a 400 ms burst
   at any offset is caught to within 1 ms (at most 0.011 LU under-read; EBU
   Tech 3341 case 13 allows 0.1 LU) without memory growth.

Non-finite samples (NaN/Inf in float files) are measured as 0 so that one bad
sample cannot poison the filter state; the levels meter counts them.

Times (``max_momentary_time_s``, ``max_short_term_time_s``) are the END of
the window that holds the maximum, as in the timeline, where a series value is
stamped at the end of its window. Series entries whose window is not yet
complete (the first 3 momentary and 29 short-term values) are -inf.

Gating (BS.1770-4, checked): 400 ms blocks every 100 ms, complete blocks only;
absolute gate -70 LUFS; relative gate -10 LU below the power mean of blocks
above the absolute gate; a block passes a gate when its loudness is strictly
above it. Loudness range (EBU Tech 3342, checked): short-term values at a
100 ms hop, absolute gate -70 LUFS, relative gate -20 LU below the power mean
of the absolute-gated values, 95th minus 10th percentile, each percentile the
sorted value at index ``round((n - 1) * p)`` (nearest rank; from memory of the
Tech 3342 example code). Not stable for programmes under 60 s.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from checker.dsp import native
from checker.dsp.iir import sosfilt_rows
from checker.dsp.kweighting import k_weighting_sos
from checker.io.audio import MAX_SAMPLE_MAGNITUDE, Block, StreamInfo, out_of_range
from checker.io.layout import Layout
from checker.meters.base import MeasureOptions
from checker.meters.gating import integrated_from_blocks, loudness_range_from_short_term
from checker.meters.slidingmax import COMPACT_AFTER, _boundaries, _SlidingMax
from checker.model import units

HOP_S = 0.1
MOMENTARY_STEPS = 4  # 400 ms of 100 ms steps
SHORT_TERM_STEPS = 30  # 3 s of 100 ms steps
MOMENTARY_SUBSTEPS = 400  # 400 ms of 1 ms sub-steps
SHORT_TERM_SUBSTEPS = 300  # 3 s of 10 ms sub-steps
NO_CUTS = np.empty(0, dtype=np.int64)
LRA_STABLE_MIN_S = 60.0  # EBU Tech 3342: LRA of programmes under 1 minute is not stable


@dataclass(frozen=True)
class LoudnessResult:
    integrated_lufs: float | None
    integrated_dual_mono_lufs: float | None
    integrated_note: str | None
    loudness_range_lu: float | None
    loudness_range_note: str | None
    loudness_range_stable: bool
    max_momentary_lufs: float | None
    max_momentary_time_s: float | None
    max_short_term_lufs: float | None
    max_short_term_time_s: float | None

    def to_dict(self) -> dict:
        return dict(self.__dict__)  # flat fields: asdict's deep copy is not needed


@functools.lru_cache(maxsize=8)
def _k_weighting(rate: int) -> np.ndarray:
    """The K-weighting sections for one rate, designed once per process and shared by every
    meter of that rate: never modify (scipy's sosfilt kernel refuses read-only arrays)."""
    return np.ascontiguousarray(k_weighting_sos(rate), dtype=np.float64)


class LoudnessMeter:
    """BS.1770 momentary / short-term / integrated loudness and EBU Tech 3342 LRA."""

    def __init__(self, info: StreamInfo, layout: Layout, options: MeasureOptions) -> None:
        self.rate = int(info.sample_rate_hz)
        self.mono = info.channels == 1
        weights = np.asarray(layout.weights, dtype=np.float64)
        if weights.size != info.channels:
            raise ValueError(
                f"LoudnessMeter: layout channels = {weights.size} "
                f"(expected {info.channels}, the file's channel count)"
            )
        self.active = np.flatnonzero(weights > 0.0)
        self.all_active = self.active.size == weights.size
        self.weights = weights[self.active]
        self.sos = _k_weighting(self.rate)
        self.zi = np.zeros((self.active.size, self.sos.shape[0], 2))  # per channel, section
        # Compiled K-weighting (checker/dsp/native.py): filters without copying the block.
        self.native = native.enabled() and self.sos.shape == (2, 6)
        self.rows = self.active.astype(np.int64)
        self.frames = 0  # frames fed so far
        self.sub_count = 0  # 1 ms sub-steps completed
        self.partial = 0.0  # weighted power sum of the current, incomplete 1 ms sub-step
        self.pending_1ms = np.zeros(0)  # completed 1 ms sums not yet grouped into 10 ms
        self.pending_10ms = np.zeros(0)  # completed 10 ms sums not yet grouped into 100 ms
        self.step_chunks: list[np.ndarray] = []  # 100 ms step power sums, one float per step
        records = options.keeps_step_records  # per-step maxima for a programme span
        self.momentary_max = _SlidingMax(MOMENTARY_SUBSTEPS, self.rate, 1000, 100 * records)
        self.short_term_max = _SlidingMax(SHORT_TERM_SUBSTEPS, self.rate, 100, 10 * records)

    # -- streaming -------------------------------------------------------------------------

    def _substeps(self, start: int, n: int, done: int) -> tuple[int, np.ndarray]:
        """(sub-steps completed by frame start + n, where those after ``done`` end inside the
        block): 1 ms sub-steps j end at floor(j * fs / 1000)."""
        last = ((start + n + 1) * 1000 - 1) // self.rate
        if last <= done:
            return done, NO_CUTS
        js = np.arange(done + 1, last + 1, dtype=np.int64)
        return last, _boundaries(js, self.rate, 1000) - start  # rising, 1 <= cuts <= n

    def substeps_from(self, start: int, n: int) -> tuple[int, np.ndarray]:
        """_substeps for a block taken on its own (prepare and the fused walk run before
        feed): the sub-steps completed before frame ``start`` follow from it."""
        return self._substeps(start, n, ((start + 1) * 1000 - 1) // self.rate)

    def prepare(self, block: Block) -> None:
        """K-weighting and the 1 ms sums of this block, for feed() (compiled path only; run
        by measure() as each block is decoded, possibly in the read-ahead thread: only this
        step touches the filter state then)."""
        n = block.frames
        if not self.native or n == 0 or self.active.size == 0 or "loudness" in block.memo:
            return  # (done already by the reader's fused walk: checker/meters/blockwalk.py)
        start = block.start
        last, cuts = self.substeps_from(start, n)
        xt = block.xt
        if out_of_range(block):  # NaN/Inf/huge (counted by the levels meter) filtered as 0;
            # here, not in feed(): with read-ahead the next block's prepare may already run
            xt = np.where(np.abs(xt) <= MAX_SAMPLE_MAGNITUDE, xt, 0.0)
        pieces = native.kweight_sums(xt, self.rows, self.sos, self.zi, self.weights, cuts)
        block.memo["loudness"] = (start, last, cuts, pieces)

    def feed(self, block: Block) -> None:
        n = block.frames
        if n == 0:
            return
        start = self.frames
        self.frames = start + n
        prepared = block.memo.get("loudness")
        if prepared is not None:
            if prepared[0] != start:
                raise RuntimeError(
                    f"LoudnessMeter: prepared block starts at frame {prepared[0]} "
                    f"(expected {start}: blocks in file order)"
                )
            _, last, cuts, pieces = prepared
        else:
            last, cuts = self._substeps(start, n, self.sub_count)
            pieces = self._pieces(block, cuts)
        if cuts.size == 0:
            self.partial += float(pieces[0])
            self.sub_count = last
            return
        sums = pieces[:-1]  # the last piece [cuts[-1], n) starts the next sub-step
        sums[0] += self.partial
        self.partial = float(pieces[-1])
        self.sub_count = last
        self._push_1ms(sums)

    def _pieces(self, block: Block, cuts: np.ndarray) -> np.ndarray:
        """K-weighted power of the block summed over the pieces cut at ``cuts``."""
        n = block.frames
        if self.active.size == 0:
            return np.zeros(cuts.size + 1)
        if self.native:  # filtered and summed per sub-step in one compiled pass
            return native.kweight_sums(block.xt, self.rows, self.sos, self.zi, self.weights, cuts)
        # A channel-major copy of the channels that count, filtered in place.
        xt = block.x.T
        y = np.array(xt if self.all_active else xt[self.active], dtype=np.float64, order="C")
        if out_of_range(block):  # NaN/Inf/huge in a float file (counted by the levels meter)
            y[~(np.abs(y) <= MAX_SAMPLE_MAGNITUDE)] = 0.0
        sosfilt_rows(self.sos, y, self.zi)
        np.multiply(y, y, out=y)
        p = self.weights @ y
        starts = np.concatenate(([0], cuts))  # cuts rise strictly; only the last may be n
        if starts[-1] == n:
            return np.append(np.add.reduceat(p, starts[:-1]), 0.0)
        return np.add.reduceat(p, starts)

    def _push_1ms(self, sums: np.ndarray) -> None:
        self.momentary_max.push(sums)
        buf = np.concatenate((self.pending_1ms, sums))
        full = buf.size // 10 * 10
        self.pending_1ms = buf[full:].copy()
        if full == 0:
            return
        tens = buf[:full].reshape(-1, 10).sum(axis=1)
        self.short_term_max.push(tens)
        buf = np.concatenate((self.pending_10ms, tens))
        full = buf.size // 10 * 10
        self.pending_10ms = buf[full:].copy()
        if full:
            self.step_chunks.append(buf[:full].reshape(-1, 10).sum(axis=1))
            if len(self.step_chunks) > COMPACT_AFTER:  # one array, not thousands of small ones
                self.step_chunks = [np.concatenate(self.step_chunks)]

    # -- results ---------------------------------------------------------------------------

    def _steps(self) -> np.ndarray:
        if not self.step_chunks:
            return np.zeros(0)
        if len(self.step_chunks) > 1:
            self.step_chunks = [np.concatenate(self.step_chunks)]
        return self.step_chunks[0]

    def window_powers(self, width: int, first: int = 0, stop: int | None = None) -> np.ndarray:
        """Mean power of each complete ``width``-step window, at a 100 ms hop, of the
        windows lying within steps [first, stop) (default: the whole file)."""
        steps = self._steps()[first:stop]
        if steps.size < width:
            return np.zeros(0)
        totals = sliding_window_view(steps, width).sum(axis=1)
        ends = np.arange(first + width, first + steps.size + 1, dtype=np.int64)
        lengths = _boundaries(ends, self.rate, 10) - _boundaries(ends - width, self.rate, 10)
        return totals / lengths

    def step_count(self) -> int:
        """Complete 100 ms steps recorded."""
        return int(self._steps().size)

    def step_powers(self) -> np.ndarray:
        """Mean weighted power of each complete 100 ms step."""
        steps = self._steps()
        ends = np.arange(1, steps.size + 1, dtype=np.int64)
        return steps / (_boundaries(ends, self.rate, 10) - _boundaries(ends - 1, self.rate, 10))

    def span_values(self, first: int, stop: int) -> dict:
        """The LoudnessResult keys for the 100 ms steps [first, stop) only (a programme span
        or a part): gating and LRA as for a whole file; maxima at a 100 ms hop (the whole
        file's are found at a 1 ms / 10 ms hop), times at the end of their window."""
        stop = min(stop, self.step_count())
        first = min(first, stop)
        integrated, note = integrated_from_blocks(self.window_powers(MOMENTARY_STEPS, first, stop))
        lra, lra_note = loudness_range_from_short_term(
            self.window_powers(SHORT_TERM_STEPS, first, stop)
        )
        out = {
            "integrated_lufs": integrated,
            "integrated_note": note,
            "integrated_dual_mono_lufs": (
                integrated + units.DUAL_MONO_OFFSET_LU
                if self.mono and integrated is not None
                else None
            ),
            "loudness_range_lu": lra,
            "loudness_range_note": lra_note,
            "loudness_range_stable": lra is not None and (stop - first) * HOP_S >= LRA_STABLE_MIN_S,
        }
        for name, width, sliding in (
            ("momentary", MOMENTARY_STEPS, self.momentary_max),
            ("short_term", SHORT_TERM_STEPS, self.short_term_max),
        ):
            powers = self.window_powers(width, first, stop)
            level = time_s = None
            if powers.size:
                # the first window of the span (100 ms grid), then the finer records of every
                # window lying wholly inside it (ending in steps first + width .. stop - 1)
                best, end_frame = float(powers[0]), int(_boundaries(first + width, self.rate, 10))
                maxima, frames = sliding.step_maxima(stop)
                if sliding.per_step and stop > first + width:
                    inner = maxima[first + width : stop]
                    i = int(np.argmax(inner))
                    if inner[i] > best:
                        best, end_frame = float(inner[i]), int(frames[first + width + i])
                elif not sliding.per_step:  # no records: the 100 ms grid alone
                    i = int(np.argmax(powers))
                    best = float(powers[i])
                    end_frame = int(_boundaries(first + width + i, self.rate, 10))
                level = units.power_to_lufs(best)
                time_s = None if level == -math.inf else end_frame / self.rate
            out[f"max_{name}_lufs"] = level
            out[f"max_{name}_time_s"] = time_s
        return out

    def series(self) -> dict[str, tuple[float, np.ndarray]]:
        """Momentary and short-term loudness at a 100 ms hop; value i ends at (i + 1) * 0.1 s."""
        out = {}
        n = self._steps().size
        for name, width in (
            ("momentary_lufs", MOMENTARY_STEPS),
            ("short_term_lufs", SHORT_TERM_STEPS),
        ):
            values = np.full(n, -np.inf)
            if n >= width:
                values[width - 1 :] = units.powers_to_lufs(self.window_powers(width))
            out[name] = (HOP_S, values)
        return out

    def _integrated(self) -> tuple[float | None, str | None]:
        return integrated_from_blocks(self.window_powers(MOMENTARY_STEPS))

    def _loudness_range(self) -> tuple[float | None, str | None]:
        return loudness_range_from_short_term(self.window_powers(SHORT_TERM_STEPS))

    def result(self) -> LoudnessResult:
        integrated, integrated_note = self._integrated()
        lra, lra_note = self._loudness_range()
        dual_mono = None
        if self.mono and integrated is not None:
            dual_mono = integrated + units.DUAL_MONO_OFFSET_LU
        max_m, max_m_time = self.momentary_max.level()
        max_s, max_s_time = self.short_term_max.level()
        return LoudnessResult(
            integrated_lufs=integrated,
            integrated_dual_mono_lufs=dual_mono,
            integrated_note=integrated_note,
            loudness_range_lu=lra,
            loudness_range_note=lra_note,
            loudness_range_stable=lra is not None and self.frames / self.rate >= LRA_STABLE_MIN_S,
            max_momentary_lufs=max_m,
            max_momentary_time_s=max_m_time,
            max_short_term_lufs=max_s,
            max_short_term_time_s=max_s_time,
        )
