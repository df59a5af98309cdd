"""checker.meters.bandwidth: effective bandwidth, steep cutoffs, "cannot judge" cases.

Expected cutoffs come from scipy's filter designs themselves (the -3 dB point of
the designed response, computed with sosfreqz / freqz), not from the meter.
"""

from __future__ import annotations

import contextlib
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy import signal as sps
from signals import noise, programme, sine, write

from checker.analysis.onepass import measure
from checker.dsp import native
from checker.io.audio import Block, StreamInfo
from checker.io.layout import default_layout
from checker.meters.bandwidth import (
    SPARSE_STRIDE,
    BandwidthMeter,
    fft_frames_for,
    median_filter_nearest,
)
from checker.meters.base import MeasureOptions


def run(x: np.ndarray, rate: int, subtype: str = "FLOAT", sizes=(48_000,)) -> BandwidthMeter:
    """Feed ``x`` in blocks of the given sizes (cycled), as views of a reused buffer."""
    info = StreamInfo("x.wav", "WAV", subtype, rate, x.shape[1], x.shape[0])
    meter = BandwidthMeter(info, default_layout(x.shape[1]), MeasureOptions())
    buf = np.empty((max(sizes), x.shape[1]))
    pos, i = 0, 0
    while pos < x.shape[0]:
        n = min(sizes[i % len(sizes)], x.shape[0] - pos)
        buf[:n] = x[pos : pos + n]
        meter.feed(Block(buf[:n], None, pos))
        buf[:n] = np.nan  # the reader reuses its buffer: the meter must have copied
        pos += n
        i += 1
    return meter


def minus_3db_hz(freqs: np.ndarray, gain: np.ndarray) -> float:
    """First frequency where the designed response is 3 dB below its passband (DC) gain."""
    db = 20 * np.log10(np.maximum(np.abs(gain), 1e-300))
    return float(freqs[np.nonzero(db <= db[0] - 3.0)[0][0]])


def stop_edge_hz(freqs: np.ndarray, gain: np.ndarray, depth_db: float) -> float:
    """Frequency above which the designed response stays at least ``depth_db`` down."""
    db = 20 * np.log10(np.maximum(np.abs(gain), 1e-300))
    above = np.nonzero(db > db[0] - depth_db)[0]
    return float(freqs[above[-1] + 1])


def lowpassed_noise(rate: int, fc: float, design: str, seconds: float = 1.0) -> tuple:
    """Stereo white noise low-passed by a scipy design.

    Returns (signal, the design's -3 dB frequency, the frequency above which the
    design stays 97 dB down, or None for the FIR whose stopband keeps falling).
    """
    x = noise(seconds, rate, channels=2, seed=11) * 0.1
    if design == "ellip":
        # 12th-order elliptic, 0.1 dB ripple, 100 dB equiripple stopband: a brick wall.
        sos = sps.ellip(12, 0.1, 100, fc, fs=rate, output="sos")
        y = sps.sosfilt(sos, x, axis=0)
        freqs, gain = sps.sosfreqz(sos, worN=2**17, fs=rate)
        return y, minus_3db_hz(freqs, gain), stop_edge_hz(freqs, gain, 97.0)
    # Linear-phase FIR, Kaiser window beta 10 (about 100 dB stopband), 511 taps.
    taps = sps.firwin(511, fc, window=("kaiser", 10.0), fs=rate)
    y = sps.oaconvolve(x, taps[:, None], mode="same", axes=0)
    freqs, gain = sps.freqz(taps, worN=2**17, fs=rate)
    return y, minus_3db_hz(freqs, gain), None


@pytest.mark.parametrize("rate", [44_100, 48_000, 96_000])
@pytest.mark.parametrize("fraction", [0.3, 0.5, 0.7])
@pytest.mark.parametrize("design", ["ellip", "fir"])
def test_lowpassed_noise_cutoff_found(rate, fraction, design):
    fc = fraction * rate / 2
    x, f3, f_stop = lowpassed_noise(rate, fc, design)
    r = run(x, rate).result()
    # Steep cutoff within 3 % of the design's own -3 dB frequency (issue 10 tolerance).
    assert r.steep_cutoff_hz is not None, r.bandwidth_note
    assert_allclose(r.steep_cutoff_hz, f3, rtol=0.03, atol=0)
    # The headline is where the content ends: the steep cutoff itself (issue 16).
    assert r.effective_bandwidth_hz == r.steep_cutoff_hz
    assert_allclose(r.bandwidth_fraction, r.effective_bandwidth_hz / (rate / 2), rtol=1e-12)
    # The faint remainder (transition band, stopband residue) is a second figure: above the
    # cutoff and, for the equiripple design, gone beyond its stopband edge (100 dB down).
    # (The FIR's stopband keeps falling, so its faint residue has no fixed end.)
    assert r.faint_content_top_hz >= r.steep_cutoff_hz
    if f_stop is not None:
        assert r.faint_content_top_hz <= 1.03 * f_stop
    assert r.bandwidth_note.startswith("content ends near")


