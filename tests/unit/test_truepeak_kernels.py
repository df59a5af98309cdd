"""True peak's block routine (kernels.c dc_tp_chunks) and the chunk runs that feed it
(checker/dsp/interp.py ChunkStream, ChunkRun).

Expected values come from the same routine without the shortcut under test (every block of
positions computed) and from the grid routine (dc_tp_grid, the refinement's grid) read with
numpy; the run geometry from the definition of chunk j (input frames j * 4096 - lead ...).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_array_equal

from checker.dsp import native, native_tp
from checker.dsp.interp import CHUNK_FRAMES, ROW_POSITIONS, ChunkStream, refine_gain_bound
from checker.io.audio import Block, StreamInfo
from checker.io.layout import default_layout
from checker.meters.base import MeasureOptions
from checker.meters.truepeak import TruePeakMeter
from checker.meters.truepeak_skip import _design

needs_kernels = pytest.mark.skipif(
    not native.enabled(), reason=f"compiled kernels not loaded: {native.status()}"
)

NO_BLOCK_LEFT_OUT = 1e30  # refine_bound so large that no block of positions is left out
CEILING = 10 ** (-1 / 20)  # -1 dBTP, the default ceiling (MeasureOptions)


def _chunks(x: np.ndarray, factor: int, refine_bound: float, best: float, cap: int = 10):
    d = _design(factor)
    window = d.interp.window_frames
    n = (x.shape[1] - window) // CHUNK_FRAMES + 1
    best_io = np.full(x.shape[0], best)
    in_run = np.zeros(x.shape[0], np.uint8)
    computed, top, overs, starts = native_tp.tp_chunks(
        x, CHUNK_FRAMES, n, window, d.interp.history + ROW_POSITIONS, CHUNK_FRAMES,
        d.phase_rows, factor, d.bound, 1.007, refine_bound, CEILING, best_io, in_run, cap,
    )  # fmt: skip
    return computed, top, overs, starts, best_io, in_run


def _grid_top(x: np.ndarray, factor: int, j: int) -> float:
    """Largest |y| over chunk j's centres, from the whole grid (dc_tp_grid)."""
    d = _design(factor)
    taps = d.interp.taps
    lead = d.interp.history + ROW_POSITIONS
    w = x[j * CHUNK_FRAMES + lead - (taps // 2 - 1) :][: CHUNK_FRAMES + taps - 1]
    return float(
        np.abs(native_tp.tp_grid(np.ascontiguousarray(w), CHUNK_FRAMES, d.phase_rows, factor)).max()
    )


@needs_kernels
@pytest.mark.parametrize("factor", [1, 2, 4])
def test_blocks_left_out_change_no_over_and_no_top_that_counts(factor):
    # Loud bursts above the ceiling in quiet noise: with and without leaving out blocks
    # of positions, the same chunks computed, overs, run starts, runs carried over and
    # maxima; top the same wherever top * refine_bound exceeds the maximum (the only tops
    # the meter refines), and never above the top of the whole grid.
    rng = np.random.default_rng(factor)
    x = (rng.standard_normal((2, 6 * CHUNK_FRAMES + 4176)) * 0.02).astype(np.float32)
    x[0, 5_000:5_300] *= 60.0
    x[1, 13_000:13_100] *= 45.0
    x[1, 20_000:20_040] *= 70.0
    rb = refine_gain_bound(np.pi / max(factor, 2))
    for best in (0.0, 0.3):
        fast = _chunks(x, factor, rb, best)
        full = _chunks(x, factor, NO_BLOCK_LEFT_OUT, best)
        assert fast[0] == full[0] and fast[2] == full[2] > 0 and fast[3] == full[3]
        assert_array_equal(fast[4], full[4])  # maxima
        assert_array_equal(fast[5], full[5])  # runs carried over
        top_fast, top_full = fast[1], full[1]
        counts = top_full * rb > full[4]
        assert counts.any()
        assert_array_equal(top_fast[counts], top_full[counts])
        assert np.all(top_fast <= top_full)


@needs_kernels
def test_a_quiet_smooth_block_is_left_out():
    # One chunk: a Hann-windowed burst at 0.45 fs peaking at 0.2 (steps up to 0.39, so
    # the chunk's bound is above 0.4 and it is computed) and, far from it, a slow bump of
    # 0.35 (steps of 0.004: its blocks' own bound times refine_bound stays below 0.4). With a
    # running maximum of 0.4 the bump's blocks are left out, so top is the burst's (from the
    # whole grid: the bump's 0.35), and the meter would not refine it either way
    # (0.35 * 1.0824 < 0.4).
    x = np.zeros((1, CHUNK_FRAMES + 4176), dtype=np.float32)
    n = np.arange(200)
    x[0, 600:800] = 0.2 * np.sin(2 * np.pi * 0.45 * n) * np.hanning(200)
    x[0, 2_000:2_300] = 0.35 * np.sin(np.pi * np.arange(300) / 300)
    rb = refine_gain_bound(np.pi / 4)
    fast = _chunks(x, 4, rb, 0.4)
    full = _chunks(x, 4, NO_BLOCK_LEFT_OUT, 0.4)
    assert fast[0] == full[0] == 1  # the chunk is computed (not skipped whole)
    assert full[1][0, 0] == np.float32(_grid_top(x[0], 4, 0))  # the bump, from the grid
    assert 0.35 <= full[1][0, 0] < 0.4 / rb
    assert fast[1][0, 0] < 0.25  # the bump's blocks were left out
    assert_array_equal(fast[4], full[4])


def _reference_window(stream_input: np.ndarray, j: int, lead: int, window: int) -> np.ndarray:
    """Chunk j's window from the definition: input frames j * step - lead ..., zero before 0."""
    padded = np.concatenate([np.zeros((stream_input.shape[0], lead)), stream_input], axis=1)
    return padded[:, j * CHUNK_FRAMES : j * CHUNK_FRAMES + window].astype(np.float32)


@pytest.mark.parametrize("sizes", [[50_000, 1, 7_000, 30_000], [4_096] * 12, [40_000]])
def test_chunk_runs_are_sequences_of_the_defined_windows(sizes):
    lead, window, holdback = 48, 4176, 241
    rng = np.random.default_rng(len(sizes))
    x = rng.standard_normal((sum(sizes), 2))
    stream = ChunkStream(2, CHUNK_FRAMES, ROW_POSITIONS, lead - ROW_POSITIONS, window, holdback)
    seen, at = [], 0
    for n in sizes:
        run = stream.push(x[at : at + n])
        at += n
        assert len(run) == len(list(run))
        for i, (j, w) in enumerate(run):
            assert j == run.first + i and w.shape == (2, window)
            assert_array_equal(w, _reference_window(x[:at].T, j, lead, window))
            seen.append(j)
            if len(run) > 1:
                assert run[-1][0] == run.first + len(run) - 1
                tail = run[1:]
                assert tail.first == run.first + 1 and len(tail) == len(run) - 1
                assert_array_equal(tail[0][1], run[1][1])
        if run:
            span = run.span()  # every window, evenly spaced in one view
            for i, (_, w) in enumerate(run):
                assert_array_equal(span[:, i * CHUNK_FRAMES : i * CHUNK_FRAMES + window], w)
            with pytest.raises(IndexError):
                run[len(run)]
    # every chunk whose window and holdback have arrived, once, in order
    ready = (at + lead - window - holdback) // CHUNK_FRAMES + 1
    assert seen == list(range(ready))


# ------------------------------------------------- the fused refinement (dc_tp_chunks)
def _meter_values(x: np.ndarray, rate: int, block: int, *, fused: bool, skip: bool = True):
    """TruePeakMeter values and chunk-channels refined, with the refinement in the block
    routine (fused) or per chunk-channel from Python (dc_tp_grid + dc_tp_refine)."""
    info = StreamInfo("x.wav", "WAV", "FLOAT", rate, x.shape[1], x.shape[0])
    options = MeasureOptions(true_peak_ceiling_dbtp=-3.0, max_positions=20)
    m = TruePeakMeter(info, default_layout(x.shape[1]), options, skip=skip)
    m.fused = fused and skip
    for i in range(0, x.shape[0], block):
        m.feed(Block(x=x[i : i + block], raw=None, start=i))
    return m.result().to_dict(), m.totals


def _short_signal(seed: int, frames: int, channels: int) -> np.ndarray:
    """Bursts of band-limited noise and steady tones at random levels, edges included."""
    rng = np.random.default_rng(seed)
    x = np.zeros((frames, channels))
    for _ in range(int(rng.integers(1, 6))):
        start = int(rng.integers(0, max(frames - 1, 1)))
        n = int(rng.integers(1, max(frames - start, 2)))
        level = 10 ** rng.uniform(-2.5, 0.1)
        if rng.random() < 0.5:
            w = np.cumsum(rng.standard_normal((n, channels)), axis=0)
            w -= w.mean(axis=0)
            w /= np.abs(w).max() + 1e-12
        else:
            f = rng.uniform(0.01, 0.49)
            t = np.arange(n)[:, None]
            w = np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi, channels))
        x[start : start + n] += level * w[: frames - start]
    return x


