"""The compiled kernels (checker/dsp/kernels.c) against their numpy twins.

Expected values come from numpy / scipy doing the same arithmetic (the project's own
numpy path, which the conformance and cross-check tests hold against EBU Tech 3341/3342
and the reference libraries). The meters' own tests run with the compiled kernels when
they are built (the default), so every published check also covers this path.
"""

from __future__ import annotations

import math
import os
import shutil
import subprocess
import sys

import numpy as np
import pytest
import soundfile as sf
from meterkit import run_meter
from numpy.testing import assert_allclose, assert_array_equal

from checker.analysis.onepass import measure
from checker.dsp import native, native_tp
from checker.dsp.iir import sosfilt_rows
from checker.dsp.interp import (
    CHUNK_FRAMES,
    ROW_POSITIONS,
    ChunkInterpolator,
    design_phases,
    oversample,
)
from checker.dsp.kweighting import k_weighting_sos
from checker.io.audio import INT32_SCALE, Block, StreamInfo
from checker.io.layout import default_layout
from checker.meters.base import MeasureOptions
from checker.meters.channels import ChannelsMeter
from checker.meters.levels import LevelsMeter
from checker.meters.loudness import LoudnessMeter
from checker.meters.silence import SilenceMeter
from checker.meters.truepeak import TruePeakMeter
from checker.meters.truepeak_refine import _State

needs_kernels = pytest.mark.skipif(
    not native.enabled(), reason=f"compiled kernels not loaded: {native.status()}"
)


def test_kernels_are_built_where_a_compiler_is():
    # setup.py builds them at install; only a machine without a C compiler, or the
    # DELIVERYCHECK_KERNELS=numpy switch, may leave the numpy path in charge.
    if os.environ.get(native.ENV, "").lower() == "numpy":
        pytest.skip(f"{native.ENV}=numpy set for this run")
    if shutil.which("cc") is None and shutil.which("gcc") is None:
        pytest.skip("no C compiler on this machine: the numpy path is expected")
    assert native.enabled(), native.status()


def test_environment_switch_selects_numpy():
    code = "from checker.dsp import native; print(native.enabled(), native.status())"
    env = dict(os.environ, **{native.ENV: "numpy"})
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    assert out.stdout.startswith("False numpy kernels"), out.stdout


def test_disabled_context_switches_meters_to_numpy():
    with native.disabled():
        assert not native.enabled()
        assert not LevelsMeter(_info(2), default_layout(2), MeasureOptions()).native
    assert LevelsMeter(_info(2), default_layout(2), MeasureOptions()).native == native.enabled()


def _info(channels: int, subtype: str = "PCM_24", rate: int = 48_000) -> StreamInfo:
    return StreamInfo("x.wav", "WAV", subtype, rate, channels, None)


# ------------------------------------------------------------------------ kernels


@needs_kernels
@pytest.mark.parametrize("channels", [1, 2, 3, 6])
def test_deinterleave_matches_numpy(channels):
    rng = np.random.default_rng(channels)
    buf = rng.integers(-(2**31), 2**31 - 1, size=(1001, channels), dtype=np.int32)
    raw_t, x_t = np.empty((channels, 1001), np.int32), np.empty((channels, 1001))
    native.deinterleave_i32(buf, raw_t, x_t, INT32_SCALE)
    assert_array_equal(raw_t, buf.T)
    assert_array_equal(x_t, buf.T * INT32_SCALE)  # exact: a power-of-two scale
    f = rng.standard_normal((777, channels))
    out = np.empty((channels, 777))
    native.deinterleave_f64(f, out)
    assert_array_equal(out, f.T)