def test_noise_lowpassed_at_10_khz_reads_10_khz():
    # Issue 16: noise low-passed at 10 kHz read effective_bandwidth_hz 13,254 next to
    # steep_cutoff_hz 9,996. Reference: the -3 dB point of the filter design, computed here
    # (scipy.signal.ellip 12th order, 0.1 dB ripple, 100 dB stopband), within 3 %.
    x, f3, _ = lowpassed_noise(48_000, 10_000.0, "ellip")
    r = run(x, 48_000).result()
    assert_allclose(r.effective_bandwidth_hz, f3, rtol=0.03, atol=0)
    assert_allclose(r.bandwidth_fraction, f3 / 24_000, rtol=0.03, atol=0)
    assert r.faint_content_top_hz > r.effective_bandwidth_hz
    # The note leads with the same frequency; the cause only because the cutoff is steep.
    khz = f"{r.effective_bandwidth_hz / 1000:.1f} kHz"
    assert r.bandwidth_note.startswith(f"content ends near {khz} in a 48 kHz file (steep cutoff")
    # 10.1 kHz lies 80-101 % of the 22.05 kHz rate's Nyquist frequency (our rule).
    assert r.bandwidth_note.endswith("probably upsampled from 22.05 kHz")


def test_gradual_edge_gives_no_cause():
    # Noise whose spectrum falls gently (4th-order Butterworth at 3 kHz, 24 dB per octave)
    # into a 16-bit floor: an empty top band but no brick wall, so no cause is named.
    x = noise(2.0, 48_000, channels=1, seed=17) * 0.3
    y = sps.sosfilt(sps.butter(4, 3000, fs=48_000, output="sos"), x, axis=0)
    r = run(np.round(y * 2**15) / 2**15, 48_000, subtype="PCM_16").result()
    assert r.steep_cutoff_hz is None and r.faint_content_top_hz is None
    assert r.bandwidth_fraction < 1.0  # it reaches the 16-bit floor below Nyquist
    assert r.bandwidth_note.startswith("content fades out near")
    assert "upsampled" not in r.bandwidth_note and "lossy" not in r.bandwidth_note


def test_upsampled_from_22050_says_so(tmp_path):
    # Real upsampling: white noise at 22.05 kHz through scipy's resample_poly to 48 kHz,
    # written as 16-bit. Its default anti-imaging filter is firwin(2 * 10 * 320 + 1,
    # 1 / 320, window=("kaiser", 5.0)) at 22050 * 320 Hz (scipy resample_poly docs).
    x = noise(2.0, 22_050, channels=2, seed=12) * 0.1
    y = sps.resample_poly(x, 320, 147, axis=0)
    taps = sps.firwin(2 * 10 * 320 + 1, 1 / 320, window=("kaiser", 5.0))
    freqs = np.linspace(0, 24_000, 24_001)
    _, gain = sps.freqz(taps, worN=freqs, fs=22_050 * 320)
    path = write(tmp_path / "up.wav", y, rate=48_000, subtype="PCM_16")
    m = measure(str(path))
    assert_allclose(m.steep_cutoff_hz, minus_3db_hz(freqs, gain), rtol=0.03, atol=0)
    assert "in a 48 kHz file" in m.bandwidth_note
    assert "probably upsampled from 22.05 kHz" in m.bandwidth_note
    assert m.bandwidth_fraction < 0.7


@pytest.mark.parametrize("rate", [44_100, 48_000, 96_000])
def test_full_band_noise_not_flagged(rate):
    r = run(noise(1.5, rate, channels=2, seed=13) * 0.1, rate).result()
    # White noise fills the band: bandwidth is the Nyquist frequency, no cutoff.
    assert r.effective_bandwidth_hz == rate / 2 and r.bandwidth_fraction == 1.0
    assert r.steep_cutoff_hz is None