@needs_kernels
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**31),
    frames=st.sampled_from([1, 40, 300, 4095, 4096, 4097, 9000, 12_288, 30_000, 48_000]),
    channels=st.sampled_from([1, 2, 6]),
    rate=st.sampled_from([44_100, 48_000, 96_000, 192_000]),
    block=st.sampled_from([777, 4096, 48_000]),
)
def test_fused_refinement_gives_the_values_of_the_per_chunk_path(
    seed, frames, channels, rate, block
):
    # The block routine refines in chunk order against the running maximum itself (not a
    # lower bound), so it skips at least as much; the values must be those of the per-chunk
    # path and of the meter without any skipping, bit for bit (the skip bound is exact:
    # docs/standards.md#true-peak), file edges and over counts included.
    x = _short_signal(seed, frames, channels)
    fused, fused_counts = _meter_values(x, rate, block, fused=True)
    per_chunk, per_chunk_counts = _meter_values(x, rate, block, fused=False)
    everything, _ = _meter_values(x, rate, block, fused=False, skip=False)
    assert fused == per_chunk == everything
    assert fused_counts[0] <= per_chunk_counts[0]  # computed: never more than before


@needs_kernels
def test_fused_refinement_runs_in_the_block_routine():
    # A one-second clip: the fused path refines inside dc_tp_chunks (no Python refinement
    # call), and refines chunk-channels where the maximum can still rise.
    x = _short_signal(7, 48_000, 2)
    values, (computed, seen, refined) = _meter_values(x, 48_000, 48_000, fused=True)
    assert seen == 2 * 12 and 0 < refined <= computed <= seen
    assert values["true_peak_dbtp"] > -60.0


