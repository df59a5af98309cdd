"""checker.meters.levels: sample peak, DC, clipping, effective bits, RMS, noise floor, NaN."""

from __future__ import annotations

import math

import numpy as np
import soundfile as sf
from hypothesis import given, settings
from hypothesis import strategies as st
from meterkit import info_for, no_nan, run_meter, to_codes
from numpy.testing import assert_allclose
from signals import write

from checker.analysis.onepass import measure
from checker.io.audio import Block, read_blocks
from checker.io.layout import default_layout
from checker.meters.base import MeasureOptions
from checker.meters.levels import LevelsMeter, first_peak
from checker.model.units import quantization_floor_dbfs

RATE = 8_000


run = run_meter


def assert_same(ref: dict, got: dict, exact: set[str]) -> None:
    assert ref.keys() == got.keys()
    for key in ref:
        a, b = ref[key], got[key]
        if key in exact or not isinstance(a, (float, list)) or a is None:
            assert a == b, key
        else:
            fa = np.array(a, dtype=float)
            fb = np.array(b, dtype=float)
            assert_allclose(fb, fa, rtol=0, atol=1e-9, err_msg=key)


def clipped_sine(seconds: float, rate: int = 48_000) -> np.ndarray:
    """1 kHz sine of amplitude 2 with a half-sample phase offset, so no sample sits on +-1.

    Sample n has phase pi (2n + 1) / 48; |2 sin| > 1 exactly for phases in (30, 150) deg
    and (210, 330) deg (elementary trigonometry): n = 4..19 and 28..43 of every
    48-sample cycle, i.e. two runs of 16 samples starting at n = 4 and 28 (mod 48).
    """
    n = np.arange(int(seconds * rate))
    return (2.0 * np.sin(np.pi * (2 * n + 1) / 48.0))[:, None]


# ------------------------------------------------------------------ effective bits


def test_effective_bits_of_16_bit_audio_in_pcm24_and_float(tmp_path):
    rng = np.random.default_rng(1)
    k = rng.integers(-32768, 32768, (24_000, 2))  # full-range 16-bit codes
    k[0] = [-32768, 32767]
    for subtype in ("PCM_24", "FLOAT", "PCM_16"):
        if subtype == "FLOAT":
            data = k / 32768  # exact in float32
        else:  # int32 codes k << 16: libsndfile keeps the top 16 or 24 bits exactly
            data = (k << 16).astype(np.int32)
        path = write(tmp_path / f"a_{subtype}.wav", data, subtype=subtype)
        info, blocks = read_blocks(str(path), 5_000)
        meter = LevelsMeter(info, default_layout(2), MeasureOptions())
        for block in blocks:
            meter.feed(block)
        r = meter.result()
        # By construction every sample is a 16-bit code k; in PCM_24 it is stored as
        # k << 8, leaving the low 8 bits zero (the example), in FLOAT as k / 32768.
        assert r.effective_bits == 16, subtype
        assert r.effective_bits_channel == [16, 16], subtype


def test_dithered_24_bit_audio_uses_24_bits():
    rng = np.random.default_rng(2)
    x = 0.1 * np.sin(2 * np.pi * 440 * np.arange(8_000) / RATE)[:, None]
    # TPDF dither of +-1 LSB at 24 bits before rounding: the low bit is exercised.
    lsb = 2.0**-23
    dither = (rng.uniform(-0.5, 0.5, x.shape) + rng.uniform(-0.5, 0.5, x.shape)) * lsb
    raw = to_codes(x + dither, 24)
    r = run(LevelsMeter, info_for("PCM_24", 1), raw * 2.0**-31, raw)
    assert r.effective_bits == 24  # the lowest bit of a 24-bit word is in use


def test_float_grid_24_bits_and_off_grid():
    rng = np.random.default_rng(3)
    x24 = np.round(rng.uniform(-0.9, 0.9, (4_000, 1)) * 2**23) / 2**23
    assert run(LevelsMeter, info_for("FLOAT", 1), x24).effective_bits == 24
    x_any = rng.uniform(-0.9, 0.9, (4_000, 1)).astype(np.float32).astype(np.float64)
    r = run(LevelsMeter, info_for("FLOAT", 1), x_any)
    assert r.effective_bits == 32  # not on a 24-bit grid: the format's 32 bits
    assert r.footroom_db is None and r.footroom_note


