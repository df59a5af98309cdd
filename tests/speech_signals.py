"""Test material for the speech gate: the committed narration fixtures (synthesised
speech, sentences of our own: tests/fixtures/speech/make_speech_fixtures.py) and numpy
music beds, pink noise and tones. Deterministic (seeded)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import soundfile as sf
from scipy.signal import resample_poly

FIXTURES = Path(__file__).parent / "fixtures" / "speech"
NARRATIONS = ("narration_a", "narration_b", "narration_c")


def narration(name: str, rate: int = 48_000) -> np.ndarray:
    """One committed narration (16 kHz mono FLAC) resampled to ``rate``, mono, 1-D."""
    x, fixture_rate = sf.read(FIXTURES / f"{name}.flac", dtype="float64")
    if rate == fixture_rate:
        return x
    g = np.gcd(rate, fixture_rate)
    return resample_poly(x, rate // g, fixture_rate // g)


def music_bed(duration_s: float, rate: int = 48_000, seed: int = 0) -> np.ndarray:
    """Mono music-like bed: chords of harmonic tones with note envelopes, a bass line and
    a kick every half second; RMS 0.1."""
    rng = np.random.default_rng(seed)
    n = int(round(duration_s * rate))
    t = np.arange(n) / rate
    out = np.zeros(n)
    roots = (220.0, 174.61, 196.0, 146.83)
    bar = 2.0
    for i, start in enumerate(np.arange(0.0, duration_s, bar)):
        a, b = int(start * rate), min(n, int((start + bar) * rate))
        seg = t[a:b] - start
        root = roots[(i + seed) % len(roots)] * rng.uniform(0.98, 1.02)
        env = np.exp(-seg * 0.8) * (1.0 - np.exp(-seg * 60.0))
        chord = sum(
            np.sin(2 * np.pi * root * r * seg) * w
            for r, w in ((1, 0.5), (1.26, 0.35), (1.5, 0.35), (2, 0.2))
        )
        out[a:b] += chord * env + 0.6 * np.sin(2 * np.pi * root / 4 * seg)
    for start in np.arange(0.0, duration_s, 0.5):
        a = int(start * rate)
        k = min(n - a, int(0.25 * rate))
        seg = np.arange(k) / rate
        out[a : a + k] += (
            0.9 * np.sin(2 * np.pi * (50 + 80 * np.exp(-seg * 30)) * seg) * np.exp(-seg * 12)
        )
    return out * (0.1 / np.sqrt(np.mean(out**2)))


def pink_noise(duration_s: float, rate: int = 48_000, seed: int = 0) -> np.ndarray:
    """Mono pink noise (1/f power, shaped in the frequency domain); RMS 0.1."""
    n = int(round(duration_s * rate))
    spectrum = np.fft.rfft(np.random.default_rng(seed).standard_normal(n))
    spectrum[1:] /= np.sqrt(np.arange(1, spectrum.size))
    spectrum[0] = 0.0
    x = np.fft.irfft(spectrum, n)
    return x * (0.1 / np.sqrt(np.mean(x**2)))


def tone(duration_s: float, rate: int = 48_000, freq_hz: float = 1000.0) -> np.ndarray:
    n = int(round(duration_s * rate))
    return 0.25 * np.sin(2 * np.pi * freq_hz * np.arange(n) / rate)


def stereo(x: np.ndarray) -> np.ndarray:
    return np.repeat(x[:, None], 2, axis=1)
