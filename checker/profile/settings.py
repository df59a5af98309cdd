"""Profile settings that are not limits (how a measured value is judged, e.g. the silence
threshold): each with its section, unit, default, the default's source and allowed range.

One job: the table of settings (the limits are in checker/profile/catalogue.py).
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class SettingDef:
    """A profile setting that is not a limit: how a measured value is judged. Written
    like a limit without a severity: ``key = { value = ..., source = "..." }``."""

    key: str
    section: str
    unit: str
    what: str
    default: float
    default_source: str
    low: float  # allowed range, inclusive
    high: float
    whole: bool = False  # whole numbers only


#: Settings a profile may give (each has a default with its source).
SETTING_DEFS: tuple[SettingDef, ...] = (
    SettingDef(
        "silence_threshold_dbfs",
        "silence",
        "dBFS",
        "short-time RMS (20 ms windows) below which the head and tail count as silence or "
        "room tone",
        -60.0,
        "common practice (our choice): room tone and dither stay below the -60 dBFS RMS "
        "noise-floor ceiling that audiobook requirements use (from memory), speech does not",
        -120.0,
        -20.0,
        whole=True,
    ),
)
SETTING_BY_KEY: dict[str, SettingDef] = {d.key: d for d in SETTING_DEFS}
