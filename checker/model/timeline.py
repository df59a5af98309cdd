"""Loudness over time, reduced to a bounded number of points for storage and graphs.

Meters that produce a series (momentary and short-term loudness at a 100 ms
hop) hand it over as an array; :func:`reduce_series` keeps at most
``max_points`` points by taking the maximum of each bucket, so the loudest
moments (the ones rules care about) survive downsampling.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

MAX_POINTS = 2000


def bucket_step(n: int, max_points: int) -> int:
    """Values per bucket so that ``n`` values make at most ``max_points`` buckets."""
    return max(1, math.ceil(n / max_points))


def bucket_max(values: np.ndarray, step: int) -> np.ndarray:
    """The maximum of each run of ``step`` values (the last bucket may be shorter); NaN counts
    as no level (-inf). The one max-preserving reduction: storage and the report's graphs."""
    v = np.asarray(values, dtype=np.float64)
    m = math.ceil(v.size / step)
    padded = np.full(m * step, -np.inf)
    padded[: v.size] = np.where(np.isnan(v), -np.inf, v)
    return padded.reshape(m, step).max(axis=1)


def reduce_series(values: np.ndarray, hop_s: float, max_points: int = MAX_POINTS):
    """Max-preserving reduction. Returns (times_s, values) as lists; -inf -> None.

    ``times_s[i]`` is the end time of the first value in bucket i (series
    values at a 100 ms hop are stamped at the end of their window).
    """
    v = np.asarray(values, dtype=np.float64)
    n = v.size
    if n == 0:
        return [], []
    step = bucket_step(n, max_points)
    buckets = bucket_max(v, step)
    times = (np.arange(buckets.size) * step + 1) * hop_s
    out = [None if not np.isfinite(b) else round(float(b), 3) for b in buckets]
    return [round(float(t), 4) for t in times], out


@dataclass(frozen=True)
class Timeline:
    """Reduced loudness series for one file (plain lists, JSON-ready)."""

    hop_s: float = 0.1
    times_s: list[float] = field(default_factory=list)
    series: dict[str, list[float | None]] = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {"hop_s": self.hop_s, "times_s": self.times_s, **self.series}

    @classmethod
    def from_dict(cls, d: dict | None) -> Timeline | None:
        if not d:
            return None
        d = dict(d)
        hop = d.pop("hop_s", 0.1)
        times = d.pop("times_s", [])
        return cls(hop_s=hop, times_s=times, series=d)


def build_timeline(series: dict[str, tuple[float, np.ndarray]]) -> Timeline | None:
    """series: name -> (hop_s, full-resolution values). All must share one hop."""
    if not series:
        return None
    hop = next(iter(series.values()))[0]
    times: list[float] = []
    reduced: dict[str, list[float | None]] = {}
    length = max(len(v) for _, v in series.values())
    for name, (h, values) in series.items():
        if h != hop:
            raise ValueError(f"timeline series {name}: hop {h} s (expected {hop} s)")
        padded = np.full(length, -np.inf)
        padded[: len(values)] = values
        t, r = reduce_series(padded, hop)
        times = t
        reduced[name] = r
    return Timeline(hop_s=hop, times_s=times, series=reduced)
