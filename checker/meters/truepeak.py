"""True peak (ITU-R BS.1770 Annex 2: oversample, interpolate, absolute value), every channel.

Method
------
- Oversampling reaching at least 192 kHz: 4x below 96 kHz, 2x from 96 kHz,
  1x from 192 kHz (``true_peak_oversampling``). Our own filter
  (checker/dsp/interp.py): Kaiser-windowed sinc, 64 taps per phase, beta 4.5,
  cutoff at the input Nyquist, so phase 0 is the input sample itself; flat to
  0.47 fs (gain of every phase within -0.035 / +0.042 dB), down to -0.29 dB at
  0.48 fs, falling to 0 at Nyquist for the half-sample phase. All channels
  (LFE included) are measured.
- Between the oversampled points: around the local maxima that could beat the
  running maximum, the 4 with the largest three-point sinusoid-fit estimates
  (interp.refine_peaks) are evaluated with the same windowed sinc at 32 points
  per input sample over +-1 grid step, and the largest of those is refined once
  more by the sinusoid fit (at most +0.01 dB at that spacing). The reading is
  the filter's own band-limited reconstruction, not a model of it.
- Accuracy (measured; tests/conformance/test_truepeak.py, tests/conformance/test_truepeak_transients.py;
  the README's accuracy table): sines of amplitude A, 0.01-0.45 fs, 12 phases,
  44.1 / 48 / 96 kHz, away from file edges: 0.002 dB below to 0.032 dB above
  20 log10(A) (tests assert 0.02 / 0.05). Gaussian-envelope bursts (1.5 and 3
  periods) and noise band-limited to 0.45 or 0.48 fs, against FFT interpolation:
  0.004 dB low to 0.010 dB high (bursts), 0.07 dB low at worst (noise in
  0.46-0.48 fs). Above 0.48 fs the transition band reads low: band-pass noise
  0.48-0.49 fs up to 0.3 dB, 0.49-0.5 fs up to 2 dB; full-band white noise from
  0.15 dB low to 0.22 dB high. At 192 kHz and up (1x: the grid is the samples,
  the fine evaluation still interpolates) the sine bound is tested for tones up
  to fs / 4 only.
- Samples are converted to float32 before interpolation (exact for 8-24 bit
  PCM; about 1e-6 dB for 32-bit and float data). Non-finite samples of float
  files (NaN, Inf; counted by the levels meter) are taken as 0 here.

Edges
-----
Interpolated points whose filter window reaches outside the file do not count, and
``true_peak_at_edge`` flags a dominant maximum in the first or last 5 ms: the rule and its
reasons are in checker/meters/truepeak_refine.py (with the refinement). Span records
(``span_values``) are in checker/meters/truepeak_span.py.

Overs
-----
An over is a run of consecutive oversampled grid points (before refinement) on
one channel whose magnitude is strictly above ``options.true_peak_ceiling_dbtp``
(edge-zone interpolated points excluded, as in the edge rule). ``true_peak_overs`` sums
the runs of all channels; ``true_peak_over_times_s`` holds the start times of
the first ``options.max_positions`` runs in time order (channels in index order
on equal times).

Speed: skipping chunks
----------------------
The input is processed in fixed chunks of 4096 frames aligned to file positions
(so any block split gives bit-identical results). A chunk of a channel is not
interpolated when ``E * F * R`` cannot exceed the channel's running maximum and
``R`` cannot exceed the ceiling, where R bounds every interpolated value in the
chunk from its window's largest sample P and largest step between neighbouring
samples D (both float32, exact maxima):
``R = min(B * P, S * P + C * D) * (1 + 1e-4)``, with, over every grid phase and
fine offset, B the largest sum of |taps| (3.02), S the largest |sum of taps|
(1, the DC gain) and C the largest sum of |w_i| of the step form
``y = x[m] * sum(taps) + sum_i w_i (x[m+i+1] - x[m+i])`` (1.58;
interp.step_weights). The step form makes the bound follow the content: a
chunk of low-pass programme whose samples step by a tenth of its peak reaches
at most 1.16 P instead of 3.02 P. F = 1.0012 is the largest gain of the final
sinusoid fit and E = 0.05 dB the edge-dominance margin (so a skipped chunk
cannot change the edge decision either); the margin covers float32 rounding
(sums of 64 products err below 2e-5 of the bound). The bound is exact, so the
result equals the unskipped computation bit for bit
(``TruePeakMeter(..., skip=False)`` to check).

With the compiled kernels (checker/dsp/kernels.c, true-peak section) one call
per block does, for every chunk and channel, the skip test, the grid, its
largest value and the overs (``dc_tp_chunks``; its numpy twin is the per-chunk
code here); maxima found earlier in the same call tighten the test for later
chunks. Inside a chunk it computes, it leaves out blocks of 24 positions whose
own bound R_b (the same bound over the samples the block's filter windows read)
satisfies ``R_b * refine_bound <= best`` and ``R_b <= ceiling``: no over lies
there, and no point there can make the chunk a refinement candidate, so the
chunk's maximum is exact whenever the meter uses it (docs/standards.md#true-peak;
on the 10-minute stereo benchmark file this halves the routine's time, while a
limited master, above the ceiling almost everywhere, computes every block). The
block's stream comes as one ChunkRun (checker/dsp/interp.py), so the call gets
the whole evenly spaced span without a Python object per chunk, and the
refinement loop below visits only the chunk-channels that pass one vectorised
test against the maxima as they stand (they only grow, so none is missed). Only
chunk-channels whose grid could raise the running maximum come back for the
refinement (their grid recomputed by ``dc_tp_grid``, the same bits), which is
compiled too (``dc_tp_refine``, twin of ``_refine``: the same
candidates and float64 arithmetic, each fine point's 64 products added in tap
order; a short file refines most of its chunks, as its maximum is still
rising, so this is most of its fixed cost). The numpy path tests all of a block's chunks at once (one
reduction over their windows, against the maxima as they stand before the
block) and sends the rest to the per-chunk code.

That per-chunk refinement from Python is now the record mode's path (and the one
tests compare with). Otherwise (``fused``) the block routine refines too: every
chunk-channel in chunk order, right after its grid, against the running maximum
itself (``_native_run``, one call per block and one in ``result()`` for the final
chunks, the file's edges included). It is the numpy path's order and test, so the
values are the same bit for bit; the skip tests then run against the maximum
itself instead of a lower bound of it, and the refinement reuses the grid the
routine has just computed (only the blocks it left out and 8 positions either
side are computed again). On one-second stereo clips this took the meter from
18.7 M to 12.3 M instructions per clip (callgrind); every chunk-channel of such
a clip is still computed, as its maximum is still rising (docs/standards.md#true-peak
says why a seed from the block's sample peak or another refinement order would
not keep the values exact).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from checker.dsp import native, native_tp
from checker.dsp.interp import (
    CHUNK_FRAMES,
    ROW_POSITIONS,
    ChunkRun,
    ChunkStream,
    default_omega_max,
    oversampling_for_rate,
    refine_gain_bound,
)
from checker.io.audio import Block, StreamInfo
from checker.io.layout import Layout
from checker.meters.base import MeasureOptions
from checker.meters.truepeak_refine import (
    EDGE_S,
    FINE_CANDIDATES,
    FINE_STEPS,
    TruePeakRefinement,
    _State,
)
from checker.meters.truepeak_skip import TruePeakSkip, _design
from checker.meters.truepeak_span import RESET_DBFS, TruePeakSpanRecords
from checker.model.units import amplitude_to_db, db_to_amplitude

#: A maximum within EDGE_S of either end of the file is flagged as at the edge when it exceeds
#: every point in between by more than this (our over-read bound).
EDGE_DOMINANCE_DB = 0.05


@dataclass(frozen=True)
class TruePeakResult:
    true_peak_dbtp: float
    true_peak_time_s: float | None
    true_peak_channel_dbtp: list[float]
    true_peak_at_edge: bool
    true_peak_oversampling: int
    true_peak_ceiling_dbtp: float
    true_peak_overs: int
    true_peak_over_times_s: list[float] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return {
            "true_peak_dbtp": self.true_peak_dbtp,
            "true_peak_time_s": self.true_peak_time_s,
            "true_peak_channel_dbtp": list(self.true_peak_channel_dbtp),
            "true_peak_at_edge": self.true_peak_at_edge,
            "true_peak_oversampling": self.true_peak_oversampling,
            "true_peak_ceiling_dbtp": self.true_peak_ceiling_dbtp,
            "true_peak_overs": self.true_peak_overs,
            "true_peak_over_times_s": list(self.true_peak_over_times_s),
        }


class TruePeakMeter(TruePeakRefinement, TruePeakSkip, TruePeakSpanRecords):
    """Streaming true-peak meter; see the module docstring for the method."""

    def __init__(
        self,
        info: StreamInfo,
        layout: Layout,
        options: MeasureOptions,
        *,
        skip: bool = True,
        oversampling: int | None = None,
    ) -> None:
        self.rate_hz = info.sample_rate_hz
        self.channels = info.channels
        self.skip = skip
        self.ceiling_dbtp = float(options.true_peak_ceiling_dbtp)
        self.ceiling_amp = db_to_amplitude(self.ceiling_dbtp)
        self.max_positions = int(options.max_positions)
        factor = oversampling or oversampling_for_rate(self.rate_hz)
        if factor not in (1, 2, 4):
            raise ValueError(f"TruePeakMeter: oversampling = {factor} (expected 1, 2 or 4)")
        self.factor = factor
        d = _design(factor)
        self.interp, self.phase_rows, self.fine_taps = d.interp, d.phase_rows, d.fine_taps
        self.interp_taps = self.interp.taps
        self.tap_bound, self.bound = d.tap_bound, d.bound
        self.fine_omega = math.pi / FINE_STEPS
        self.fine_bound = refine_gain_bound(self.fine_omega)
        # Candidate selection only (not part of the skip bound): band-limited content.
        self.refine_omega = default_omega_max(factor)
        self.refine_bound = refine_gain_bound(self.refine_omega)
        self.refine_cos, self.fine_cos = math.cos(self.refine_omega), math.cos(self.fine_omega)
        self.fine_rate_hz = float(FINE_STEPS * self.rate_hz)  # fine points per second
        self.stream = ChunkStream(
            self.channels,
            CHUNK_FRAMES,
            ROW_POSITIONS,
            self.interp.history,
            self.interp.window_frames,
            holdback=math.ceil(EDGE_S * self.rate_hz) + 1,  # the last 5 ms wait for result()
        )
        self.edge_dominance = 10.0 ** (EDGE_DOMINANCE_DB / 20.0)
        #: Largest gain from a grid value to the reading that can change the result.
        self.fine_gain = self.fine_bound * self.edge_dominance
        self.native = native.enabled()
        #: Compiled path: one dc_tp_chunks call per block refines too (False: the refinement
        #: per chunk-channel from Python, as record mode does; tests compare the two).
        self.fused = self.native and skip and not options.keeps_step_records
        self.state = _State(
            best=np.zeros(self.channels),
            best_index=np.full(self.channels, -1, dtype=np.int64),
            best_inner=np.zeros(self.channels),
            in_run=np.zeros(self.channels, dtype=bool),
        )
        if options.keeps_step_records:
            self.state.refined, self.state.ranges = [], []
            self.state.local = np.zeros(self.channels)
            self.state.local_index = np.full(self.channels, -1, dtype=np.int64)
        self.reset_amp = db_to_amplitude(RESET_DBFS)
        self.final: _State | None = None  # the state after result(), for span_values()
        #: Chunk-channels interpolated / seen (for benchmarks; not part of the result).
        self.computed = 0
        self.seen = 0
        #: Chunk-channels refined (for benchmarks; not part of the result).
        self.refined = 0
        self.totals = (0, 0, 0)

    def feed(self, block: Block) -> None:
        x = block.x
        if block.raw is None and not np.isfinite(x).all():
            x = np.where(np.isfinite(x), x, 0.0)  # NaN/Inf: counted by the levels meter
        chunks = self.stream.push(x)  # views of one buffer (a ChunkRun)
        if self.state.ranges is None or not chunks:
            self._feed_chunks(chunks)
        else:
            self._by_level(self.state, chunks, self._feed_chunks)

    def _feed_chunks(self, chunks: ChunkRun) -> None:
        if self.fused:
            if chunks:
                self._native_run(self.state, chunks, None)
            return
        if chunks and chunks[0][0] == 0:  # the file's start: edge rule, per chunk below
            self._chunk(self.state, 0, chunks[0][1], None)
            chunks = chunks[1:]
        if not chunks:
            return
        if self.native and self.skip:
            self._native_chunks(chunks)
            return
        skipped = self._skipped_chunks(chunks) if self.skip else None
        for i, (j, window) in enumerate(chunks):
            if skipped is not None and skipped[i]:
                self.seen += self.channels
                self.state.in_run[:] = False
                continue
            self._chunk(self.state, j, window, None)

    def _native_run(self, st: _State, chunks: ChunkRun, last_frame: int | None) -> None:
        """Compiled twin of _chunk over a run of chunks (kernels.c, dc_tp_chunks): skip
        test, grid, maxima, overs and the refinement of every chunk-channel in chunk order
        in one call, the file edges included (``last_frame``: the file's last frame, for
        the final chunks; None before)."""
        count = len(chunks)
        cap = max(self.max_positions - len(st.over_index), 0)
        in_run = st.in_run.astype(np.uint8)
        half = self.interp_taps // 2
        first = (half - 1) * self.factor
        last = 2**62 if last_frame is None else (last_frame - half) * self.factor + self.factor - 1
        origin = chunks.first * CHUNK_FRAMES * self.factor  # grid index of the first centre
        end_s = math.inf if last_frame is None else last_frame / self.rate_hz - EDGE_S
        refine = native_tp.TpRefine(
            self.fine_taps, self.interp.history, ROW_POSITIONS, FINE_CANDIDATES,
            self.refine_cos, self.fine_cos, self.fine_rate_hz, (EDGE_S, end_s),
            st.best_index, st.best_inner,
        )  # fmt: skip
        computed, _, overs, starts = native_tp.tp_chunks(
            chunks.span(), chunks.step, count, chunks.window,
            self.interp.history + ROW_POSITIONS, CHUNK_FRAMES, self.phase_rows, self.factor,
            self.bound, self.fine_gain, self.refine_bound, self.ceiling_amp, st.best,
            in_run, cap, (origin, first, last), refine,
        )  # fmt: skip
        self.seen += count * self.channels
        self.computed += computed
        self.refined += int(refine.iargs[4])
        st.in_run[:] = in_run.astype(bool)
        st.overs += overs
        if any(starts):
            events = sorted((origin + k, c) for c, ks in enumerate(starts) for k in ks)
            st.over_index.extend(k for k, _ in events[:cap])

    def _native_chunks(self, chunks: ChunkRun) -> None:
        """Compiled twin of the numpy path below (kernels.c, dc_tp_chunks): skip test,
        grid, maxima and overs of all of a block's chunks in one call; the refinement of
        chunks that could raise a maximum stays here, in chunk order."""
        st = self.state
        count = len(chunks)
        cap = max(self.max_positions - len(st.over_index), 0)
        in_run = st.in_run.astype(np.uint8)
        computed, top, overs, starts = native_tp.tp_chunks(
            chunks.span(), chunks.step, count, chunks.window,
            self.interp.history + ROW_POSITIONS, CHUNK_FRAMES, self.phase_rows, self.factor,
            self.bound, self.fine_gain, self.refine_bound, self.ceiling_amp, st.best.copy(),
            in_run, cap,
        )  # fmt: skip
        self.seen += count * self.channels
        self.computed += computed
        st.in_run[:] = in_run.astype(bool)
        st.overs += overs
        if any(starts):
            origin = chunks.first * CHUNK_FRAMES * self.factor  # grid index of the first centre
            events = sorted((origin + k, c) for c, ks in enumerate(starts) for k in ks)
            st.over_index.extend(k for k, _ in events[:cap])
        # Refinement candidates: chunk-channels whose top could beat the running maximum.
        # The maxima only grow, so testing all rows against them as they stand now leaves
        # out only chunk-channels the exact test below (against the maxima as the earlier
        # refinements left them, in chunk order) would refuse too.
        rows, cols = np.nonzero((top * self.refine_bound > st.best) & (top > 0.0))
        lo = ROW_POSITIONS * self.factor
        hi = lo + CHUNK_FRAMES * self.factor
        for i, c in zip(rows.tolist(), cols.tolist(), strict=True):
            if top[i, c] * self.refine_bound > st.best[c]:
                j, window = chunks[i]
                y = self._grid(window[c])
                base = (j * CHUNK_FRAMES - ROW_POSITIONS) * self.factor
                self._refine_native(st, c, window[c], y, lo, hi, float(top[i, c]), base)

    def _grid(self, window: np.ndarray) -> np.ndarray:
        """Oversampled grid of one chunk-channel window (compiled or numpy)."""
        if not self.native or self.factor == 1:
            return self.interp.grid(window)
        back = self.interp_taps // 2 - 1
        lo = self.interp.history - back
        w = window[lo : lo + self.interp.positions + self.interp_taps - 1]
        return native_tp.tp_grid(w, self.interp.positions, self.phase_rows, self.factor)

    def _chunk(self, st: _State, j: int, window: np.ndarray, last_frame: int | None) -> None:
        """Process chunk j (window: channels x frames). Centres: all its grid points, or
        (final chunks) those up to the file's last frame `last_frame` (its phase 0
        included, nothing after)."""
        factor = self.factor
        lo = ROW_POSITIONS * factor
        hi = lo + CHUNK_FRAMES * factor
        if last_frame is not None and last_frame - j * CHUNK_FRAMES < CHUNK_FRAMES:
            hi = lo + (last_frame - j * CHUNK_FRAMES) * factor + 1
        base = (j * CHUNK_FRAMES - ROW_POSITIONS) * factor  # grid index of window grid 0
        masks = self._edge_masks(base, lo, hi, last_frame)
        skippable = self._skippable(window, st.best) if self.skip else None
        events: list[tuple[int, int]] = []
        for c in range(self.channels):
            self.seen += 1
            if skippable is not None and skippable[c]:
                st.in_run[c] = False
                continue
            self.computed += 1
            y = self._grid(window[c])
            a = np.abs(y)
            centres = a[lo:hi] if masks is None else a[lo:hi] * masks[0]
            top = float(centres.max())
            if top > 0.0 and top * self.refine_bound > st.best[c] and self.native:
                self._refine_native(st, c, window[c], y, lo, hi, top, base, last_frame)
            elif top > 0.0 and top * self.refine_bound > st.best[c]:
                self._refine(st, c, window[c], y, a, centres, lo, top, base, masks, last_frame)
            if top <= self.ceiling_amp:
                st.in_run[c] = False
                continue
            above = centres > self.ceiling_amp
            rising = above[1:] > above[:-1]  # False -> True: a run starts at i + 1
            first = bool(above[0]) and not st.in_run[c]
            st.overs += int(np.count_nonzero(rising)) + int(first)
            need = self.max_positions - len(st.over_index)
            if need > 0:
                starts = np.flatnonzero(rising)[:need] + 1
                if first:
                    starts = np.concatenate([[0], starts[: need - 1]])
                events.extend((base + lo + int(k), c) for k in starts)
            st.in_run[c] = bool(above[-1])
        if events and len(st.over_index) < self.max_positions:
            events.sort()
            st.over_index.extend(k for k, _ in events[: self.max_positions - len(st.over_index)])

    def result(self) -> TruePeakResult:
        st = self.state.copy()
        computed, seen, refined = self.computed, self.seen, self.refined
        frames = self.stream.frames_in

        def run(group: list) -> None:
            for j, window in group:
                self._chunk(st, j, window, frames - 1)

        if self.fused:
            tail = self.stream.remaining_run()
            if tail:
                self._native_run(st, tail, frames - 1)
        else:
            rest = list(self.stream.remaining())
            if st.ranges is None or not rest:
                run(rest)
            else:
                self._by_level(st, rest, run)
        #: (computed, seen, refined) with the final chunks (for benchmarks).
        self.totals = (self.computed, self.seen, self.refined)
        self.computed, self.seen, self.refined = computed, seen, refined
        self.final = st
        return self._make_result(st, frames)

    def _make_result(self, st: _State, frames: int) -> TruePeakResult:
        channel_db = [amplitude_to_db(v) for v in st.best]
        overall = float(st.best.max()) if self.channels else 0.0
        time_s = None
        at_edge = False
        if overall > 0.0:
            winners = np.flatnonzero(st.best == overall)
            index = int(st.best_index[winners].min())
            time_s = index / (FINE_STEPS * self.rate_hz)
            end_s = (frames - 1) / self.rate_hz
            near_end = time_s < EDGE_S or time_s > end_s - EDGE_S
            at_edge = near_end and overall > float(st.best_inner.max()) * self.edge_dominance
        grid_rate = self.factor * self.rate_hz
        return TruePeakResult(
            true_peak_dbtp=amplitude_to_db(overall),
            true_peak_time_s=time_s,
            true_peak_channel_dbtp=channel_db,
            true_peak_at_edge=bool(at_edge),
            true_peak_oversampling=self.factor,
            true_peak_ceiling_dbtp=self.ceiling_dbtp,
            true_peak_overs=st.overs,
            true_peak_over_times_s=[k / grid_rate for k in st.over_index],
        )
