"""True peak of short transients and band-limited noise near the top of the band.

Reference (computed here, outside the meter): FFT interpolation. Every test signal is
built periodic and band-limited on purpose (its spectrum is set to zero outside the stated
band, bins of one 12288-sample period), so its true band-limited waveform is the
trigonometric interpolation of its samples (the inverse DFT evaluated between the
samples). ``scipy.signal.resample`` (FFT method) gives it at 16 points per sample; around
the largest of those, the inverse DFT is evaluated directly at 256 points per sample,
where it can read at most ``20 log10(cos(pi * 0.5 / 256))`` = 0.0002 dB low (a tone at
Nyquist, derived). Transients sit in the middle of the file, far from the edges (and in
a chunk the meter handles while fed, not in result()).

Targets (issue 16; EBU Tech 3341 tolerance +0.2 / -0.4 dB, from the docs/standards.md): at
most 0.1 dB low for content up to 0.45 fs; within +0.2 / -0.4 dB up to 0.48 fs. Each
table also asserts the bound measured here (tighter, marked "measured"), so that a
regression shows before it reaches the targets.
"""

from __future__ import annotations

import math
from functools import cache

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import signal as sps

from checker.dsp import native
from checker.dsp.interp import (
    DEFAULT_TAPS_PER_PHASE,
    design_phases,
    fractional_taps,
    step_weights,
)
from checker.io.audio import Block, StreamInfo
from checker.io.layout import default_layout
from checker.meters.base import MeasureOptions
from checker.meters.truepeak import TruePeakMeter

N = 12_288  # one period of every test signal (frames)
UP = 16  # first reference stage: points per sample (scipy.signal.resample)
FINE = 256  # second stage: points per sample (direct inverse DFT)
EBU_LOW_DB, EBU_HIGH_DB = -0.4, 0.2  # EBU Tech 3341 true-peak tolerance (docs/standards.md)
TARGET_LOW_045_DB = -0.1  # issue 16: at most 0.1 dB low up to 0.45 fs


def meter_dbtp(x: np.ndarray, rate: int, block: int = 4_800) -> float:
    info = StreamInfo("mem.wav", "WAV", "FLOAT", rate, 1, x.size)
    m = TruePeakMeter(info, default_layout(1), MeasureOptions())
    for i in range(0, x.size, block):
        m.feed(Block(x=x[i : i + block, None], raw=None, start=i))
    return m.result().true_peak_dbtp


