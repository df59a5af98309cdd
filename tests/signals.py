"""Deterministic test-signal generators (no randomness without an explicit seed).

Levels are in dBFS of the peak amplitude unless a name says otherwise, as in
EBU Tech 3341/3342, where "-23 dBFS" means a sine whose peak is -23 dB re full
scale.
"""

from __future__ import annotations

import numpy as np
import soundfile as sf
from scipy import signal as sps


def db_to_amp(db: float) -> float:
    return 10.0 ** (db / 20.0)


def sine(
    freq_hz: float,
    level_dbfs: float,
    duration_s: float,
    rate: int = 48_000,
    phase_rad: float = 0.0,
    channels: int = 1,
) -> np.ndarray:
    """Sine of the given peak level, shape (frames, channels), identical in every channel."""
    n = int(round(duration_s * rate))
    t = np.arange(n) / rate
    x = db_to_amp(level_dbfs) * np.sin(2 * np.pi * freq_hz * t + phase_rad)
    return np.repeat(x[:, None], channels, axis=1)


def sine_segments(
    segments: list[tuple[float, float]],
    freq_hz: float = 1000.0,
    rate: int = 48_000,
    channels: int = 2,
) -> np.ndarray:
    """Concatenate (level_dbfs, duration_s) sine segments with continuous phase."""
    total = sum(int(round(d * rate)) for _, d in segments)
    t = np.arange(total) / rate
    carrier = np.sin(2 * np.pi * freq_hz * t)
    gain = np.empty(total)
    pos = 0
    for level, dur in segments:
        n = int(round(dur * rate))
        gain[pos : pos + n] = db_to_amp(level)
        pos += n
    x = carrier * gain
    return np.repeat(x[:, None], channels, axis=1)


def noise(duration_s: float, rate: int = 48_000, channels: int = 1, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return rng.standard_normal((int(round(duration_s * rate)), channels))


def programme(
    duration_s: float,
    rate: int = 48_000,
    channels: int = 2,
    seed: int = 0,
    level_dbfs: float = -20.0,
) -> np.ndarray:
    """Programme-like material: pink-ish noise with slow level changes and pauses.

    Seeded, so the same arguments always give the same samples. Channels are
    partly correlated (a common component plus a per-channel component).
    """
    rng = np.random.default_rng(seed)
    n = int(round(duration_s * rate))
    common = rng.standard_normal(n)
    own = rng.standard_normal((n, channels))
    x = 0.7 * common[:, None] + 0.5 * own
    # Spectral tilt: first-order low-pass around 1 kHz plus a little of the flat signal.
    b, a = sps.butter(1, 1000.0 / (rate / 2))
    x = sps.lfilter(b, a, x, axis=0) * 3.0 + 0.2 * x
    # Slow level envelope: segments of 0.5-4 s at levels spread over ~20 dB, some pauses.
    env = np.empty(n)
    pos = 0
    while pos < n:
        seg = int(rng.uniform(0.5, 4.0) * rate)
        level = rng.uniform(-14.0, 4.0) if rng.random() > 0.12 else -60.0
        env[pos : pos + seg] = db_to_amp(level)
        pos += seg
    env = sps.lfilter([0.002], [1, -0.998], env)  # smooth the steps (~10 ms)
    x = x * env[:, None]
    rms = np.sqrt(np.mean(x**2))
    return x * (db_to_amp(level_dbfs) / max(rms, 1e-12))


def write(
    path, data: np.ndarray, rate: int = 48_000, subtype: str = "PCM_24", format: str | None = None
):
    sf.write(str(path), data, rate, subtype=subtype, format=format)
    return path
