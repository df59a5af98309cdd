"""Property tests (hypothesis) of the measurement engine, through measure() on float64 WAVs.

Properties and where they come from:
- Gain: BS.1770 loudness is -0.691 + 10 log10 of a weighted sum of mean squares, so scaling
  every sample by a = 10^(g/20) scales every block power by a^2: every block loudness, both
  gates and the gated mean move by exactly g LU (as long as no block crosses the -70 LUFS
  absolute gate: the signals here stay far above it). Loudness range is a difference of
  percentiles (EBU Tech 3342): unchanged. Sample and true peak (BS.1770 Annex 2:
  oversample, interpolate, absolute value; a linear operation) move by g dB.
- Channel swap: L and R both weigh 1.0 (BS.1770 Table 3), the sum over channels does not
  depend on their order, and peaks are maxima over channels.
- Appending digital silence: a 400 ms block of digital silence has -inf loudness and falls
  below the -70 LUFS absolute gate (BS.1770 gating), so it never counts. The property
  holds exactly once the programme already ends in at least 400 ms of silence: then every
  block the appended silence adds lies wholly in silence. (Right after sound, appending
  silence adds blocks that straddle the end, which do count; not tested as an identity.)
- True peak >= sample peak: the oversampled grid includes the input samples (phase 0 of
  the interpolator is the sample itself, checker/meters/truepeak.py), so its maximum can
  only be higher; tolerance 1e-5 dB for the documented float32 conversion (about 1e-6 dB).
- Block split: the meter protocol (checker/meters/base.py) requires results independent
  of how the signal is split: exact for peaks and counts, ~1e-9 for sums of power.
"""

from __future__ import annotations

import importlib
import math
from pathlib import Path
from unittest import mock

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from signals import write

from checker.io.audio import Block, StreamInfo
from checker.io.layout import default_layout
from checker.meters.base import MeasureOptions

# checker/__init__.py exports the function measure, which shadows the module attribute.
measure_module = importlib.import_module("checker.analysis.onepass")
measure = measure_module.measure

