"""Streaming meters, one module each. ``METERS`` lists them in feed order."""

from __future__ import annotations

import importlib

#: (module, class) of every meter measure() runs. Add a meter here.
METERS: tuple[tuple[str, str], ...] = (
    ("checker.meters.loudness", "LoudnessMeter"),
    ("checker.meters.truepeak", "TruePeakMeter"),
    ("checker.meters.levels", "LevelsMeter"),
    ("checker.meters.silence", "SilenceMeter"),
    ("checker.meters.channels", "ChannelsMeter"),
    ("checker.meters.bandwidth", "BandwidthMeter"),
    ("checker.meters.downmix", "DownmixMeter"),
)


def meter_classes() -> list[type]:
    return [
        getattr(importlib.import_module(module_name), class_name)
        for module_name, class_name in METERS
    ]