def reference_dbtp(x: np.ndarray) -> float:
    """FFT interpolation of the periodic signal x: scipy.signal.resample at 16x, then the
    inverse DFT at 256x within one 16x step of every local maximum of the 16x grid that
    could lie next to the true peak (bound below)."""
    y = np.abs(sps.resample(x, x.size * UP))
    top = float(y.max())
    peaks = (y >= np.roll(y, 1)) & (y >= np.roll(y, -1))  # local maxima (periodic)
    # Bernstein: |y''| <= (pi fs)^2 max|y|, so the grid point nearest the true peak A
    # (within 1/32 sample) is at least A (1 - (pi / 32)^2 / 2) >= top times that.
    near = np.flatnonzero(peaks & (y >= top * (1.0 - (math.pi / 32) ** 2 / 2)))
    t = (near[:, None] / UP + np.arange(-FINE // UP, FINE // UP + 1)[None, :] / FINE).ravel()
    spectrum = np.fft.rfft(x)
    k = np.flatnonzero(np.abs(spectrum) > 1e-9 * np.abs(spectrum).max())  # bins in the band
    weight = np.where((k == 0) | (2 * k == x.size), 1.0, 2.0)  # one-sided sum of the DFT
    fine = (np.exp(2j * np.pi * np.outer(t, k) / x.size) @ (weight * spectrum[k])).real / x.size
    return 20.0 * math.log10(max(top, float(np.abs(fine).max())))


def band_limited(x: np.ndarray, top: float, bottom: float = 0.0) -> np.ndarray:
    """x with every DFT bin outside [bottom, top] (fractions of the rate) set to zero,
    scaled to a 0.5 sample peak."""
    spectrum = np.fft.rfft(x)
    f = np.fft.rfftfreq(x.size)
    spectrum[(f > top) | (f < bottom)] = 0.0
    y = np.fft.irfft(spectrum, x.size)
    return y * (0.5 / np.abs(y).max())


def burst(centre: float, fwhm_periods: float, offset: float, phase: float) -> np.ndarray:
    """Gaussian-envelope tone burst: centre frequency (fraction of the rate), envelope
    full width at half maximum in periods of that frequency, envelope centre at
    N / 2 + offset samples."""
    t = np.arange(N) - N / 2 - offset
    sigma = fwhm_periods / centre / (2.0 * math.sqrt(2.0 * math.log(2.0)))
    return np.exp(-0.5 * (t / sigma) ** 2) * np.cos(2 * np.pi * centre * t + phase)


# (band edge, centre frequency): bursts are band-limited at the edge before measuring.
BURSTS = [
    (0.45, 0.30),
    (0.45, 0.40),
    (0.45, 0.45),
    (0.48, 0.425),
    (0.48, 0.45),
    (0.48, 0.47),
    (0.48, 0.48),
]
ENVELOPES = (1.5, 3.0)  # FWHM in periods
OFFSETS = (0.0, 0.25, 0.5)  # envelope centre, samples past a sample instant


@cache
def burst_case(edge: float, centre: float, fwhm: float, offset: float) -> tuple[np.ndarray, float]:
    """(signal, reference dBTP) of one table row (the same at every rate)."""
    x = band_limited(burst(centre, fwhm, offset, phase=0.3 + offset), edge)
    return x, reference_dbtp(x)


def burst_table(rate: int) -> list[tuple[float, float, float, float, float]]:
    """Rows (band edge, centre, envelope FWHM periods, offset, error dB = ours - reference)."""
    rows = []
    for edge, centre in BURSTS:
        for fwhm in ENVELOPES:
            for offset in OFFSETS:
                x, ref = burst_case(edge, centre, fwhm, offset)
                rows.append((edge, centre, fwhm, offset, meter_dbtp(x, rate) - ref))
    return rows


@pytest.mark.parametrize("rate", [44_100, 48_000, 96_000])
def test_burst_table_against_fft_interpolation(rate):
    rows = burst_table(rate)
    for edge, centre, fwhm, offset, err in rows:
        where = f"{rate} Hz, band {edge} fs, centre {centre} fs, FWHM {fwhm}, offset {offset}"
        assert EBU_LOW_DB <= err <= EBU_HIGH_DB, (where, err)  # EBU Tech 3341 tolerance
        if edge <= 0.45:
            assert err >= TARGET_LOW_045_DB, (where, err)  # issue 16 target
        # measured here (64 taps, beta 4.5, 44.1/48/96 kHz): 0.000 to +0.003 dB
        assert -0.02 <= err <= 0.02, (where, err)


# Bursts like those of issue 16 (not band-limited: a 3-period Gaussian burst at 0.47 fs
# has content past Nyquist, folded back by sampling). Reported there with the previous
# 32-tap filter: 0.10 / 0.65 / 1.26 dB low at 0.425 / 0.45 / 0.47 fs (its own burst
# definition); these read down to 0.27 dB low with that filter (measured here).
@pytest.mark.parametrize("centre", [0.425, 0.45, 0.47])
def test_issue_bursts_as_reported(centre):
    worst = 0.0
    for offset in OFFSETS:
        x = 0.5 * burst(centre, 3.0, offset, phase=0.3)
        err = meter_dbtp(x, 48_000) - reference_dbtp(x)
        assert EBU_LOW_DB <= err <= EBU_HIGH_DB, (centre, offset, err)  # EBU tolerance
        worst = min(worst, err)
    assert worst >= -0.15, (centre, worst)  # measured here: at most 0.071 dB low


# (bottom, top, lowest and highest error allowed; measured here over 6 seeds and 3 rates:
# 0.001 to 0.005, -0.0002 to 0.009, 0.007 to 0.023, -0.033 to -0.0004 dB)
NOISE_BANDS = [
    (0.0, 0.45, -0.01, 0.02),
    (0.0, 0.48, -0.01, 0.03),
    (0.44, 0.45, -0.01, 0.04),
    (0.46, 0.48, -0.06, 0.02),
]


@cache
def noise_case(bottom: float, top: float, seed: int) -> tuple[np.ndarray, float]:
    """(band-limited Gaussian noise, reference dBTP); seeded, the same at every rate."""
    rng = np.random.default_rng([seed, int(bottom * 1000), int(top * 1000)])
    x = band_limited(rng.standard_normal(N), top, bottom)
    return x, reference_dbtp(x)


@pytest.mark.parametrize("rate", [44_100, 48_000, 96_000])
@pytest.mark.parametrize("bottom,top,low,high", NOISE_BANDS)
def test_band_limited_noise_against_fft_interpolation(rate, bottom, top, low, high):
    for seed in range(6):
        x, ref = noise_case(bottom, top, seed)
        err = meter_dbtp(x, rate) - ref
        assert EBU_LOW_DB <= err <= EBU_HIGH_DB, (bottom, top, err)  # EBU Tech 3341
        if top <= 0.45:
            assert err >= TARGET_LOW_045_DB, (bottom, top, err)  # issue 16 target
        assert low <= err <= high, (bottom, top, err)  # measured here (see NOISE_BANDS)


def test_what_remains_above_048_fs():
    """Documented in the README: content between 0.48 fs and Nyquist is attenuated by the
    filter's transition band (the half-sample phase has no gain at Nyquist itself, where
    the samples alone cannot tell a tone's peak), so such content reads low, and where
    it cancelled part of a peak, high.
    Measured here (6 seeds each, 44.1 / 48 / 96 kHz): band-pass noise 0.48-0.49 fs down
    to 0.10 dB low, 0.49-0.50 fs 0.15 to 0.93 dB low; full-band white noise from 0.14 dB
    low to 0.22 dB high (other seeds: 0.33 and 2.1 dB low in the two bands). The previous
    32-tap filter read the same white noise 0.16 dB low to 0.07 dB high (48 kHz): the
    flatter filter keeps more of 0.45-0.48 fs but cuts 0.49-0.5 fs as sharply, and where
    that content cancelled part of a peak, the peak reads high. The meter equals its own filter's reconstruction
    there (not a search miss)."""
    worst = {}
    for bottom, top in ((0.48, 0.49), (0.49, 0.5), (0.0, 0.5)):
        errs = []
        for seed in range(6):
            x, ref = noise_case(bottom, top, seed)
            errs.append(meter_dbtp(x, 48_000) - ref)
        worst[(bottom, top)] = (min(errs), max(errs))
    assert worst[(0.48, 0.49)][0] >= -0.45 and worst[(0.48, 0.49)][1] <= 0.05, worst
    assert -2.5 <= worst[(0.49, 0.5)][0] <= -0.1 and worst[(0.49, 0.5)][1] <= 0.05, worst
    assert worst[(0.0, 0.5)][0] >= -0.3 and worst[(0.0, 0.5)][1] <= 0.3, worst
    # Pink noise (full band, 3 dB per octave less energy up top): measured 0.053 dB low to
    # 0.079 dB high (6 seeds, 3 rates).
    for seed in range(6):
        rng = np.random.default_rng([seed, 77])
        f = np.fft.rfftfreq(N)
        f[0] = f[1]
        x = np.fft.irfft(np.fft.rfft(rng.standard_normal(N)) / np.sqrt(f), N)
        x *= 0.5 / np.abs(x).max()
        err = meter_dbtp(x, 48_000) - reference_dbtp(x)
        assert -0.15 <= err <= 0.15, (seed, err)


# ------------------------------------------------------------- the interpolator itself --
def test_interpolator_passband():
    """Complex gain error |H_f(w) - e^{i w f}| of every grid phase and fine offset (32 per
    sample), measured on a dense frequency grid. Ideal fractional delay: e^{i w f}
    (definition). Values measured here for the default (64 taps per phase, Kaiser 4.5)."""
    taps = fractional_taps(np.arange(32) / 32)
    assert taps.shape[1] == DEFAULT_TAPS_PER_PHASE == 64
    back = taps.shape[1] // 2 - 1
    q = np.arange(taps.shape[1]) - back
    offsets = np.arange(32) / 32

    def worst(top: float) -> tuple[float, float, float]:
        w = 2 * np.pi * np.linspace(0.0, top, 2_000)
        h = taps @ np.exp(1j * np.outer(q, w))
        err = float(np.abs(h - np.exp(1j * np.outer(offsets, w))).max())
        mag = 20 * np.log10(np.abs(h))
        return err, float(mag.min()), float(mag.max())

    err45, low45, high45 = worst(0.45)
    err47, low47, high47 = worst(0.47)
    err48, low48, _ = worst(0.48)
    # measured: 0.0040 / 0.0049 / 0.032 complex error; gain -0.019..+0.035 dB to 0.45 fs,
    # -0.035..+0.042 dB to 0.47 fs, down to -0.29 dB at 0.48 fs
    assert_allclose([err45, err47, err48], [0.0040, 0.0049, 0.0324], rtol=0, atol=0.0005)
    assert low45 >= -0.03 and high45 <= 0.04
    assert low47 >= -0.04 and high47 <= 0.05
    assert low48 >= -0.3
    # Phase 0 is the sample itself (cutoff exactly at Nyquist): definition of the design.
    phases = design_phases(4)
    assert_allclose(phases[:, 0], np.eye(64)[back], rtol=0, atol=0)


def test_step_bound_holds_and_is_tighter_than_the_tap_sum():
    """The skip bound |y| <= |sum g| max|x| + step_weights(g) max|x[k+1] - x[k]|
    (Abel summation, interp.step_weights) holds for every offset on random, worst-case
    (signs of the taps) and low-pass windows, and is far below sum|g| max|x| for
    low-pass content."""
    taps = fractional_taps(np.arange(32) / 32)
    c1 = step_weights(taps)
    dc = np.abs(taps.sum(axis=1))
    rng = np.random.default_rng(7)
    windows = [rng.standard_normal(64), np.sign(taps[16]), np.cumsum(rng.standard_normal(64))]
    b, a = sps.butter(2, 0.05)
    windows.append(sps.lfilter(b, a, rng.standard_normal(400))[-64:])
    for x in windows:
        peak, step = np.abs(x).max(), np.abs(np.diff(x)).max()
        y = np.abs(taps @ x)
        assert np.all(y <= dc * peak + c1 * step + 1e-12)
        assert np.all(y <= np.abs(taps).sum(axis=1) * peak + 1e-12)
    low = windows[-1]
    ratio = (dc.max() * np.abs(low).max() + c1.max() * np.abs(np.diff(low)).max()) / (
        np.abs(taps).sum(axis=1).max() * np.abs(low).max()
    )
    assert ratio < 0.5, ratio  # derived: the low-pass window steps by < 5 % of its peak


@pytest.mark.parametrize("block", [4_800, 1_000, 16_384, 333])
def test_burst_block_size_invariance(block):
    x = band_limited(burst(0.47, 3.0, 0.25, 0.3), 0.48)
    assert meter_dbtp(x, 48_000, block) == meter_dbtp(x, 48_000, 4_800)


def test_numpy_path_reads_the_same_table():
    """The numpy twin (DELIVERYCHECK_KERNELS=numpy path) reads the bursts as the compiled
    path does, to float32 rounding."""
    for edge, centre in BURSTS[-2:]:
        x = band_limited(burst(centre, 3.0, 0.25, 0.3), edge)
        compiled = meter_dbtp(x, 48_000)
        with native.disabled():
            plain = meter_dbtp(x, 48_000)
        assert_allclose(compiled, plain, rtol=0, atol=1e-5)  # float32 sums, other order
