"""Synthesised programme material for the demo batch (seeded, deterministic).

Nothing here is recorded: speech-like material is spectrally shaped noise
modulated at a syllable rate with pauses and room tone; music-like material is
harmonic tones with note envelopes plus percussive noise bursts.
"""

from __future__ import annotations

import numpy as np
from scipy import signal as sps


def stable(value: float) -> float:
    """Round a statistic to 9 significant digits.

    numpy's sums may differ in the last bit from run to run (SIMD paths depend on
    memory alignment); rounding every gain derived from a sum keeps the generated
    files byte-identical across runs.
    """
    return float(f"{float(value):.9g}")


def rms(x: np.ndarray) -> float:
    return max(stable(np.sqrt(np.mean(np.square(x)))), 1e-12)


def _bandpass(x: np.ndarray, lo: float, hi: float, rate: int) -> np.ndarray:
    sos = sps.butter(2, [lo, hi], btype="bandpass", fs=rate, output="sos")
    return sps.sosfilt(sos, x)


def room_tone(n: int, rate: int, rng: np.random.Generator, level_dbfs: float = -62.0) -> np.ndarray:
    """Quiet, dark background noise (RMS at level_dbfs re 1.0)."""
    x = rng.standard_normal(n)
    sos = sps.butter(1, 600.0, fs=rate, output="sos")
    x = sps.sosfilt(sos, x)
    return x * (10 ** (level_dbfs / 20) / rms(x))


def speech_like(duration_s: float, rate: int, seed: int, voice_hz: float = 140.0) -> np.ndarray:
    """Mono speech-like signal: voiced buzz through three formant bands, 3-6 syllables/s,
    phrases of 1.5-4 s separated by 0.3-0.9 s pauses, room tone underneath."""
    rng = np.random.default_rng(seed)
    n = int(round(duration_s * rate))
    t = np.arange(n) / rate
    # Glottal-ish buzz with slow pitch drift, plus breath noise.
    pitch = voice_hz * (1 + 0.08 * np.sin(2 * np.pi * 0.3 * t + rng.uniform(0, 6)))
    phase = 2 * np.pi * np.cumsum(pitch) / rate
    buzz = sum(np.sin(k * phase) / k for k in range(1, 25))
    src = buzz + 0.3 * rng.standard_normal(n)
    voiced = (
        1.0 * _bandpass(src, 300, 900, rate)
        + 0.6 * _bandpass(src, 1000, 2400, rate)
        + 0.25 * _bandpass(src, 2500, min(6000, rate / 2 * 0.9), rate)
    )
    # Syllable envelope: raised-cosine bumps at 3-6 Hz inside phrases.
    env = np.zeros(n)
    pos = int(0.4 * rate)
    while pos < n:
        phrase_end = min(n, pos + int(rng.uniform(1.5, 4.0) * rate))
        while pos < phrase_end:
            syl = int(rng.uniform(0.16, 0.33) * rate)
            end = min(phrase_end, pos + syl)
            k = end - pos
            env[pos:end] = rng.uniform(0.4, 1.0) * np.sin(np.pi * np.arange(k) / max(k, 1)) ** 2
            pos = end
        pos += int(rng.uniform(0.3, 0.9) * rate)
    x = voiced * env
    x = x / rms(x) * 0.1
    return x + room_tone(n, rate, rng)


def music_like(duration_s: float, rate: int, seed: int) -> np.ndarray:
    """Stereo music-like signal: chord tones with envelopes, a bass line, kick and hat bursts."""
    rng = np.random.default_rng(seed)
    n = int(round(duration_s * rate))
    t = np.arange(n) / rate
    beat = 0.5  # 120 bpm
    out = np.zeros((n, 2))
    roots = [220.0, 174.61, 196.0, 146.83]
    for i, start in enumerate(np.arange(0, duration_s, 4 * beat)):
        a, b = int(start * rate), min(n, int((start + 4 * beat) * rate))
        seg = t[a:b] - start
        root = roots[i % len(roots)]
        env = np.exp(-seg * 0.8) * (1 - np.exp(-seg * 60))
        chord = sum(
            np.sin(2 * np.pi * root * r * seg) * w
            for r, w in ((1, 0.5), (1.26, 0.35), (1.5, 0.35), (2, 0.2))
        )
        bass = np.sin(2 * np.pi * root / 4 * seg) * 0.6
        out[a:b, 0] += chord * env * 0.8 + bass
        out[a:b, 1] += chord * env * 0.6 + bass
    for start in np.arange(0, duration_s, beat):
        a = int(start * rate)
        k = min(n - a, int(0.25 * rate))
        if k <= 0:
            continue
        seg = np.arange(k) / rate
        kick = np.sin(2 * np.pi * (50 + 80 * np.exp(-seg * 30)) * seg) * np.exp(-seg * 12)
        out[a : a + k] += kick[:, None] * 0.9
        h = min(n - a, int(0.05 * rate))
        hat = sps.sosfilt(
            sps.butter(2, min(7000, rate * 0.4), btype="high", fs=rate, output="sos"),
            rng.standard_normal(h),
        ) * np.exp(-np.arange(h) / rate * 80)
        hat_at = min(n - h, a + int(beat / 2 * rate))
        out[hat_at : hat_at + h, 0] += hat * 0.25
        out[hat_at : hat_at + h, 1] += hat * 0.3
    return out / rms(out) * 0.1
