"""Level conversions and the silence policy.

This is the only module that takes log10 of a power or an amplitude. Everything
else calls these helpers, so the treatment of zero (digital silence) is the
same everywhere: a level of digital silence is ``-inf``; a statistic that is
undefined (for example integrated loudness when every block is gated out) is
``None`` and is decided by the meter, never by these functions.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # numpy is imported where a vectorised helper runs: profiles, the judge
    import numpy as np  # and the command line's start use these constants without it

#: BS.1770-4 eq. (1)/(2): L = -0.691 + 10 log10(sum G_i z_i).
LOUDNESS_OFFSET_DB = -0.691

#: BS.1770 absolute gate for integrated loudness and EBU Tech 3342 LRA.
ABSOLUTE_GATE_LUFS = -70.0

#: 10 log10(2): the difference between a mono signal measured as one channel
#: and the same signal carried on two identical channels (dual mono).
DUAL_MONO_OFFSET_LU = 10.0 * math.log10(2.0)


def power_to_lufs(power: float) -> float:
    """Weighted mean-square power -> loudness in LUFS; 0 -> -inf."""
    if power <= 0.0:
        return -math.inf
    return LOUDNESS_OFFSET_DB + 10.0 * math.log10(power)


def lufs_to_power(lufs: float) -> float:
    """Inverse of :func:`power_to_lufs`."""
    if lufs == -math.inf:
        return 0.0
    return 10.0 ** ((lufs - LOUDNESS_OFFSET_DB) / 10.0)


def powers_to_lufs(power: np.ndarray) -> np.ndarray:
    """Vectorised :func:`power_to_lufs`; zeros become -inf without a warning."""
    import numpy as np

    power = np.asarray(power, dtype=np.float64)
    out = np.full(power.shape, -np.inf)
    pos = power > 0.0
    out[pos] = LOUDNESS_OFFSET_DB + 10.0 * np.log10(power[pos])
    return out


def amplitude_to_db(amplitude: float) -> float:
    """Linear amplitude (1.0 = full scale) -> dB; 0 -> -inf."""
    amplitude = abs(float(amplitude))
    if amplitude <= 0.0:
        return -math.inf
    return 20.0 * math.log10(amplitude)


def amplitudes_to_db(amplitude: np.ndarray) -> np.ndarray:
    """Vectorised :func:`amplitude_to_db`."""
    import numpy as np

    a = np.abs(np.asarray(amplitude, dtype=np.float64))
    out = np.full(a.shape, -np.inf)
    pos = a > 0.0
    out[pos] = 20.0 * np.log10(a[pos])
    return out


def power_to_db(power: float) -> float:
    """Mean-square power -> dB (10 log10); 0 -> -inf.

    RMS levels in this project use the convention RMS re 1.0: a full-scale sine
    reads -3.01 dBFS RMS (not the AES17 convention, where it reads 0).
    """
    if power <= 0.0:
        return -math.inf
    return 10.0 * math.log10(power)


def db_to_amplitude(db: float) -> float:
    return 10.0 ** (db / 20.0)


def quantization_floor_dbfs(bits: int) -> float:
    """RMS level of undithered N-bit quantization noise, re 1.0 full scale.

    From the handbook rule SNR = 6.02 N + 1.76 dB for a full-scale sine
    (whose RMS is -3.01 dB re 1.0): floor = -(6.02 N + 1.76) - 3.01 dBFS.
    16 bits -> -101.1 dBFS RMS re 1.0 (-98.1 dB below a full-scale sine).
    """
    return -(6.0206 * bits + 1.7609) - 3.0103


def finite_or_none(x: float | None) -> float | None:
    """NaN never leaves the engine: map NaN to None, keep +-inf."""
    if x is None:
        return None
    x = float(x)
    if math.isnan(x):
        return None
    return x


#: Unit suffix of a key -> the unit shown to people.
UNIT_SUFFIXES = {
    "lufs": "LUFS",
    "lu": "LU",
    "dbtp": "dBTP",
    "dbfs": "dBFS",
    "db": "dB",
    "s": "s",
    "hz": "Hz",
    "frames": "frames",
    "kbps": "kbit/s",
}