def test_lossy_has_no_bit_depth():
    x = 0.1 * np.ones((1_000, 1))
    r = run(LevelsMeter, info_for("VORBIS", 1), x)
    assert r.effective_bits is None and "lossy" in r.effective_bits_note


# ------------------------------------------------------------------ peak, DC, RMS


def test_dc_offset_one_percent():
    t = np.arange(RATE * 2) / RATE
    x = (0.5 * np.sin(2 * np.pi * 100 * t) + 0.01)[:, None] * np.array([[1.0, -0.5]])
    raw = to_codes(x, 24)
    r = run(LevelsMeter, info_for("PCM_24", 2), raw * 2.0**-31, raw)
    # 0.01 of full scale = 1 % = 20 log10(0.01) = -40 dBFS (definition of dB);
    # 200 whole cycles of the sine average to 0; 24-bit rounding adds < 1e-6.
    assert_allclose(r.dc_offset_percent, 1.0, rtol=0, atol=1e-4)
    assert_allclose(r.dc_offset_dbfs, -40.0, rtol=0, atol=1e-3)
    assert_allclose(r.dc_offset_channel_percent, [1.0, -0.5], rtol=0, atol=1e-4)


def test_full_scale_sine_rms_and_peak():
    t = np.arange(48_000) / 48_000
    x = np.sin(2 * np.pi * 1000 * t + np.pi / 2)[:, None]  # starts at its +1.0 peak
    r = run(LevelsMeter, info_for("DOUBLE", 1, 48_000), x)
    # Handbook: the RMS of a sine is A / sqrt(2): 20 log10(1 / sqrt(2)) = -3.0103 dB re 1.0.
    assert_allclose(r.rms_dbfs, -3.0103, rtol=0, atol=1e-4)
    assert r.sample_peak_dbfs == 0.0 and r.headroom_db == 0.0
    assert r.sample_peak_time_s == 0.0
    assert r.clipped_runs == 0  # single samples at 1.0, never 3 in a row


def test_sample_peak_matches_numpy_and_time():
    rng = np.random.default_rng(4)
    x = 0.1 * rng.standard_normal((9_000, 3))
    x[5_000, 2] = -0.75
    r = run(LevelsMeter, info_for("DOUBLE", 3), x, sizes=(777,))
    # Reference: plain numpy max |x| per channel.
    assert_allclose(
        r.sample_peak_channel_dbfs, 20 * np.log10(np.abs(x).max(axis=0)), rtol=0, atol=1e-12
    )
    assert_allclose(r.sample_peak_dbfs, 20 * np.log10(0.75), rtol=0, atol=1e-12)
    assert r.sample_peak_time_s == 5_000 / RATE


# ------------------------------------------------------------------ clipping


def test_clipping_integer_pcm16_runs_and_positions():
    x = np.clip(clipped_sine(0.1), -1.0, 1.0)
    raw = to_codes(x, 16)  # +1.0 -> 32767 << 16, -1.0 -> -32768 << 16 (format full scale)
    info = info_for("PCM_16", 1, 48_000)
    r = run(LevelsMeter, info, raw * 2.0**-31, raw, sizes=(10,))  # runs cross blocks
    # clipped_sine docstring: 2 runs of 16 per 48-sample cycle, 100 cycles in 0.1 s.
    assert r.clipped_runs == 200 and r.clipped_runs_channel == [200]
    expected = np.sort(np.concatenate([np.arange(5) * 48 + 4, np.arange(5) * 48 + 28]))
    assert_allclose(r.clipped_run_times_s, expected / 48_000, rtol=0, atol=1e-12)
    # Runs are 16 long: the parameter decides (common practice default 3).
    long16 = run(
        LevelsMeter, info, raw * 2.0**-31, raw, options=MeasureOptions(clip_run_min_samples=16)
    )
    long17 = run(
        LevelsMeter, info, raw * 2.0**-31, raw, options=MeasureOptions(clip_run_min_samples=17)
    )
    assert long16.clipped_runs == 200 and long17.clipped_runs == 0