@needs_kernels
@pytest.mark.parametrize("rate", [44_100, 48_000, 96_000])
@pytest.mark.parametrize("rows", [[0], [0, 1], [0, 1, 2, 4, 5], [2]])
def test_kweight_sums_match_scipy_sosfilt(rate, rows):
    rng = np.random.default_rng(rate + len(rows))
    x = rng.standard_normal((6, 5000)) * 0.3
    x[1, 100] = np.nan  # non-finite samples count as 0
    x[2, 7] = np.inf
    rows_a = np.array(rows, dtype=np.int64)
    sos = np.ascontiguousarray(k_weighting_sos(rate))
    weights = np.linspace(1.0, 1.41, len(rows))
    zi_c, zi_n = np.zeros((len(rows), 2, 2)), np.zeros((len(rows), 2, 2))
    pieces = {(0, 1234): [48, 96, 1234], (1234, 1235): [], (1235, 5000): [1, 2000, 3765]}
    for (lo, hi), cuts in pieces.items():  # state carried across calls
        block = np.ascontiguousarray(x[:, lo:hi])
        got = native.kweight_sums(block, rows_a, sos, zi_c, weights, np.array(cuts, np.int64))
        y = np.where(np.isfinite(block[rows_a]), block[rows_a], 0.0)
        sosfilt_rows(sos, y, zi_n)  # scipy's compiled sosfilt (checker/dsp/iir.py)
        # Same recursion in the same order without fused multiply-adds: the same bits.
        assert_array_equal(zi_c, zi_n)
        p = weights @ (y * y)
        edges = [0, *cuts, hi - lo]
        want = [p[a:b].sum() for a, b in zip(edges[:-1], edges[1:], strict=True)]
        assert_allclose(got, want, rtol=1e-12, atol=1e-300)
    with pytest.raises(ValueError, match="cuts must rise"):
        bad = np.array([9, 3], dtype=np.int64)
        native.kweight_sums(x[:2].copy(), np.zeros(1, np.int64), sos, zi_c[:1], weights[:1], bad)


@needs_kernels
@pytest.mark.parametrize("channels", [1, 2, 5])
def test_channel_stats_match_numpy(channels):
    rng = np.random.default_rng(10 + channels)
    raw = rng.integers(-(2**23), 2**23, size=(channels, 9600), dtype=np.int32) << 8
    raw[:, 4000:4500] = 0  # all-channel digital zero
    raw[0, 7000:7100] = 0  # one channel only: not a zero frame
    x = raw * INT32_SCALE
    cuts = np.array([1000, 5800, 9600], dtype=np.int64)
    mx, mn, sm, sq, zero, isum, ors = native.channel_stats(x, raw, cuts, raw_scaled=True)
    assert_array_equal(mx, x.max(axis=1))
    assert_array_equal(mn, x.min(axis=1))
    assert_allclose(sm, x.sum(axis=1), rtol=1e-12, atol=1e-12)
    assert_array_equal(isum, raw.sum(axis=1, dtype=np.int64))  # exact, via the float sums
    _, _, _, _, _, isum_loop, _ = native.channel_stats(x, raw, cuts, raw_scaled=False)
    assert_array_equal(isum_loop, raw.sum(axis=1, dtype=np.int64))
    assert_array_equal(ors, np.bitwise_or.reduce(raw, axis=1))
    edges = [0, 1000, 5800, 9600, 9600]
    for k in range(4):
        part = x[:, edges[k] : edges[k + 1]]
        assert_allclose(sq[k], (part * part).sum(axis=1), rtol=1e-12, atol=0)
        assert zero[k] == int((~np.any(part != 0, axis=0)).sum())
    assert zero.sum() == 500 + (100 if channels == 1 else 0)  # mono: the 100 count too


@needs_kernels
@pytest.mark.parametrize("channels", [1, 2, 6])
def test_frame_scan_matches_numpy(channels):
    rng = np.random.default_rng(20 + channels)
    x = rng.standard_normal((channels, 4800)) * 1e-4  # below -60 dBFS: quiet
    x[:, :300] = 0.0
    x[:, 4000:] = 0.0
    x[-1, 1000] = 0.5  # one loud sample in the last channel
    x[0, 2000] = -0.002
    threshold = 10 ** (-60 / 20)
    mask = np.full(4800, 7, dtype=np.uint8)
    zeros, first, last, first_nz, last_nz = native.frame_scan(x, threshold, mask)
    level = np.abs(x).max(axis=0)
    loud = np.flatnonzero(level >= threshold)
    nonzero = np.flatnonzero(level > 0)
    assert (first, last) == (loud[0], loud[-1]) == (1000, 2000)
    assert (first_nz, last_nz) == (nonzero[0], nonzero[-1]) == (300, 3999)
    assert zeros == 300 + 800
    assert_array_equal(mask.view(bool), level == 0)
    quiet = np.full(10, 8, dtype=np.uint8)
    assert native.frame_scan(np.zeros((channels, 10)), threshold, quiet) == (10, -1, -1, -1, -1)


