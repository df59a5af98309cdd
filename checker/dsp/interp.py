"""Polyphase interpolation (oversampling) for true peak, designed here.

Filter
------
A Kaiser-windowed sinc with its cutoff exactly at the input Nyquist frequency,
``h(i) = sinc(i / L) * kaiser(i)`` for ``|i| < L * T / 2`` (L = oversampling
factor, T = taps per phase). Because the cutoff is at Nyquist, every L-th tap
of the sinc is zero: phase 0 reproduces the input samples exactly, so the
oversampled signal always contains the sample peak, and only phases 1..L-1 need
arithmetic. Phase ``p`` (0 <= p < L) estimates the signal at ``m + p / L``
(input-sample units) from ``x[m - T/2 + 1] ... x[m + T/2]``.

Each phase (and each fractional offset, :func:`fractional_taps`) is scaled to
unit gain at DC. Default T = 64, beta = 4.5 (numbers measured here, 4x and 2x
alike, because the filter spans T input samples at either factor; see
tests/conformance/test_truepeak_transients.py): largest complex gain error of any phase
or fine offset 0.0040 up to 0.45 fs, 0.0049 up to 0.47 fs and 0.032 at
0.48 fs (gain -0.29 dB there); sum of |taps| per phase at 4x = 1, 2.44, 3.02,
2.44. Chosen over T = 32, beta 5 (the previous default: flat only to 0.45 fs,
so short transients near 0.47 fs read up to 1.3 dB low) by sweeping T and beta
against transients and band-limited noise measured with FFT interpolation
(Gaussian bursts band-limited to 0.48 fs, worst reading; sines 0.01-0.45 fs,
worst over-read): T = 48, beta 4: -0.008 dB, +0.054 dB; T = 56, beta 5:
-0.014 dB, +0.013 dB; T = 64, beta 4: +0.054 dB over-read; T = 64, beta 5:
-0.003 dB, +0.017 dB but band-pass noise at 0.46-0.48 fs 0.074 dB low (0.041
with beta 4.5). Longer filters cost more per sample (the compiled grid is 64
products per phase) and ring further at abrupt file edges.

Refinement between grid points
------------------------------
The grid alone under-reads by up to ``20 log10(cos(pi f / (L fs)))`` (0.55 dB
at 0.45 fs and 4x; 2.2 dB at 2x). :func:`refine_peaks` fits a sinusoid
``A cos(w (k - d))`` through the three grid values around a local maximum of
``|y|`` (``cos w = (y[-1] + y[+1]) / (2 y[0])``) and returns A. For a pure tone
this is exact up to the filter's error (measured alone on the 4x and 2x grids:
-0.008 / +0.033 dB). The frequency is clamped to ``w <= omega_max`` and the
result never exceeds ``|y0| / cos(omega_max / 2)`` (:func:`refine_gain_bound`).
The meter uses it to rank candidates and, at 32 points per sample, as a last
step (gain at most 1.0012 there).

Streaming
---------
:class:`ChunkStream` re-blocks any sequence of input blocks into fixed chunks
aligned to absolute frame positions (carrying the FIR history and look-ahead
across blocks), so the arithmetic done for every output sample is the same
whatever block split the caller uses: results are bit-identical across splits.
Each push returns the chunks it made ready as one :class:`ChunkRun` (a sequence
of (index, window) views of one buffer, and the span holding all of them for
compiled code), not a Python object per chunk.
:class:`ChunkInterpolator` computes one chunk as a single matrix product: the
chunk is viewed as overlapping rows of ``R`` outputs (row stride R input
samples), each row multiplied by one small block-Toeplitz matrix holding all
phases (the numpy path; measured with the previous 32-tap filter: several times
faster than ``scipy.signal.upfirdn`` or a ``sliding_window_view``). The compiled
path (checker/dsp/kernels.c, ``dc_tp_grid`` / ``dc_tp_chunks``) computes the
same grid directly: one float32 sum per output in tap order, 24 outputs per
register block (3 vectors of 8: with 3 phases that is 9 sums and 3 inputs, so
the inputs stay in registers; 32 outputs needed 17 registers and re-read every
input from memory once per phase). Measured here (2-core AMD EPYC VM, median of
5 paired processes, each the fastest of 60 calls; every block of the chunk
computed): 26 us per 4096-frame chunk-channel at 4x, skip test included, about
6 ns per channel-frame, against 54 us before (32 outputs, and the skip test's
scan compiled for the default target only). dc_tp_chunks also leaves out blocks
that cannot matter (checker/meters/truepeak.py, "Speed: skipping chunks").
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from typing import overload

import numpy as np

DEFAULT_TAPS_PER_PHASE = 64
DEFAULT_KAISER_BETA = 4.5
#: Outputs (input-sample positions) per row of the block-Toeplitz product.
ROW_POSITIONS = 8
#: Fixed chunk length in input frames (a multiple of ROW_POSITIONS).
CHUNK_FRAMES = 4096
#: Rows per matrix product. Measured here (OpenBLAS 0.3.31, 2 busy cores): 514 rows
#: x 40 x 32 runs single-threaded at about 5 ns per frame; 1026 rows went multi-threaded
#: and took 900 ns per frame. Keep each product at or below this size.
MAX_PRODUCT_ROWS = 520


def oversampling_for_rate(sample_rate_hz: int) -> int:
    """Smallest of 4, 2, 1 that reaches at least 192 kHz (1 from 192 kHz up)."""
    if sample_rate_hz < 96_000:
        return 4
    if sample_rate_hz < 192_000:
        return 2
    return 1


def fractional_taps(
    offsets: np.ndarray,
    taps_per_phase: int = DEFAULT_TAPS_PER_PHASE,
    kaiser_beta: float = DEFAULT_KAISER_BETA,
) -> np.ndarray:
    """Taps (len(offsets), taps_per_phase) estimating the signal at ``m + offset``.

    ``y(m + f) = sum_q taps[i, q] * x[m + q - (taps_per_phase // 2 - 1)]`` for
    ``f = offsets[i]`` in [0, 1). Kaiser-windowed sinc, cutoff at the input
    Nyquist, each row scaled to unit DC gain; offset 0 is exactly the sample.
    """
    if taps_per_phase < 2 or taps_per_phase % 2:
        raise ValueError(
            f"fractional_taps: taps_per_phase = {taps_per_phase} (expected an even number >= 2)"
        )
    offsets = np.asarray(offsets, dtype=np.float64)
    back = taps_per_phase // 2 - 1
    u = offsets[:, None] - (np.arange(taps_per_phase) - back)[None, :]  # distance to tap
    ratio = np.clip(u / (taps_per_phase / 2.0), -1.0, 1.0)
    window = np.i0(kaiser_beta * np.sqrt(1.0 - ratio * ratio)) / np.i0(kaiser_beta)
    taps = np.sinc(u) * window
    taps /= taps.sum(axis=1, keepdims=True)
    exact = offsets == 0.0
    taps[exact] = 0.0
    taps[exact, back] = 1.0
    return taps


def design_phases(
    factor: int,
    taps_per_phase: int = DEFAULT_TAPS_PER_PHASE,
    kaiser_beta: float = DEFAULT_KAISER_BETA,
) -> np.ndarray:
    """Polyphase matrix G (taps_per_phase, factor): column p holds phase p.

    ``y(m + p / factor) = sum_q G[q, p] * x[m + q - (taps_per_phase // 2 - 1)]``.
    Column 0 is the unit vector (phase 0 = the input sample).
    """
    if factor < 1:
        raise ValueError(f"design_phases: factor = {factor} (expected >= 1)")
    return fractional_taps(np.arange(factor) / factor, taps_per_phase, kaiser_beta).T.copy()


def phase_abs_sums(phases: np.ndarray) -> np.ndarray:
    """Sum of |taps| of each phase: |y_p| <= this * max |x| over the window."""
    return np.abs(phases).sum(axis=0)


def step_weights(taps: np.ndarray) -> np.ndarray:
    """Per row of ``taps`` (rows, T; tap q at ``m + q - (T // 2 - 1)``): the sum of |w_i|
    in ``y = x[m] * sum(taps) + sum_i w_i * (x[m + i + 1] - x[m + i])``.

    Abel summation: with ``d_i = x[m + i + 1] - x[m + i]``, a sample ``r`` ahead of m is
    ``x[m] + d_0 + ... + d_(r-1)`` and one ``r`` behind is ``x[m] - d_(-1) - ... - d_(-r)``,
    so ``w_i`` is the sum of the taps beyond ``i`` (i >= 0) or minus the sum of the taps
    at or before ``i`` (i < 0). Hence ``|y| <= |sum(taps)| * max|x| + result * max|d|``
    over the filter's window: a bound far below ``sum|taps| * max|x|`` for content whose
    neighbouring samples are close (most programme).
    """
    taps = np.asarray(taps, dtype=np.float64)
    back = taps.shape[1] // 2 - 1
    ahead = np.cumsum(taps[:, ::-1], axis=1)[:, ::-1]  # ahead[:, q] = sum of taps q..T-1
    behind = np.cumsum(taps, axis=1)  # behind[:, q] = sum of taps 0..q
    # i >= 0: taps beyond i are q >= back + i + 1; i < 0: taps at or before i are q <= back + i
    return np.abs(ahead[:, back + 1 :]).sum(axis=1) + np.abs(behind[:, :back]).sum(axis=1)


def refine_gain_bound(omega_max: float) -> float:
    """Largest ratio refine_peaks() can return over |y0|: 1 / cos(omega_max / 2)."""
    return 1.0 / math.cos(omega_max / 2.0)


def default_omega_max(factor: int) -> float:
    """Largest grid-rate frequency (rad/sample) the refinement assumes.

    Content up to the input Nyquist at 2x and 4x (pi / factor); at 1x
    (192 kHz and up, no interpolation) content up to fs / 4 (pi / 2).
    """
    return math.pi / factor if factor > 1 else math.pi / 2


def refine_peaks(
    y_prev: np.ndarray, y0: np.ndarray, y_next: np.ndarray, omega_max: float
) -> np.ndarray:
    """Peak magnitude of a sinusoid through three consecutive grid values.

    ``y0`` should be a local maximum of |y|. Returns |y0| * sqrt(1 + t^2) with
    ``tan(w d) = t``, ``w`` clamped to ``<= omega_max`` and ``|w d| <= w / 2``;
    so ``|y0| <= result <= |y0| * refine_gain_bound(omega_max)``. Float64.
    """
    y_prev = np.asarray(y_prev, dtype=np.float64)
    y0 = np.asarray(y0, dtype=np.float64)
    y_next = np.asarray(y_next, dtype=np.float64)
    u0 = np.abs(y0)
    s = np.where(y0 < 0, -1.0, 1.0)
    um = s * y_prev
    up = s * y_next
    safe_u0 = np.where(u0 > 0, u0, 1.0)
    c = np.clip((um + up) / (2.0 * safe_u0), math.cos(omega_max), 1.0)
    sin_w = np.sqrt(1.0 - c * c)
    limit = u0 * (1.0 - c)  # |w d| <= w / 2  <=>  |(up - um) / 2| <= u0 (1 - c)
    half_diff = np.clip((up - um) / 2.0, -limit, limit)
    ok = (limit > 0) & (sin_w > 0) & (u0 > 0)
    t = np.zeros_like(u0)
    np.divide(half_diff, safe_u0 * np.where(sin_w > 0, sin_w, 1.0), out=t, where=ok)
    return u0 * np.sqrt(1.0 + t * t)


class ChunkInterpolator:
    """Oversampled grid of one fixed-size chunk as one matrix product (float32).

    ``grid(window)`` takes the input window for ``positions`` output positions
    starting at P (the window starts at ``P - history``, length
    ``window_frames``) and returns ``positions * factor`` grid values in time
    order: ``y(P), y(P + 1/L), ..., y(P + positions - 1/L)``.
    """

    def __init__(self, phases: np.ndarray, positions: int, rows: int = ROW_POSITIONS) -> None:
        taps, factor = phases.shape
        if positions % rows:
            raise ValueError(
                f"ChunkInterpolator: positions = {positions} (expected a multiple of {rows})"
            )
        self.factor = factor
        self.taps = taps
        self.positions = positions
        self.rows = rows
        back, fwd = taps // 2 - 1, taps // 2
        span = rows + taps - 1
        self.row_width = -(-span // rows) * rows  # rounded up to whole rows
        pad = self.row_width - span
        self.history = back + pad  # window starts this many frames before P
        self.window_frames = (positions // rows - 1) * rows + self.row_width
        self.lookahead = self.window_frames - self.history - positions  # >= fwd
        assert self.lookahead >= fwd
        big = np.zeros((self.row_width, rows * factor))
        for i in range(rows):  # output position P + i, window index of x[P + i + o]
            for q in range(taps):
                big[pad + i + q, i * factor : (i + 1) * factor] = phases[q]
        self.matrix = big.astype(np.float32)

    def grid(self, window: np.ndarray) -> np.ndarray:
        """window: 1-D C-contiguous float32 of length window_frames."""
        if self.factor == 1:
            return window[self.history : self.history + self.positions].copy()
        n_rows = self.positions // self.rows
        if window.dtype != np.float32 or not window.flags.c_contiguous:
            raise ValueError("ChunkInterpolator.grid: window (expected C-contiguous float32)")
        if window.shape[0] != self.window_frames:
            raise ValueError(
                f"ChunkInterpolator.grid: window frames = {window.shape[0]} "
                f"(expected {self.window_frames})"
            )
        size = window.itemsize
        # Overlapping rows (stride `rows` samples) over the window's memory: read-only use.
        view = np.ndarray(
            (n_rows, self.row_width), np.float32, buffer=window, strides=(self.rows * size, size)
        )
        if n_rows <= MAX_PRODUCT_ROWS:
            return np.dot(view, self.matrix).reshape(-1)
        parts = [
            np.dot(view[i : i + MAX_PRODUCT_ROWS], self.matrix)
            for i in range(0, n_rows, MAX_PRODUCT_ROWS)
        ]
        return np.concatenate(parts).reshape(-1)


class ChunkRun(Sequence):
    """The chunks one push() made ready: chunk ``first + i`` is ``(first + i, window)`` with
    window ``buf[:, offset + i * step :][:, :window]`` (views of one buffer, valid until the
    next push). A sequence of those pairs, so per-chunk code can iterate and slice it
    (slices are runs too); compiled code takes the whole evenly spaced span at once
    (:meth:`span`) without a Python object per chunk."""

    __slots__ = ("first", "count", "buf", "offset", "step", "window")

    def __init__(
        self, first: int, count: int, buf: np.ndarray, offset: int, step: int, window: int
    ) -> None:
        self.first, self.count, self.buf = first, count, buf
        self.offset, self.step, self.window = offset, step, window

    def __len__(self) -> int:
        return self.count

    @overload
    def __getitem__(self, i: int) -> tuple[int, np.ndarray]: ...
    @overload
    def __getitem__(self, i: slice) -> ChunkRun: ...
    def __getitem__(self, i: int | slice) -> tuple[int, np.ndarray] | ChunkRun:
        if isinstance(i, slice):
            start, stop, stride = i.indices(self.count)
            if stride != 1:
                raise ValueError(f"ChunkRun: slice step = {stride} (expected 1)")
            n = max(stop - start, 0)
            lo = self.offset + start * self.step
            return ChunkRun(self.first + start, n, self.buf, lo, self.step, self.window)
        if i < 0:
            i += self.count
        if not 0 <= i < self.count:
            raise IndexError(f"ChunkRun: index {i} (expected 0 to {self.count - 1})")
        lo = self.offset + i * self.step
        return self.first + i, self.buf[:, lo : lo + self.window]

    def span(self) -> np.ndarray:
        """(channels, frames) view holding every window of the run (count >= 1)."""
        return self.buf[:, self.offset : self.offset + (self.count - 1) * self.step + self.window]


class ChunkStream:
    """Re-blocks (frames, channels) input into fixed, position-aligned chunks.

    Chunk j covers output positions ``[j * step - before, (j + 1) * step + after)``
    and needs input ``[start, start + window)`` with
    ``start = j * step - before - history``. Input before frame 0 and after the
    last frame is zero. Keeps only the not-yet-used tail (history + look-ahead +
    holdback), channel-major float32 so each channel's window is contiguous.
    """

    def __init__(
        self, channels: int, step: int, before: int, history: int, window: int, holdback: int = 0
    ) -> None:
        self.channels = channels
        self.step = step
        self.lead = before + history  # zeros needed before frame 0 for chunk 0
        self.window = window
        #: push() yields a chunk only when this many frames beyond its window have arrived.
        self.holdback = holdback
        self.frames_in = 0
        self.next_chunk = 0
        # buf holds input frames [buf_start, buf_start + buf.shape[1])
        self.buf_start = -self.lead
        self.buf = np.zeros((channels, self.lead), dtype=np.float32)

    def _chunk_start(self, j: int) -> int:
        return j * self.step - self.lead

    def push(self, x: np.ndarray) -> ChunkRun:
        """Append a block; return the chunks now ready (windows (channels, window) float32):
        every chunk whose window and holdback lie inside the input so far."""
        if x.shape[0]:
            kept = self.buf.shape[1]
            buf = np.empty((self.channels, kept + x.shape[0]), dtype=np.float32)
            buf[:, :kept] = self.buf
            np.copyto(buf[:, kept:], x.T, casting="same_kind")  # float64 -> float32 in one pass
            self.buf = buf
            self.frames_in += x.shape[0]
        end = self.buf_start + self.buf.shape[1]
        first = self.next_chunk
        # chunk j is ready when _chunk_start(j) + window + holdback <= end
        room = end - self.window - self.holdback - self._chunk_start(first)
        count = room // self.step + 1 if room >= 0 else 0
        offset = self._chunk_start(first) - self.buf_start
        run = ChunkRun(first, count, self.buf, offset, self.step, self.window)
        self.next_chunk += count
        keep_from = self._chunk_start(self.next_chunk) - self.buf_start
        if keep_from > 0:
            self.buf = np.ascontiguousarray(self.buf[:, keep_from:])
            self.buf_start += keep_from
        return run

    def remaining_run(self) -> ChunkRun:
        """The chunks of :meth:`remaining` as one ChunkRun over a zero-padded copy (no
        state change)."""
        first = self.next_chunk
        count = max(-(-self.frames_in // self.step) - first, 0)
        if not count:
            return ChunkRun(first, 0, self.buf, 0, self.step, self.window)
        lo = self._chunk_start(first) - self.buf_start
        buf = np.zeros((self.channels, (count - 1) * self.step + self.window), dtype=np.float32)
        have = self.buf[:, lo : lo + buf.shape[1]]
        buf[:, : have.shape[1]] = have
        return ChunkRun(first, count, buf, 0, self.step, self.window)

    def remaining(self) -> Iterator[tuple[int, np.ndarray]]:
        """Zero-padded chunks still holding frames < frames_in (no state change)."""
        j = self.next_chunk
        while j * self.step < self.frames_in:
            lo = self._chunk_start(j) - self.buf_start
            window = np.zeros((self.channels, self.window), dtype=np.float32)
            have = self.buf[:, lo : lo + self.window]
            window[:, : have.shape[1]] = have
            yield j, window
            j += 1


def oversample(x: np.ndarray, phases: np.ndarray) -> np.ndarray:
    """Whole-signal reference: grid values of a 1-D signal at m + p/L, m = 0..N-1.

    Zero before the first and after the last sample. Float64 direct sum (slow,
    for tests and inspection).
    """
    taps, factor = phases.shape
    back = taps // 2 - 1
    n = x.shape[0]
    xp = np.concatenate([np.zeros(back), np.asarray(x, dtype=np.float64), np.zeros(taps)])
    windows = np.lib.stride_tricks.sliding_window_view(xp, taps)[:n]
    return (windows @ phases).reshape(-1)
