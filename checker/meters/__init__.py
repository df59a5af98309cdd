"""Streaming meters, one module each, all with ``feed(block)`` / ``result()`` (``base.Meter``) and
their own state. ``METERS`` lists them in feed order; add a new meter here. ``roundtrip`` holds
the encode round-trip meters a profile may ask for.

May import ``model``, ``dsp`` and ``io`` (the Block type and channel layouts).
"""

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
    ("checker.meters.speech", "SpeechMeter"),  # after loudness: reuses its 100 ms records
)


def meter_classes() -> list[type]:
    return [
        getattr(importlib.import_module(module_name), class_name)
        for module_name, class_name in METERS
    ]