@needs_kernels
def test_pair_products_match_einsum():
    rng = np.random.default_rng(3)
    x = rng.standard_normal((4, 3000))
    first = np.array([0, 0, 1, 2], dtype=np.int64)
    second = np.array([1, 3, 2, 3], dtype=np.int64)
    got = native.pair_products(x, first, second)
    assert_allclose(got, np.einsum("ij,ij->i", x[first], x[second]), rtol=1e-12, atol=1e-12)


@needs_kernels
def test_wrappers_refuse_wrong_buffers():
    with pytest.raises(ValueError, match="expected C-contiguous float64"):
        native.channel_stats(np.zeros((2, 10), dtype=np.float32), None, np.zeros(0, np.int64))
    with pytest.raises(ValueError, match="expected C-contiguous"):
        native.frame_scan(np.zeros((10, 2)).T, 0.1, np.zeros(10, np.uint8))
    with pytest.raises(ValueError, match="rows"):
        native.kweight_sums(
            np.zeros((2, 10)),
            np.array([0, 2], dtype=np.int64),
            np.zeros((2, 6)),
            np.zeros((2, 2, 2)),
            np.ones(2),
            np.zeros(0, dtype=np.int64),
        )


# ------------------------------------------------------------------- whole meters


def _programme(
    seconds: float, channels: int, rate: int, seed: int
) -> tuple[np.ndarray, np.ndarray]:
    """Noise bursts with digital-zero gaps, a quiet tail and one clipped run, as PCM_24
    codes (left-justified int32) and their float view."""
    rng = np.random.default_rng(seed)
    n = int(seconds * rate)
    env = np.repeat(rng.uniform(0.01, 0.5, size=n // 4800 + 1), 4800)[:n]
    x = rng.standard_normal((n, channels)) * env[:, None] * 0.3
    x[int(0.5 * rate) : int(0.55 * rate)] = 0.0  # a dropout
    x[-int(0.3 * rate) :] *= 1e-5  # quiet tail
    x[int(1.2 * rate) : int(1.2 * rate) + 5, 0] = 1.0  # clipped run
    codes = np.clip(np.round(x * 2**23), -(2**23), 2**23 - 1).astype(np.int32) << 8
    return codes, codes * INT32_SCALE


def _same(a, b, key: str = "") -> None:
    """Equal, floats to 1e-9 (summation order differs between the paths), recursively."""
    if isinstance(a, dict):
        assert a.keys() == b.keys(), key
        for k in a:
            _same(a[k], b[k], k)
    elif isinstance(a, (list, tuple)):
        assert len(a) == len(b), key
        for va, vb in zip(a, b, strict=True):
            _same(va, vb, key)
    elif isinstance(a, float) and isinstance(b, float) and math.isfinite(a):
        assert_allclose(a, b, rtol=1e-9, atol=1e-9, err_msg=key)
    else:
        assert a == b, key


@pytest.mark.parametrize("meter_cls", [LoudnessMeter, LevelsMeter, SilenceMeter, ChannelsMeter])
@pytest.mark.parametrize("channels", [1, 2, 6])
def test_meters_give_the_same_results_on_both_paths(meter_cls, channels):
    raw, x = _programme(4.0, channels, 48_000, seed=channels)
    info = _info(channels)
    sizes = (4_800, 1_000, 48_000, 7)
    compiled = run_meter(meter_cls, info, x, raw=raw, sizes=sizes)
    with native.disabled():
        plain = run_meter(meter_cls, info, x, raw=raw, sizes=sizes)
    _same(compiled.to_dict(), plain.to_dict())


def test_measure_gives_the_same_values_on_both_paths(tmp_path):
    raw, _ = _programme(5.0, 2, 44_100, seed=9)
    path = tmp_path / "p.wav"
    sf.write(path, (raw >> 8) / 2**23, 44_100, subtype="PCM_24")  # exact 24-bit codes
    compiled = measure(str(path))
    with native.disabled():
        plain = measure(str(path))
    _same(compiled.values, plain.values)
    assert compiled.findings == plain.findings


@pytest.mark.parametrize("gap", [(900, 1000), (1000, 1100), (950, 2050)])
def test_dropout_at_a_block_edge_on_both_paths(gap):
    # A digital-zero run that ends or starts exactly at a block boundary (blocks of 1000
    # frames): the compiled path writes its zero mask only for blocks holding zeros.
    rng = np.random.default_rng(4)
    x = rng.standard_normal((4000, 2)) * 0.1 + 0.3  # never exactly zero
    x[gap[0] : gap[1]] = 0.0
    info = StreamInfo("x.wav", "WAV", "FLOAT", 48_000, 2, None)
    options = MeasureOptions(dropout_min_s=0.001)  # 48 frames
    compiled = run_meter(SilenceMeter, info, x, sizes=(1000,), options=options)
    with native.disabled():
        plain = run_meter(SilenceMeter, info, x, sizes=(1000,), options=options)
    assert compiled == plain
    assert compiled.dropouts == 1  # hand count: one gap
    assert_allclose(compiled.longest_dropout_s, (gap[1] - gap[0]) / 48_000, rtol=0, atol=1e-12)


@needs_kernels
def test_levels_and_channels_share_one_pass_per_block(monkeypatch):
    # checker.meters.blockstats: the first meter computes the block's statistics, the second
    # reads them from block.memo; a cleaned copy (NaN/Inf zeroed) is never shared.
    from checker.meters import blockstats

    calls = []
    real = native.channel_stats
    monkeypatch.setattr(native, "channel_stats", lambda *a, **k: calls.append(1) or real(*a, **k))
    raw, x = _programme(1.0, 2, 48_000, seed=2)
    info = _info(2)
    levels = LevelsMeter(info, default_layout(2), MeasureOptions())
    channels = ChannelsMeter(info, default_layout(2), MeasureOptions())
    block = Block(x, raw, 0)
    levels.feed(block)
    channels.feed(block)
    assert len(calls) == 1
    assert ("sample_stats", blockstats.segment_frames(48_000), True) in block.memo
    f = x.copy()
    f[10, 0] = np.nan
    float_info = _info(2, "FLOAT")
    levels = LevelsMeter(float_info, default_layout(2), MeasureOptions())
    nan_block = Block(f, None, 0)
    levels.feed(nan_block)  # counts the NaN, measures a cleaned copy
    assert nan_block.memo == {}


def _run_prepared(meter_cls, info, x, raw, sizes, prepare: bool):
    """Feed (x, raw) in blocks of the given sizes (cycled), calling prepare() on each block
    first when asked, as measure() does in its reader."""
    meter = meter_cls(info, default_layout(info.channels), MeasureOptions())
    start, i = 0, 0
    while start < x.shape[0]:
        stop = min(x.shape[0], start + sizes[i % len(sizes)])
        block = Block(np.ascontiguousarray(x[start:stop].T).T, None, start)
        if raw is not None:
            block = Block(block.x, np.ascontiguousarray(raw[start:stop].T).T, start)
        if prepare:
            meter.prepare(block)
        meter.feed(block)
        start, i = stop, i + 1
    return meter.result()


@needs_kernels
@pytest.mark.parametrize("meter_cls", [LoudnessMeter, LevelsMeter, SilenceMeter])
@pytest.mark.parametrize("sizes", [(48_000,), (4_800, 1_000, 9_999), (100_000, 3)])
def test_prepare_then_feed_gives_the_same_results(meter_cls, sizes):
    # measure() runs each meter's prepare() on a block as soon as it is decoded (in the
    # read-ahead thread when there is one); feed() must then give what it gives alone.
    raw, x = _programme(6.0, 2, 48_000, seed=11)
    info = _info(2)
    with_prepare = _run_prepared(meter_cls, info, x, raw, sizes, prepare=True)
    alone = _run_prepared(meter_cls, info, x, raw, sizes, prepare=False)
    _same(with_prepare.to_dict(), alone.to_dict())


@needs_kernels
def test_prepare_fills_the_block_memo():
    raw, x = _programme(1.0, 2, 48_000, seed=12)
    block = Block(np.ascontiguousarray(x.T).T, np.ascontiguousarray(raw.T).T, 0)
    for cls in (LoudnessMeter, LevelsMeter, SilenceMeter):
        cls(_info(2), default_layout(2), MeasureOptions()).prepare(block)
    assert {"loudness", "frame_scan", "silence_steps"} <= set(block.memo)
    assert any(key[0] == "sample_stats" for key in block.memo if isinstance(key, tuple))


# ------------------------------------------------------------------------ true peak


def _aligned_copy(x: np.ndarray, shift: int) -> np.ndarray:
    """x copied into a fresh buffer starting `shift` float32 elements past a 64-byte
    boundary (so the compiled code sees every alignment)."""
    raw = np.empty(x.size + 32, dtype=np.float32)
    start = (-raw.ctypes.data % 64) // 4 + shift
    out = raw[start : start + x.size]
    out[:] = x
    return out


@needs_kernels
@pytest.mark.parametrize("factor", [2, 4])
def test_tp_grid_matches_numpy_interpolator_at_any_alignment(factor):
    # numpy twin: ChunkInterpolator.grid (float32 BLAS product); float64 direct sum:
    # interp.oversample. Float32 sums of 64 terms of magnitude < 3: error < 1e-5.
    phases = design_phases(factor)
    taps = phases.shape[0]
    interp = ChunkInterpolator(phases, 4112)
    rng = np.random.default_rng(factor)
    window = (rng.standard_normal(interp.window_frames) * 0.3).astype(np.float32)
    expected = interp.grid(window)
    lo = interp.history - (taps // 2 - 1)
    w = window[lo : lo + 4112 + taps - 1]
    rows = np.ascontiguousarray(phases.T[1:], dtype=np.float32)
    got = native_tp.tp_grid(np.ascontiguousarray(w), 4112, rows, factor)
    assert_allclose(got, expected, rtol=0, atol=1e-5)
    direct = oversample(w.astype(np.float64), phases)[(taps // 2 - 1) * factor :][: got.size]
    assert_allclose(got, direct, rtol=0, atol=1e-5)
    for shift in range(1, 8):  # the same bits wherever the buffer starts
        assert_array_equal(native_tp.tp_grid(_aligned_copy(w, shift), 4112, rows, factor), got)


def _tp_result(x: np.ndarray, rate: int, block: int, **kw) -> dict:
    info = StreamInfo("x.wav", "WAV", "FLOAT", rate, x.shape[1], x.shape[0])
    m = TruePeakMeter(info, default_layout(x.shape[1]), MeasureOptions(**kw))
    for i in range(0, x.shape[0], block):
        m.feed(Block(x=x[i : i + block], raw=None, start=i))
    return m.result().to_dict()


@needs_kernels
@pytest.mark.parametrize("rate,channels", [(48_000, 2), (44_100, 1), (96_000, 6), (192_000, 2)])
def test_truepeak_meter_gives_the_same_results_on_both_paths(rate, channels):
    # Compiled block routine (dc_tp_chunks, dc_tp_grid) against the numpy twin: equal up
    # to float32 summation order (1e-5 dB); over counts and times equal (no grid value
    # lies within rounding of the ceiling in this signal).
    _, x = _programme(1.5 if channels > 2 else 3.0, channels, rate, seed=rate + channels)
    x = x * 2.5  # peaks above the -1 dBTP ceiling: overs on both paths
    for block in (4_800, 1_000) if channels > 2 else (4_800, 1_000, 30_000):
        compiled = _tp_result(x, rate, block)
        with native.disabled():
            plain = _tp_result(x, rate, block)
        assert compiled["true_peak_overs"] == plain["true_peak_overs"] > 0
        assert compiled["true_peak_over_times_s"] == plain["true_peak_over_times_s"]
        assert_allclose(
            compiled["true_peak_channel_dbtp"], plain["true_peak_channel_dbtp"], rtol=0, atol=1e-5
        )
        assert_allclose(compiled["true_peak_time_s"], plain["true_peak_time_s"], rtol=0, atol=1e-4)


@needs_kernels
def test_tp_chunks_same_bits_at_any_alignment():
    phases = design_phases(4)
    rows = np.ascontiguousarray(phases.T[1:], dtype=np.float32)
    rng = np.random.default_rng(3)
    frames = 3 * 4096 + 4176
    x = (rng.standard_normal((2, frames)) * 0.5).astype(np.float32)
    bound = np.array([3.1, 1.0, 1.6, 1e-4])

    def run(buf: np.ndarray):
        return native_tp.tp_chunks(
            buf, 4096, 4, 4176, 48, 4096, rows, 4, bound, 1.007, 1.08, 0.891,
            np.zeros(2), np.zeros(2, np.uint8), 10,
        )  # fmt: skip

    first = run(x)
    assert first[0] == 8 and first[2] > 0  # every chunk computed; overs found
    for shift in range(1, 8):
        padded = np.empty((2, frames + 16), dtype=np.float32)
        padded[:, shift : shift + frames] = x
        again = run(padded[:, shift : shift + frames])
        assert again[0] == first[0] and again[2] == first[2] and again[3] == first[3]
        assert_array_equal(again[1], first[1])


def _refine_both(m: TruePeakMeter, win, j: int, last_frame, best: float):
    """One chunk-channel refined by the numpy twin (_refine) and the compiled routine."""
    factor = m.factor
    y = m.interp.grid(win)
    a = np.abs(y)
    lo = ROW_POSITIONS * factor
    hi = lo + CHUNK_FRAMES * factor
    if last_frame is not None:
        hi = lo + (last_frame - j * CHUNK_FRAMES) * factor + 1
    base = (j * CHUNK_FRAMES - ROW_POSITIONS) * factor
    masks = m._edge_masks(base, lo, hi, last_frame)
    centres = a[lo:hi] if masks is None else a[lo:hi] * masks[0]
    top = float(centres.max())
    states = []
    for compiled in (False, True):
        st = _State(np.array([best * top]), np.array([-1]), np.array([0.1]), np.zeros(1, bool))
        if compiled:
            m._refine_native(st, 0, win, y, lo, hi, top, base, last_frame)
        else:
            m._refine(st, 0, win, y, a, centres, lo, top, base, masks, last_frame)
        states.append(st)
    return states


@needs_kernels
@pytest.mark.parametrize("factor,rate", [(4, 48_000), (2, 96_000), (1, 192_000)])
def test_tp_refine_matches_its_numpy_twin(factor, rate):
    # numpy twin: TruePeakMeter._refine (its fine sums through einsum); the compiled routine
    # (dc_tp_refine) adds the 64 float64 products of each fine point in tap order, so the
    # values agree to rounding (1e-12 on readings below 2) and the positions are the same.
    info = StreamInfo("x.wav", "WAV", "FLOAT", rate, 1, 10 * CHUNK_FRAMES)
    m = TruePeakMeter(info, default_layout(1), MeasureOptions())
    rng = np.random.default_rng(factor)
    cases = [(0, None, 0.0), (3, None, 0.0), (3, None, 0.95), (5, 5 * CHUNK_FRAMES + 3000, 0.5)]
    for j, last_frame, best in cases:  # file start, inside, a running maximum, file end
        win = (rng.standard_normal(m.interp.window_frames) * 0.3).astype(np.float32)
        plain, compiled = _refine_both(m, win, j, last_frame, best)
        assert compiled.best_index[0] == plain.best_index[0] >= 0  # the chunk raised the maximum
        assert_allclose(compiled.best, plain.best, rtol=0, atol=1e-12)
        assert_allclose(compiled.best_inner, plain.best_inner, rtol=0, atol=1e-12)


def test_tp_wrappers_refuse_wrong_buffers():
    rows = np.zeros((3, 64), dtype=np.float32)
    with pytest.raises(ValueError, match="expected 63"):
        native_tp.tp_grid(np.zeros(10, np.float32), 0, rows, 4)  # window of the wrong length
    with pytest.raises(ValueError, match="factor - 1"):
        native_tp.tp_grid(np.zeros(63, np.float32), 0, rows, 2)
    with pytest.raises(ValueError, match="inside the buffers"):  # centres past the grid
        native_tp.tp_refine(
            np.zeros(4176, np.float32), np.zeros(100, np.float32), 32, 200, 4, 0, (0, 10),
            np.zeros((32, 64)), 40, 4, 1.0, 1.0, 1.0, 1.1, 1e6, (0.0, 1.0),
            np.zeros(2), np.zeros(1, np.int64),
        )  # fmt: skip
    with pytest.raises(ValueError, match="inside the buffer"):
        native_tp.tp_chunks(
            np.zeros((2, 100), np.float32), 4096, 1, 4176, 48, 4096, rows, 4,
            np.zeros(4), 1.0, 1.08, 1.0, np.zeros(2), np.zeros(2, np.uint8), 10,
        )  # fmt: skip
