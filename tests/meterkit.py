"""Feeding a meter directly, block by block, the way checker.analysis.onepass does (shared by meter tests)."""

from __future__ import annotations

import math

import numpy as np

from checker.io.audio import Block, StreamInfo
from checker.io.layout import default_layout
from checker.meters.base import MeasureOptions


def info_for(subtype: str, channels: int, rate: int = 8_000) -> StreamInfo:
    return StreamInfo("mem.wav", "WAV", subtype, rate, channels, None)


def to_codes(x: np.ndarray, bits: int) -> np.ndarray:
    """Round to an N-bit grid and left-justify in int32, as checker.io.audio delivers codes."""
    top = 2 ** (bits - 1)
    k = np.clip(np.round(x * top), -top, top - 1).astype(np.int64)
    return (k << (32 - bits)).astype(np.int32)


def run_meter(meter_cls, info, x, raw=None, sizes=(10**9,), options=None):
    """Feed x (and raw) in blocks of the given sizes (cycled) through one reused buffer.

    The buffer is overwritten after every feed, so a meter that kept a view of a block
    instead of a copy sees garbage and its test fails.
    """
    meter = meter_cls(info, default_layout(info.channels), options or MeasureOptions())
    n = x.shape[0]
    cap = max(1, min(n, max(sizes)))
    buf_x = np.empty((cap, x.shape[1]))
    buf_raw = np.empty((cap, x.shape[1]), dtype=np.int32)
    start, i = 0, 0
    while start < n or i == 0:
        stop = min(n, start + sizes[i % len(sizes)])
        i += 1
        k = stop - start
        bx = buf_x[:k]
        bx[:] = x[start:stop]
        braw = None
        if raw is not None:
            braw = buf_raw[:k]
            braw[:] = raw[start:stop]
        meter.feed(Block(bx, braw, start))
        buf_x.fill(0.123)
        buf_raw.fill(12345)
        start = stop
        if n == 0:
            break
    return meter.result()


def no_nan(value) -> bool:
    """True when no float anywhere inside value (dicts, lists) is NaN."""
    if isinstance(value, dict):
        return all(no_nan(v) for v in value.values())
    if isinstance(value, (list, tuple)):
        return all(no_nan(v) for v in value)
    return not (isinstance(value, float) and math.isnan(value))