RATE_HZ = 48_000
FAST = settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@pytest.fixture(scope="module")
def workdir(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("properties")


def noise_programme(
    seed: int, seconds: float, channels: int = 2, rate: int = RATE_HZ
) -> np.ndarray:
    """Seeded noise, partly correlated between channels, with a stepped envelope of
    +/-6 dB per 0.5 s, about -26 dBFS RMS: every 400 ms block lies far above -70 LUFS."""
    rng = np.random.default_rng(seed)
    n = int(round(seconds * rate))
    common = rng.standard_normal(n)
    x = 0.6 * common[:, None] + 0.8 * rng.standard_normal((n, channels))
    steps = rng.uniform(-6.0, 6.0, size=n // (rate // 2) + 1)
    env = 10.0 ** (np.repeat(steps, rate // 2)[:n] / 20.0)
    x *= env[:, None]
    return x * (0.05 / np.sqrt(np.mean(x**2)))


def measured(path: Path, x: np.ndarray, rate: int = RATE_HZ, **options):
    write(path, x, rate=rate, subtype="DOUBLE")
    return measure(str(path), MeasureOptions(**options))


LOUDNESS_KEYS = ("integrated_lufs", "max_momentary_lufs", "max_short_term_lufs")
PEAK_KEYS = ("sample_peak_dbfs", "true_peak_dbtp")


@FAST
@given(seed=st.integers(0, 2**16), gain_db=st.floats(-24.0, 12.0))
def test_gain_shifts_loudness_and_peaks(workdir, seed, gain_db):
    x = noise_programme(seed, 3.4)
    a = measured(workdir / "a.wav", x)
    b = measured(workdir / "b.wav", x * 10.0 ** (gain_db / 20.0))
    for key in LOUDNESS_KEYS:
        # BS.1770: block powers scale by a^2 -> loudness moves by exactly g (float rounding).
        assert_allclose(b.values[key], a.values[key] + gain_db, rtol=0, atol=1e-7, err_msg=key)
    # EBU Tech 3342: LRA is a difference of two percentiles -> unchanged.
    assert a.loudness_range_lu is not None
    assert_allclose(b.loudness_range_lu, a.loudness_range_lu, rtol=0, atol=1e-7)
    # Sample peak: 20 log10(a |x|max) = g + 20 log10 |x|max, float64 throughout.
    assert_allclose(b.sample_peak_dbfs, a.sample_peak_dbfs + gain_db, rtol=0, atol=1e-9)
    # True peak: linear interpolation in float32 (truepeak.py: about 1e-6 dB).
    assert_allclose(b.true_peak_dbtp, a.true_peak_dbtp + gain_db, rtol=0, atol=1e-4)
    assert_allclose(
        b.true_peak_channel_dbtp,
        np.add(a.true_peak_channel_dbtp, gain_db),
        rtol=0,
        atol=1e-4,
    )


@FAST
@given(seed=st.integers(0, 2**16), right_db=st.floats(-12.0, 0.0))
def test_swapping_stereo_channels_changes_nothing(workdir, seed, right_db):
    x = noise_programme(seed, 3.4)
    x[:, 1] *= 10.0 ** (right_db / 20.0)  # unequal channels, so a swap is a real change
    a = measured(workdir / "lr.wav", x)
    b = measured(workdir / "rl.wav", np.ascontiguousarray(x[:, ::-1]))
    for key in (*LOUDNESS_KEYS, "loudness_range_lu", *PEAK_KEYS):
        assert_allclose(b.values[key], a.values[key], rtol=0, atol=1e-9, err_msg=key)
    for key in ("sample_peak_channel_dbfs", "true_peak_channel_dbtp"):
        assert b.values[key] == a.values[key][::-1], key


@FAST
@given(
    seed=st.integers(0, 2**16),
    sound_s=st.floats(0.5, 2.5),
    extra_frames=st.integers(0, 2 * RATE_HZ),
)
def test_appending_digital_silence_after_400_ms_of_silence_changes_nothing(
    workdir, seed, sound_s, extra_frames
):
    sound = noise_programme(seed, sound_s)
    guard = np.zeros((int(0.4 * RATE_HZ), 2))  # one full BS.1770 block of silence
    a = measured(workdir / "short.wav", np.concatenate([sound, guard]))
    b = measured(workdir / "long.wav", np.concatenate([sound, guard, np.zeros((extra_frames, 2))]))
    assert a.integrated_lufs is not None
    for key in ("integrated_lufs", "max_momentary_lufs", *PEAK_KEYS):
        assert_allclose(b.values[key], a.values[key], rtol=0, atol=1e-9, err_msg=key)


def _meter_peaks(x: np.ndarray, rate: int) -> tuple[list[float], list[float]]:
    """(sample peaks, true peaks) per channel from the levels and true-peak meters."""
    from checker.meters.levels import LevelsMeter
    from checker.meters.truepeak import TruePeakMeter

    channels = x.shape[1]
    info = StreamInfo("mem.wav", "WAV", "DOUBLE", rate, channels, x.shape[0])
    layout, options = default_layout(channels), MeasureOptions()
    levels, peaks = LevelsMeter(info, layout, options), TruePeakMeter(info, layout, options)
    for start in range(0, x.shape[0], 10_000):
        block = Block(x=x[start : start + 10_000], raw=None, start=start)
        levels.feed(block)
        peaks.feed(block)
    lv, tp = levels.result().to_dict(), peaks.result().to_dict()
    return lv["sample_peak_channel_dbfs"], tp["true_peak_channel_dbtp"]


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**16),
    rate=st.sampled_from([44_100, 48_000, 96_000, 192_000]),
    channels=st.integers(1, 3),
    kind=st.sampled_from(["noise", "tones", "square"]),
    frames=st.integers(1, 6_000),
)
def test_true_peak_is_never_below_sample_peak(seed, rate, channels, kind, frames):
    rng = np.random.default_rng(seed)
    if kind == "noise":
        x = rng.uniform(-1.0, 1.0, (frames, channels))
    elif kind == "tones":  # near-Nyquist tones at random phases: large inter-sample peaks
        t = np.arange(frames)[:, None] / rate
        f = rng.uniform(0.2, 0.49, channels) * rate
        x = 0.9 * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi, channels))
    else:
        x = np.sign(rng.standard_normal((frames, channels))) * rng.uniform(0.1, 1.0)
    sample, true = _meter_peaks(x, rate)
    for s, t in zip(sample, true, strict=True):
        assert t >= s - 1e-5, (s, t)
    # And the meter's sample peak is the plain numpy one (20 log10 max |x|).
    assert_allclose(sample, 20 * np.log10(np.abs(x).max(axis=0)), rtol=0, atol=1e-9)