def test_clipping_float_and_overs():
    x = clipped_sine(0.1)
    r = run(LevelsMeter, info_for("FLOAT", 1, 48_000), np.clip(x, -1.0, 1.0), sizes=(7,))
    assert r.clipped_runs == 200  # clipped_sine docstring
    assert r.over_full_scale_samples == 0
    r = run(LevelsMeter, info_for("FLOAT", 1, 48_000), x)
    # Unclipped float: 32 samples per cycle above 1.0 (clipped_sine docstring), 100 cycles.
    assert r.over_full_scale_samples == 3_200
    assert r.clipped_runs == 200  # |x| >= 1.0 counts as clipped for float
    assert_allclose(r.sample_peak_dbfs, 20 * np.log10(np.abs(x).max()), rtol=0, atol=1e-12)


def test_clipping_run_at_end_of_file_counts():
    x = np.zeros((100, 1))
    x[-5:] = 1.0
    x[10:12] = -1.0  # only 2 samples: not a run
    r = run(LevelsMeter, info_for("FLOAT", 1), x, sizes=(3,))
    assert r.clipped_runs == 1 and r.clipped_run_times_s == [95 / RATE]


# ------------------------------------------------------------------ noise floor


def bursts_with_noise(rate: int, seconds: int, noise_dbfs_rms: float, seed: int) -> np.ndarray:
    """1 s tone bursts at -20 dBFS alternating with 1 s pauses, white noise throughout."""
    rng = np.random.default_rng(seed)
    n = rate * seconds
    t = np.arange(n) / rate
    gate = (np.floor(t) % 2 == 0).astype(float)
    tone = 0.1 * np.sin(2 * np.pi * 440 * t) * gate
    return (tone + 10 ** (noise_dbfs_rms / 20) * rng.standard_normal(n))[:, None]


def test_noise_floor_and_footroom_24_bit():
    x = bursts_with_noise(48_000, 6, -80.0, seed=5)
    raw = to_codes(x, 24)
    r = run(LevelsMeter, info_for("PCM_24", 1, 48_000), raw * 2.0**-31, raw, sizes=(48_000,))
    # Half of the 400 ms blocks hold only the -80 dBFS RMS noise; the 10th percentile of
    # their levels sits ~0.06 dB low (400 ms of white noise: power spread ~1 %).
    assert_allclose(r.noise_floor_dbfs, -80.0, rtol=0, atol=0.2)
    assert r.effective_bits == 24
    # Handbook rule SNR = 6.02 N + 1.76 dB for a full-scale sine (RMS -3.01 dB re 1.0):
    # 24-bit floor = -149.27 dBFS RMS, so footroom = -80 + 149.27 = 69.27 dB.
    assert_allclose(quantization_floor_dbfs(24), -149.27, rtol=0, atol=0.01)
    assert_allclose(r.footroom_db, 69.27, rtol=0, atol=0.2)


def test_noise_floor_16_bit_footroom():
    x = bursts_with_noise(16_000, 4, -80.0, seed=6)
    raw = to_codes(x, 16)
    r = run(LevelsMeter, info_for("PCM_16", 1, 16_000), raw * 2.0**-31, raw)
    # 16-bit rounding adds its own -101.1 dBFS noise (handbook rule): -80 and -101.1 dBFS
    # add in power to -79.97 dBFS; footroom = -79.97 + 101.1 = 21.1 dB.
    assert_allclose(r.noise_floor_dbfs, -80.0, rtol=0, atol=0.2)
    assert_allclose(r.footroom_db, 21.1, rtol=0, atol=0.2)


def test_digital_zero_file_has_no_nan_and_inf_levels():
    x = np.zeros((RATE, 2))
    r = run(LevelsMeter, info_for("PCM_24", 2), x, np.zeros((RATE, 2), dtype=np.int32))
    assert r.sample_peak_dbfs == -math.inf and r.headroom_db == math.inf
    assert r.rms_dbfs == -math.inf and r.sample_peak_time_s is None
    # Digital silence is -inf (DEVELOPERS.md, silence policy), and said so.
    assert r.noise_floor_dbfs == -math.inf and r.noise_floor_kind == "digital silence"
    assert r.noise_floor_note and r.footroom_db is None and r.footroom_note
    assert r.effective_bits is None and r.effective_bits_channel == [None, None]
    assert r.dc_offset_dbfs == -math.inf and r.dc_offset_percent == 0.0
    assert no_nan(r.to_dict())
    empty = run(LevelsMeter, info_for("FLOAT", 1), np.zeros((0, 1)))
    assert empty.rms_dbfs is None and empty.dc_offset_dbfs is None and no_nan(empty.to_dict())