def music_like(seconds: float, rate: int, seed: int) -> np.ndarray:
    """Sustained harmonic tones plus percussive noise bursts (full-band decays)."""
    rng = np.random.default_rng(seed)
    n = int(seconds * rate)
    t = np.arange(n) / rate
    x = np.zeros(n)
    for f0 in (110.0, 220.0, 277.2, 329.6):
        for h in range(1, 16):
            if f0 * h < rate / 2:
                x += 0.03 / h * np.sin(2 * np.pi * f0 * h * t + h)
    env = np.zeros(n)
    hit = int(0.125 * rate)
    decay = np.exp(-np.arange(hit) / (0.015 * rate))
    for start in range(0, n - hit, int(0.25 * rate)):
        env[start : start + hit] = decay * rng.uniform(0.3, 1.0)
    x = x + 0.3 * env * rng.standard_normal(n)
    return np.stack([x, 0.8 * x + 0.01 * rng.standard_normal(n)], axis=1)


def test_music_like_material_not_flagged():
    r = run(music_like(3.0, 48_000, seed=14), 48_000).result()
    assert r.steep_cutoff_hz is None and r.bandwidth_fraction == 1.0


def test_programme_not_flagged():
    r = run(programme(4.0, 48_000, 2, seed=15), 48_000).result()
    assert r.steep_cutoff_hz is None and r.bandwidth_fraction == 1.0


def test_gentle_lowpass_is_not_a_steep_cutoff():
    # A 4th-order Butterworth (24 dB per octave) is a natural-looking roll-off.
    x = noise(1.5, 48_000, channels=2, seed=16) * 0.1
    y = sps.sosfilt(sps.butter(4, 6000, fs=48_000, output="sos"), x, axis=0)
    assert run(y, 48_000).result().steep_cutoff_hz is None


@pytest.mark.parametrize("subtype", ["FLOAT", "PCM_16"])
def test_pure_tone_cannot_judge(tmp_path, subtype):
    x = sine(997.0, -6.0, 2.0, channels=2)
    m = measure(str(write(tmp_path / "tone.wav", x, subtype=subtype)))
    assert m.bandwidth_note.startswith("cannot judge: no broadband content")
    assert m.effective_bandwidth_hz is None and m.bandwidth_fraction is None
    assert m.steep_cutoff_hz is None


def test_silence_and_short_cannot_judge():
    r = run(np.zeros((48_000, 2)), 48_000).result()
    assert r.bandwidth_note == "cannot judge: digital silence" and r.effective_bandwidth_hz is None
    # 16-bit-level dither alone (about -96 dBFS) is near silence, not content.
    quiet = noise(1.0, 48_000, channels=1, seed=17) * 2.0**-15
    assert run(quiet, 48_000).result().bandwidth_note.startswith("cannot judge: near silence")
    short = run(noise(0.2, 48_000, channels=1, seed=18), 48_000).result()
    assert short.bandwidth_note.startswith("cannot judge: too short")


def test_frame_size_scales_with_rate():
    # 4096 at 48 kHz, nearest power of two at other rates (module docstring).
    assert [
        fft_frames_for(r) for r in (8_000, 44_100, 48_000, 96_000, 192_000)
    ] == [  # 682.7 -> 512
        512,
        4096,
        4096,
        8192,
        16384,
    ]
    assert math.log2(fft_frames_for(22_050)) == 11


# ---------------------------------------------------------------- block-split invariance

INVARIANCE_X, _, _ = lowpassed_noise(48_000, 9_000.0, "ellip", seconds=0.8)


def _same(a: BandwidthMeter, b: BandwidthMeter) -> None:
    # Sums of power: equal to ~1e-9 relative whatever the split (house rule).
    assert_allclose(a.spectrum(), b.spectrum(), rtol=1e-9, atol=0)
    assert a.frames == b.frames
    assert a.result() == b.result()


@pytest.mark.parametrize("sizes", [(1_000_000,), (4096,), (2048,), (777, 5000), (48_000,)])
def test_block_size_invariance(sizes):
    _same(
        run(INVARIANCE_X, 48_000, sizes=(INVARIANCE_X.shape[0],)),
        run(INVARIANCE_X, 48_000, sizes=sizes),
    )


