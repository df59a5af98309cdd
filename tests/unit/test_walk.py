"""The fused walk (native.walk_i32) against the separate compiled kernels it replaces.

The walk promises the same bits as dc_deinterleave_i32, dc_channel_stats,
dc_pair_products, dc_frame_scan and dc_kweight_sums run one after the other (each of
those is held against numpy / scipy's sosfilt in test_native.py), so every output is
compared for exact equality here, on codes with digital-zero runs, full-scale codes
and block sizes that cut the 100 ms and 1 ms pieces anywhere.
"""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from numpy.testing import assert_array_equal

from checker.analysis.onepass import measure
from checker.dsp import native
from checker.dsp.kweighting import k_weighting_sos
from checker.io.audio import INT32_SCALE
from checker.meters import blockwalk
from checker.meters.base import MeasureOptions
from checker.meters.blockstats import segment_cuts

needs_kernels = pytest.mark.skipif(
    not native.enabled(), reason=f"compiled kernels not loaded: {native.status()}"
)


def _codes(rng: np.random.Generator, n: int, ch: int) -> np.ndarray:
    """Programme-like int32 codes (24-bit, left-justified) with zero runs and clipped runs."""
    x = rng.normal(0.0, 0.2, (n, ch)).clip(-1.0, 1.0 - 2**-23)
    codes = (np.round(x * 2**23).astype(np.int32)) << 8
    if n > 40:
        codes[n // 3 : n // 3 + 17] = 0  # an all-channel zero run
        codes[: min(5, n // 8)] = 0  # leading zeros
        codes[n // 2 : n // 2 + 9, 0] = 0  # one channel only
        codes[2 * n // 3 : 2 * n // 3 + 4] = (2**23 - 1) << 8
    return np.ascontiguousarray(codes)


def _separate(buf, cuts, first, second, threshold, kweight):
    """The separate kernels, one walk each (the reference for the fused walk)."""
    n, ch = buf.shape
    raw_t = np.empty((ch, n), dtype=np.int32)
    x_t = np.empty((ch, n))
    native.deinterleave_i32(buf, raw_t, x_t, INT32_SCALE)
    stats = native.channel_stats(x_t, raw_t, cuts, raw_scaled=True)
    prod = native.pair_products(x_t, first, second)
    mask = np.zeros(n, dtype=np.uint8)
    scan = native.frame_scan(x_t, threshold, mask)
    kout = None
    if kweight is not None:
        rows, sos, zi, weights, kcuts = kweight
        kout = native.kweight_sums(x_t, rows, sos, zi, weights, kcuts)
    return raw_t, x_t, stats, prod, scan, mask, kout


@needs_kernels
@pytest.mark.parametrize(
    ("channels", "rows"),
    [
        (1, [0]),
        (2, [0, 1]),
        (2, []),
        (3, [0, 1, 2]),
        (6, [0, 1, 2, 4, 5]),
        (6, [0, 1, 2, 3, 4, 5]),
        (8, [0, 1, 2, 4]),
    ],
)
@pytest.mark.parametrize(
    ("n", "start"), [(1, 0), (7, 3), (4800, 0), (12_345, 1_234), (30_001, 4_799)]
)
def test_walk_gives_the_bits_of_the_separate_kernels(channels, rows, n, start):
    rng = np.random.default_rng(n * 31 + channels)
    buf = _codes(rng, n, channels)
    cuts = segment_cuts(start, n, 4800)
    pairs = [(i, j) for i in range(channels) for j in range(i + 1, channels)]
    first = np.array([i for i, _ in pairs], dtype=np.int64)
    second = np.array([j for _, j in pairs], dtype=np.int64)
    threshold = 10 ** (-60 / 20)
    sos = np.ascontiguousarray(k_weighting_sos(48_000))
    r = np.array(rows, dtype=np.int64)
    weights = rng.uniform(0.5, 1.5, r.size)
    zi0 = rng.normal(0.0, 1e-3, (r.size, 2, 2))  # a state carried from an earlier block
    # 1 ms pieces: cuts at every 48th frame from an offset, with n itself as the last
    kcuts = np.arange(1 + start % 48, n + 1, 48, dtype=np.int64)
    want_zi, got_zi = zi0.copy(), zi0.copy()
    want = _separate(buf, cuts, first, second, threshold, (r, sos, want_zi, weights, kcuts))
    raw_t = np.empty((channels, n), dtype=np.int32)
    x_t = np.empty((channels, n))
    mask = np.empty(n, dtype=np.uint8)
    stats, prod, scan, kout = native.walk_i32(
        buf, raw_t, x_t, INT32_SCALE, cuts, first, second, threshold, mask,
        (r, sos, got_zi, weights, kcuts),
    )  # fmt: skip
    assert_array_equal(raw_t, want[0])
    assert_array_equal(x_t, want[1])
    for got, expected in zip(stats, want[2], strict=True):
        assert_array_equal(got, expected)  # max, min, sums, squares, zeros, int sums, OR
    assert_array_equal(prod, want[3])
    assert scan == want[4]
    if scan[0]:  # the separate scan writes its mask only when some frame is zero
        assert_array_equal(mask, want[5])
    else:
        assert not mask.any()
    assert_array_equal(kout, want[6])
    assert_array_equal(got_zi, want_zi)


@needs_kernels
def test_walk_without_kweighting_leaves_it_out():
    rng = np.random.default_rng(5)
    buf = _codes(rng, 1000, 2)
    none = np.empty(0, dtype=np.int64)
    stats, prod, scan, kout = native.walk_i32(
        buf, np.empty((2, 1000), dtype=np.int32), np.empty((2, 1000)), INT32_SCALE,
        segment_cuts(0, 1000, 480), none, none, 0.001, np.empty(1000, dtype=np.uint8), None,
    )  # fmt: skip
    assert kout is None and prod.size == 0
    assert stats[5].tolist() == buf.sum(axis=0, dtype=np.int64).tolist()  # exact code sums


@needs_kernels
def test_walk_refuses_wrong_buffers():
    buf = np.zeros((10, 2), dtype=np.int32)
    none = np.empty(0, dtype=np.int64)
    ok = dict(
        raw_t=np.empty((2, 10), dtype=np.int32), x_t=np.empty((2, 10)), scale=INT32_SCALE,
        cuts=np.array([5], dtype=np.int64), first=none, second=none, threshold=0.1,
        zero_mask=np.empty(10, dtype=np.uint8), kweight=None,
    )  # fmt: skip
    native.walk_i32(buf, **ok)
    for key, bad in (
        ("x_t", np.empty((2, 9))),
        ("raw_t", np.empty((2, 10), dtype=np.int64)),
        ("zero_mask", np.empty(9, dtype=np.uint8)),
        ("cuts", np.array([11], dtype=np.int64)),
        ("first", np.array([0], dtype=np.int64)),
    ):
        with pytest.raises(ValueError, match="native"):
            native.walk_i32(buf, **{**ok, key: bad})
    with pytest.raises(ValueError, match="at most"):
        native.walk_i32(
            np.zeros((10, 9), dtype=np.int32),
            **{**ok, "raw_t": np.empty((9, 10), dtype=np.int32), "x_t": np.empty((9, 10))},
        )


def _pcm_file(tmp_path, channels: int, rate: int, seconds: float, subtype: str) -> str:
    """Noise with a dropout, a silent head and a clipped run, stored as exact PCM codes."""
    rng = np.random.default_rng(channels * 7 + rate)
    n = int(seconds * rate)
    x = rng.normal(0.0, 0.1, (n, channels)).clip(-0.9, 0.9)
    x[: rate // 5] = 0.0  # 200 ms of digital silence
    x[n // 2 : n // 2 + rate // 50] = 0.0  # a 20 ms dropout
    x[n // 3 : n // 3 + 5, 0] = 1.0  # a clipped run on one channel
    path = str(tmp_path / f"w{channels}.wav")
    sf.write(path, x, rate, subtype=subtype)
    return path


@needs_kernels
@pytest.mark.parametrize(
    ("channels", "rate", "subtype"),
    [(2, 48_000, "PCM_24"), (6, 48_000, "PCM_24"), (1, 44_100, "PCM_16")],
)
@pytest.mark.parametrize("block_frames", [None, 4_800, 10_007])
@pytest.mark.parametrize("read_ahead", [False, True])
def test_measure_gives_the_same_values_with_and_without_the_walk(
    tmp_path, monkeypatch, channels, rate, subtype, block_frames, read_ahead
):
    path = _pcm_file(tmp_path, channels, rate, 3.0, subtype)
    options = MeasureOptions(block_frames=block_frames)
    fused = measure(path, options, read_ahead=read_ahead)
    monkeypatch.setattr(blockwalk, "ENABLED", False)
    separate = measure(path, options, read_ahead=read_ahead)
    assert fused.values == separate.values  # every value, bit for bit
    assert fused.findings == separate.findings
    assert fused.timeline == separate.timeline
    assert fused.values["dropouts"] == 1  # the 20 ms gap, counted by hand


@needs_kernels
def test_reader_uses_the_walk_for_integer_pcm_only(tmp_path, monkeypatch):
    calls = []
    real = native.walk_i32
    monkeypatch.setattr(native, "walk_i32", lambda *a: calls.append(1) or real(*a))
    measure(_pcm_file(tmp_path, 2, 48_000, 1.0, "PCM_16"))
    assert calls  # integer PCM: the fused walk
    calls.clear()
    float_path = tmp_path / "f.wav"
    sf.write(float_path, np.zeros((48_000, 2)) + 0.1, 48_000, subtype="FLOAT")
    measure(str(float_path))
    assert not calls  # float: the separate kernels (NaN and Inf handling)