# ------------------------------------------------------------------ noise floor: what is quiet

LSB16 = 2.0**-15  # one 16-bit step with full scale +-1


def alternating(rate: int, gap: np.ndarray | None = None, cycles: int = 3) -> np.ndarray:
    """``cycles`` x (2 s of a 440 Hz tone at -20 dBFS RMS, 2 s gap); the gap holds ``gap``
    (cycles * 2 s of samples, taken in order) or digital zero."""
    n = 2 * rate
    t = np.arange(n) / rate
    tone = np.sqrt(2) * 0.1 * np.sin(2 * np.pi * 440 * t + 0.3)
    parts = []
    for c in range(cycles):
        parts += [tone, np.zeros(n) if gap is None else gap[c * n : (c + 1) * n]]
    return np.concatenate(parts)[:, None]


def tpdf(rng: np.random.Generator, n: int) -> np.ndarray:
    """TPDF dither in LSB: the sum of two independent uniform variables of +-0.5 LSB."""
    return rng.uniform(-0.5, 0.5, n) + rng.uniform(-0.5, 0.5, n)


def dithered_16_bit(x: np.ndarray, seed: int) -> np.ndarray:
    """x requantized to 16 bits with TPDF dither, as left-justified int32 codes."""
    d = tpdf(np.random.default_rng(seed), x.size).reshape(x.shape)
    k = np.clip(np.round(x / LSB16 + d), -32768, 32767).astype(np.int64)
    return (k << 16).astype(np.int32)


def test_noise_floor_of_dithered_gaps_is_the_dither():
    # Issue 16: programme at -20 dBFS with 16-bit TPDF-dithered silence in between read
    # -21.3 dBFS (the programme). Expected: the dither. Textbook (docs/standards.md#sample-
    # domain): TPDF dither of 2 LSB peak to peak has variance LSB^2/6; requantized with it,
    # silence carries LSB^2/4 (RMS LSB/2 = 2**-16 = -96.33 dBFS); 400 ms blocks scatter by
    # about 0.1 dB and the 10th percentile sits a little low, hence 0.3 dB.
    rate = 16_000
    raw = dithered_16_bit(alternating(rate), seed=11)
    r = run(LevelsMeter, info_for("PCM_16", 1, rate), raw * 2.0**-31, raw, sizes=(4_800,))
    assert r.noise_floor_kind == "dither" and "16-bit TPDF dither" in r.noise_floor_note
    assert_allclose(r.noise_floor_dbfs, 20 * np.log10(LSB16 / 2), rtol=0, atol=0.3)
    assert_allclose(20 * np.log10(LSB16 / 2), -96.33, rtol=0, atol=0.01)  # 6.02 dB per bit
    # Footroom: the quantization floor (LSB/sqrt(12), -101.1 dBFS RMS re 1.0 by the
    # 6.02 N + 1.76 dB rule) lies 10 log10(3) = 4.77 dB below LSB/2 (textbook).
    assert_allclose(r.footroom_db, 10 * np.log10(3), rtol=0, atol=0.3)


def test_noise_floor_of_float_dither_alone():
    # Dither added to a float file without requantizing: LSB/sqrt(6) (textbook) of a 16-bit
    # step = -98.09 dBFS; the file is not on a 16-bit grid, so it is compared with 16- and
    # 24-bit dither.
    rate = 16_000
    x = alternating(rate, tpdf(np.random.default_rng(12), 6 * 2 * rate) * LSB16)
    r = run(LevelsMeter, info_for("FLOAT", 1, rate), x, sizes=(3_000,))
    assert r.noise_floor_kind == "dither"
    assert_allclose(r.noise_floor_dbfs, 20 * np.log10(LSB16 / np.sqrt(6)), rtol=0, atol=0.3)


def test_noise_floor_of_digital_zero_gaps_is_digital_silence():
    # Issue 16: undithered zero gaps read -21.2 dBFS. Now: digital silence, -inf, with a note.
    rate = 16_000
    raw = to_codes(alternating(rate), 16)
    r = run(LevelsMeter, info_for("PCM_16", 1, rate), raw * 2.0**-31, raw)
    assert r.noise_floor_dbfs == -math.inf and r.noise_floor_kind == "digital silence"
    assert "digital zero" in r.noise_floor_note