def _split_reader(cuts: list[int]):
    """A read_blocks that yields the file in blocks ending at ``cuts`` (any sizes, empty
    blocks included), through one reused buffer as the real reader does."""
    real = measure_module.read_blocks

    def read_blocks(path, block_frames, **kwargs):  # kwargs: read_ahead, unused here
        info, blocks = real(path, 10**7)
        whole = [(b.x.copy(), None if b.raw is None else b.raw.copy()) for b in blocks]
        x = np.concatenate([w[0] for w in whole]) if whole else np.zeros((0, info.channels))
        raw = None if not whole or whole[0][1] is None else np.concatenate([w[1] for w in whole])
        bounds = [0, *sorted(min(c, len(x)) for c in cuts), len(x)]
        buf_x = np.empty_like(x)
        buf_raw = None if raw is None else np.empty_like(raw)

        def gen():
            for lo, hi in zip(bounds[:-1], bounds[1:], strict=True):
                n = hi - lo
                buf_x[:n] = x[lo:hi]
                r = None
                if raw is not None:
                    buf_raw[:n] = raw[lo:hi]
                    r = buf_raw[:n]
                yield Block(x=buf_x[:n], raw=r, start=lo)
                buf_x[:n] = np.nan  # a meter that kept a view instead of a copy now sees NaN

        return info, gen()

    return read_blocks


def assert_same(a, b, where: str = "") -> None:
    """Equal structure; floats within 1e-9 (sums of power), everything else exact."""
    if isinstance(a, dict):
        assert a.keys() == b.keys(), where
        for k in a:
            assert_same(a[k], b[k], f"{where}.{k}")
    elif isinstance(a, list):
        assert len(a) == len(b), where
        for i, (p, q) in enumerate(zip(a, b, strict=True)):
            assert_same(p, q, f"{where}[{i}]")
    elif isinstance(a, float) and isinstance(b, float) and math.isfinite(a):
        assert_allclose(b, a, rtol=0, atol=1e-9, err_msg=where)
    else:
        assert a == b, where


PEAK_AND_COUNT_KEYS = (
    "sample_peak_dbfs",
    "true_peak_dbtp",
    "sample_peak_channel_dbfs",
    "true_peak_channel_dbtp",
    "true_peak_overs",
    "clipped_runs",
    "frames",
)


@settings(max_examples=10, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**16),
    subtype=st.sampled_from(["DOUBLE", "PCM_24"]),
    cuts=st.lists(st.integers(0, int(3.2 * RATE_HZ)), max_size=10),
)
def test_any_block_split_gives_the_same_measurement(workdir, seed, subtype, cuts):
    x = noise_programme(seed, 3.2)
    path = write(workdir / f"split-{subtype}.wav", x, subtype=subtype)
    whole = measure(str(path), MeasureOptions(block_frames=10**7)).to_dict(timeline=True)
    with mock.patch.object(measure_module, "read_blocks", _split_reader(cuts)):
        split = measure(str(path)).to_dict(timeline=True)
    assert_same(whole, split)
    for key in PEAK_AND_COUNT_KEYS:  # exact, not merely close
        assert split[key] == whole[key], key
