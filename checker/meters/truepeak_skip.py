"""True-peak skip bound: the filters of one oversampling factor (built once per process) with
the exact bound on every interpolated value of a chunk from its largest sample and largest
step, and the test of which chunks cannot raise the running maximum nor reach the ceiling
(the bound and its constants: "Speed: skipping chunks" in checker/meters/truepeak.py).

One job: decide, exactly, which chunk-channels need no interpolation. TruePeakMeter inherits
these methods (TruePeakSkip) and owns the attributes they use (bound, fine_gain,
ceiling_amp, stream, channels, state).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

from checker.dsp.interp import (
    CHUNK_FRAMES,
    ROW_POSITIONS,
    ChunkInterpolator,
    ChunkRun,
    design_phases,
    fractional_taps,
    phase_abs_sums,
    step_weights,
)
from checker.meters.truepeak_refine import FINE_STEPS

#: Relative margin on the skip bound (float32 dot products of <= 48 terms err < 3e-6).
BOUND_MARGIN = 1e-4


@dataclass(frozen=True)
class _Design:
    interp: ChunkInterpolator
    phase_rows: np.ndarray  # phases 1..factor-1 as rows (float32), for the compiled grid
    fine_taps: np.ndarray
    tap_bound: float
    bound: np.ndarray


@functools.lru_cache(maxsize=4)
def _design(factor: int) -> _Design:
    """The filters for one oversampling factor, built once per process (a few ms per file
    otherwise) and shared read-only by every meter of that factor."""
    phases = design_phases(factor)
    interp = ChunkInterpolator(phases, CHUNK_FRAMES + 2 * ROW_POSITIONS)
    phase_rows = np.ascontiguousarray(phases.T[1:], dtype=np.float32)
    fine_taps = fractional_taps(np.arange(FINE_STEPS) / FINE_STEPS, phases.shape[0])
    # Skip bound over every grid phase (as the float32 product uses them) and fine offset.
    rows = np.concatenate([phases.T.astype(np.float32).astype(np.float64), fine_taps])
    tap_bound = float(phase_abs_sums(rows.T).max())
    bound = np.array(
        [
            tap_bound,
            float(np.abs(rows.sum(axis=1)).max()),
            float(step_weights(rows).max()),
            BOUND_MARGIN,
        ]
    )
    for a in (interp.matrix, phase_rows, fine_taps, bound):
        a.flags.writeable = False
    return _Design(interp, phase_rows, fine_taps, tap_bound, bound)


class TruePeakSkip:
    """Skip-test methods of TruePeakMeter."""

    def _skipped_chunks(self, chunks: ChunkRun) -> np.ndarray:
        """Per chunk: True when _chunk would skip it on every channel. Tested for all of a
        block's chunks at once (one reduction instead of one per chunk), against the running
        maxima as they stand before the block: they only grow, so every chunk passed here
        is one _chunk skips too, and the result is the same bit for bit."""
        span = chunks.span()
        size = span.strides[1]
        windows = np.lib.stride_tricks.as_strided(
            span,
            (self.channels, len(chunks), chunks.window),
            (span.strides[0], chunks.step * size, size),
            writeable=False,
        )
        return self._skippable(windows, self.state.best[:, None]).all(axis=0)

    def _skippable(self, windows: np.ndarray, best: np.ndarray) -> np.ndarray:
        """Where a window (last axis: samples) cannot beat the running maxima ``best`` nor
        reach the ceiling: the exact bound of the module docstring, from the window's
        largest sample and largest step (kernels.c tp_reach does the same arithmetic).
        The steps are only looked at when the samples alone leave the question open
        (``S * P`` is a lower bound of the reach, as B >= S)."""
        b = self.bound
        p = np.maximum(windows.max(axis=-1), -windows.min(axis=-1)).astype(np.float64)
        floor = b[1] * p * (1.0 + b[3])
        if not ((floor * self.fine_gain <= best) & (floor <= self.ceiling_amp)).any():
            return np.zeros(np.broadcast_shapes(p.shape, np.shape(best)), dtype=bool)
        d = np.abs(np.diff(windows, axis=-1)).max(axis=-1).astype(np.float64)
        reach = np.minimum(b[0] * p, b[1] * p + b[2] * d) * (1.0 + b[3])
        return (reach * self.fine_gain <= best) & (reach <= self.ceiling_amp)