def test_noise_floor_of_room_tone_gaps_is_the_room_tone():
    # Gaussian room tone at -70 dBFS RMS in the gaps; the reference is the RMS of the
    # generated gap samples (derived), 0.3 dB for the spread of 400 ms blocks.
    rate = 16_000
    rng = np.random.default_rng(13)
    tone = 10 ** (-70 / 20) * rng.standard_normal(6 * 2 * rate)
    x = alternating(rate, tone)
    r = run(LevelsMeter, info_for("FLOAT", 1, rate), x, sizes=(5_000,))
    assert r.noise_floor_kind == "room tone"
    assert_allclose(r.noise_floor_dbfs, 10 * np.log10(np.mean(tone**2)), rtol=0, atol=0.3)
    # Digital-zero padding at both ends is padding, not the floor.
    padded = np.concatenate([np.zeros((rate // 2, 1)), x, np.zeros((rate, 1))])
    p = run(LevelsMeter, info_for("FLOAT", 1, rate), padded, sizes=(5_000,))
    assert p.noise_floor_kind == "room tone"
    assert_allclose(p.noise_floor_dbfs, r.noise_floor_dbfs, rtol=0, atol=0.3)


def test_noise_floor_without_pauses_is_programme():
    # Noise at -20 dBFS RMS, 6 dB slower swings, no pause: the floor is programme.
    rate = 16_000
    rng = np.random.default_rng(14)
    t = np.arange(8 * rate) / rate
    x = (0.1 * (1 + 0.5 * np.sin(2 * np.pi * 0.5 * t)) * rng.standard_normal(t.size))[:, None]
    r = run(LevelsMeter, info_for("FLOAT", 1, rate), x)
    assert r.noise_floor_kind == "programme" and "upper bound" in r.noise_floor_note
    assert -30.0 < r.noise_floor_dbfs < -20.0


def test_noise_floor_kinds_block_size_invariance():
    rate = 16_000
    raw = dithered_16_bit(alternating(rate, cycles=2), seed=15)
    info = info_for("PCM_16", 1, rate)
    ref = run(LevelsMeter, info, raw * 2.0**-31, raw).to_dict()
    assert ref["noise_floor_kind"] == "dither"
    for size in (777, 4_800):
        got = run(LevelsMeter, info, raw * 2.0**-31, raw, sizes=(size,)).to_dict()
        assert_same(ref, got, EXACT | {"noise_floor_kind", "noise_floor_note"})


# ------------------------------------------------------------------ NaN / Inf


def test_nonfinite_samples_counted_and_ignored():
    rng = np.random.default_rng(7)
    x = 0.25 * rng.uniform(-1, 1, (16_000, 2))
    x[9_600:9_612, 0] = np.nan  # 12 NaN from 1.2 s
    x[12_000, 1] = np.inf
    x[12_001, 1] = -np.inf
    r = run(LevelsMeter, info_for("FLOAT", 2), x, sizes=(1_000,))
    assert r.nonfinite_samples == 14
    assert no_nan(r.to_dict())
    clean = np.where(np.isfinite(x), x, 0.0)
    # Reference: plain numpy on the signal with the non-finite samples set to 0.
    assert_allclose(
        r.sample_peak_channel_dbfs, 20 * np.log10(np.abs(clean).max(0)), rtol=0, atol=1e-12
    )
    assert_allclose(r.rms_dbfs, 10 * np.log10((clean**2).mean(0).max()), rtol=0, atol=1e-9)
    assert r.over_full_scale_samples == 0 and r.clipped_runs == 0
    assert r.findings[0].startswith("NaN samples: 12, first at 1.200 s")
    assert r.findings[1].startswith("Inf samples: 2, first at 1.500 s")


# ------------------------------------------------------------------ block-size invariance

EXACT = {
    "sample_peak_dbfs",
    "sample_peak_time_s",
    "sample_peak_channel_dbfs",
    "headroom_db",
    "clipped_run_times_s",
}


def invariance_signal(frames: int, seed: int = 8) -> np.ndarray:
    rng = np.random.default_rng(seed)
    t = np.arange(frames) / RATE
    x = np.stack([1.3 * np.sin(2 * np.pi * 150 * t), 0.3 * np.sin(2 * np.pi * 91 * t)], 1)
    x[: frames * 2 // 5] *= 1e-3  # quiet passage, longer than one 400 ms block
    x += 1e-4 * rng.standard_normal(x.shape) + 0.002
    x[frames // 2 : frames // 2 + 300] = 0.0  # digital zero
    return x


def both_formats(frames: int):
    x = invariance_signal(frames)
    x_float = x.copy()
    x_float[frames // 3, 0] = np.nan
    raw = to_codes(x, 24)
    return [
        (info_for("FLOAT", 2), x_float, None),
        (info_for("PCM_24", 2), raw * 2.0**-31, raw),
    ]


def test_levels_block_size_invariance_fixed_sizes():
    for info, x, raw in both_formats(RATE * 6 // 5):
        ref = run(LevelsMeter, info, x, raw).to_dict()
        assert ref["clipped_runs"] > 0 and ref["noise_floor_dbfs"] is not None
        for size in (7, 4_800, 48_000):
            assert_same(ref, run(LevelsMeter, info, x, raw, sizes=(size,)).to_dict(), EXACT)
    for info, x, raw in both_formats(RATE // 2):  # block size 1 on a shorter file
        ref = run(LevelsMeter, info, x, raw).to_dict()
        assert_same(ref, run(LevelsMeter, info, x, raw, sizes=(1,)).to_dict(), EXACT)


FORMATS = both_formats(RATE * 6 // 5)
REFS = [run(LevelsMeter, info, x, raw).to_dict() for info, x, raw in FORMATS]


@settings(max_examples=25, deadline=None)
@given(
    which=st.integers(0, 1),
    cuts=st.lists(st.integers(0, RATE * 6 // 5), max_size=30),
)
def test_levels_block_split_invariance_hypothesis(which, cuts):
    info, x, raw = FORMATS[which]
    bounds = sorted(cuts) + [x.shape[0]]
    sizes = tuple(np.diff([0, *bounds]).tolist())  # zero-frame blocks included
    meter = LevelsMeter(info, default_layout(2), MeasureOptions())
    start = 0
    for size in sizes:
        stop = start + size
        braw = None if raw is None else raw[start:stop].copy()
        meter.feed(Block(x[start:stop].copy(), braw, start))
        start = stop
    assert_same(REFS[which], meter.result().to_dict(), EXACT)


# ------------------------------------------------------------------ through measure()


def test_measure_on_written_files(tmp_path):
    x = np.clip(clipped_sine(0.5), -1.0, 1.0)
    codes = np.clip(np.round(x * 32768), -32768, 32767).astype(np.int16)
    path = tmp_path / "clip16.wav"
    sf.write(str(path), np.repeat(codes, 2, axis=1), 48_000, subtype="PCM_16")
    m = measure(path, MeasureOptions(block_frames=1_000))
    # clipped_sine docstring: 2 runs per 1 kHz cycle per channel, 500 cycles, 2 channels.
    assert m.clipped_runs == 2_000 and m.clipped_runs_channel == [1_000, 1_000]
    assert m.effective_bits == 16 and m.sample_peak_dbfs == 0.0
    assert m.clipped_run_times_s[:2] == [4 / 48_000, 28 / 48_000]

    y = 0.5 * np.sin(2 * np.pi * 1000 * np.arange(48_000) / 48_000)[:, None]
    y[12_000:12_005] = np.nan
    path = write(tmp_path / "nan.wav", y, subtype="FLOAT")
    m = measure(path)
    assert m.nonfinite_samples == 5
    assert any(f.startswith("NaN samples: 5, first at 0.250 s") for f in m.findings)
    assert no_nan(m.to_dict())
    assert_allclose(m.sample_peak_dbfs, 20 * np.log10(0.5), rtol=0, atol=1e-6)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.sampled_from([-1.0, -0.5, -0.0, 0.0, 0.25, 0.5, 1.0]), min_size=1, max_size=40))
def test_first_peak_is_the_first_largest_magnitude(values):
    # Arithmetic identity: the sample peak's position is np.abs(row).argmax() (the first
    # sample of largest magnitude); first_peak finds it from argmax and argmin without a
    # copy. Few distinct values, so ties between +m and -m and repeated maxima are common.
    row = np.array(values)
    assert first_peak(row) == int(np.abs(row).argmax())