@needs_kernels
def test_tp_chunks_refuses_refinement_arguments_outside_the_window():
    d = _design(4)
    x = np.zeros((1, d.interp.window_frames), np.float32)
    refine = native_tp.TpRefine(
        d.fine_taps, d.interp.history, ROW_POSITIONS + 40, 4, 0.9, 0.99, 1.5e6, (0.005, 1.0),
        np.full(1, -1, np.int64), np.zeros(1),
    )  # fmt: skip
    with pytest.raises(ValueError, match="refinement"):
        native_tp.tp_chunks(
            x, CHUNK_FRAMES, 1, d.interp.window_frames, d.interp.history + ROW_POSITIONS,
            CHUNK_FRAMES, d.phase_rows, 4, d.bound, 1.007, 1.08, CEILING, np.zeros(1),
            np.zeros(1, np.uint8), 10, refine=refine,
        )  # fmt: skip


def test_state_copy_is_a_deep_copy_of_every_field():
    # result() copies the meter's state (_State.copy, in place of copy.deepcopy): every
    # field equal to deepcopy's, and no array or list shared with the original.
    import copy
    import dataclasses

    from checker.meters.truepeak_refine import _State

    st = _State(np.array([0.5, 0.25]), np.array([3, 9]), np.array([0.4, 0.2]), np.ones(2, bool))
    st.overs, st.over_index, st.refined, st.ranges = 2, [5, 8], [(0, 1, 0.5, 3)], [(0, 1, 0.5)]
    st.local, st.local_index, st.last_quiet = np.array([0.1, 0.2]), np.array([1, 2]), False
    mine, reference = st.copy(), copy.deepcopy(st)
    for f in dataclasses.fields(_State):
        a, b, original = getattr(mine, f.name), getattr(reference, f.name), getattr(st, f.name)
        if isinstance(a, np.ndarray):
            assert_array_equal(a, b)
            assert a.dtype == b.dtype and not np.shares_memory(a, original)
        else:
            assert a == b
            assert not isinstance(a, list) or a is not original
