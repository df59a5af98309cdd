"""Gated loudness from window powers: BS.1770-4 integrated loudness (absolute and relative
gates over 400 ms blocks) and EBU Tech 3342 loudness range (over 3 s short-term windows).

One job: the gating arithmetic, shared by the loudness meter and the speech gate; the windows'
powers come from checker/meters/loudness.py.
"""

from __future__ import annotations

import math

import numpy as np

from checker.model import units

RELATIVE_GATE_LU = -10.0  # BS.1770-4
LRA_RELATIVE_GATE_LU = -20.0  # EBU Tech 3342
LRA_LOW_PERCENTILE = 0.10
LRA_HIGH_PERCENTILE = 0.95

NOTE_BELOW_GATE = "below absolute gate"
NOTE_TOO_SHORT = "shorter than one 400 ms block"
NOTE_LRA_TOO_SHORT = "shorter than one 3 s short-term window"


def integrated_from_blocks(block_powers: np.ndarray) -> tuple[float | None, str | None]:
    """BS.1770-4 gated integrated loudness from the mean powers of complete 400 ms blocks.

    Returns (LUFS, None), or (None, reason) when undefined.
    """
    if block_powers.size == 0:
        return None, NOTE_TOO_SHORT
    loudness = units.powers_to_lufs(block_powers)
    above_abs = loudness > units.ABSOLUTE_GATE_LUFS
    if not above_abs.any():
        return None, NOTE_BELOW_GATE
    relative_gate = units.power_to_lufs(float(block_powers[above_abs].mean())) + RELATIVE_GATE_LU
    gated = above_abs & (loudness > relative_gate)
    return units.power_to_lufs(float(block_powers[gated].mean())), None


def loudness_range_from_short_term(
    short_term_powers: np.ndarray,
) -> tuple[float | None, str | None]:
    """EBU Tech 3342 loudness range from the mean powers of complete 3 s windows.

    Returns (LU, None), or (None, reason) when undefined.
    """
    if short_term_powers.size == 0:
        return None, NOTE_LRA_TOO_SHORT
    loudness = units.powers_to_lufs(short_term_powers)
    above_abs = loudness > units.ABSOLUTE_GATE_LUFS
    if not above_abs.any():
        return None, NOTE_BELOW_GATE
    mean_power = float(short_term_powers[above_abs].mean())
    relative_gate = units.power_to_lufs(mean_power) + LRA_RELATIVE_GATE_LU
    values = np.sort(loudness[above_abs & (loudness > relative_gate)])
    last = values.size - 1
    low = values[int(math.floor(last * LRA_LOW_PERCENTILE + 0.5))]
    high = values[int(math.floor(last * LRA_HIGH_PERCENTILE + 0.5))]
    return float(high - low), None