def test_single_frame_blocks_match():
    x = INVARIANCE_X[:20_000]
    _same(run(x, 48_000, sizes=(20_000,)), run(x, 48_000, sizes=(1, 2, 3, 1000)))


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.integers(1, 30_000), min_size=1, max_size=12))
def test_hypothesis_splits(sizes):
    whole = run(INVARIANCE_X, 48_000, sizes=(INVARIANCE_X.shape[0],))
    _same(whole, run(INVARIANCE_X, 48_000, sizes=tuple(sizes)))


# ---------------------------------------------------------------- sampled frames past DENSE_S


def _run_dense(x: np.ndarray, rate: int, dense_s: float, sizes=(48_000,)) -> BandwidthMeter:
    info = StreamInfo("x.wav", "WAV", "FLOAT", rate, x.shape[1], x.shape[0])
    meter = BandwidthMeter(info, default_layout(x.shape[1]), MeasureOptions(), dense_s=dense_s)
    pos, i = 0, 0
    while pos < x.shape[0]:
        n = min(sizes[i % len(sizes)], x.shape[0] - pos)
        meter.feed(Block(x[pos : pos + n].copy(), None, pos))
        pos += n
        i += 1
    return meter


def test_sampled_frames_keep_the_white_noise_level_and_split_invariance():
    # Past dense_s only every SPARSE_STRIDE-th frame is analysed, counted SPARSE_STRIDE
    # times. White noise of variance s^2 reads s^2 per bin (Parseval; the meter's
    # scale, see the module docstring), sampled or not: 6 s, dense for 1 s only.
    rate = 48_000
    x = noise(6.0, rate, channels=2, seed=5) * 0.1
    s2 = float(np.mean(x**2))
    sampled = _run_dense(x, rate, dense_s=1.0)
    full = _run_dense(x, rate, dense_s=math.inf)
    assert sampled.frames == full.frames  # frames passed, analysed or represented
    assert full.weight == full.frames
    # Each sampled frame stands for SPARSE_STRIDE frames; the last may overhang the end.
    assert 0 <= sampled.weight - full.frames < SPARSE_STRIDE
    band = slice(10, -10)
    for m in (sampled, full):
        level_db = 10 * np.log10(np.mean(m.spectrum()[band]) / s2)
        assert_allclose(level_db, 0.0, rtol=0, atol=0.1)  # Parseval: equal, up to noise
    ratio_db = 10 * np.log10(sampled.spectrum()[band] / full.spectrum()[band])
    assert np.median(np.abs(ratio_db)) < 1.0  # 1/4 of the late frames: a few % per bin
    assert np.max(np.abs(ratio_db)) > 0.0  # the sampled path really analysed fewer frames
    other = _run_dense(x, rate, dense_s=1.0, sizes=(1_000, 33_333, 7))
    assert_allclose(other.spectrum(), sampled.spectrum(), rtol=1e-9, atol=0)
    assert other.result() == sampled.result()


@pytest.mark.parametrize("compiled", [True, False], ids=["compiled", "numpy"])
@pytest.mark.parametrize("size", [1, 3, 5, 17, 33, 65])
@pytest.mark.parametrize("n", [1, 2, 16, 2049])
def test_running_median_matches_scipy(size, n, compiled):
    # Reference: scipy.ndimage.median_filter(x, size, mode="nearest") (1-D), which the
    # meter's own running median stands in for; exact, as every path picks one of the
    # values. Both paths: the compiled one (kernels.c, dc_running_median) and numpy's.
    from scipy import ndimage

    if compiled and not native.enabled():
        pytest.skip(f"compiled kernels not loaded: {native.status()}")
    rng = np.random.default_rng(size * 10_000 + n)
    for x in (
        rng.random(n) ** 4,
        np.where(rng.random(n) < 0.4, 0.5, rng.random(n)),  # many ties
        np.sort(rng.random(n))[::-1].copy(),  # falling: every step moves the new point
    ):
        expected = ndimage.median_filter(x, size=size, mode="nearest")
        with contextlib.nullcontext() if compiled else native.disabled():
            got = median_filter_nearest(x, size)
        assert_allclose(got, expected, rtol=0, atol=0)
    with pytest.raises(ValueError, match="odd"):
        median_filter_nearest(x, 4)
