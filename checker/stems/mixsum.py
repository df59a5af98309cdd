"""Per-stem trackers and the meters run on the sum of a stem set.

``StemTracker`` follows one file of a set (frames decoded, sample peak, where
the content begins). ``SumMeters`` takes the block-by-block sum of the stems:
its sample peak and first clip here, its true peak and integrated loudness
through the project's own meters (checker.meters.truepeak.TruePeakMeter and
checker.meters.loudness.LoudnessMeter) fed with blocks of the sum.
"""

from __future__ import annotations

import importlib
from typing import Any

import numpy as np

from checker.io.audio import Block, StreamInfo
from checker.io.layout import Layout
from checker.meters.base import MeasureOptions
from checker.model.units import amplitude_to_db

#: (module, class, {meter key: set key}, note key) of the meters run on the sum.
SUM_METERS: tuple[tuple[str, str, dict[str, str], str], ...] = (
    (
        "checker.meters.truepeak",
        "TruePeakMeter",
        {"true_peak_dbtp": "sum_true_peak_dbtp", "true_peak_time_s": "sum_true_peak_time_s"},
        "sum_true_peak_note",
    ),
    (
        "checker.meters.loudness",
        "LoudnessMeter",
        {"integrated_lufs": "sum_integrated_lufs", "integrated_note": "sum_integrated_note"},
        "sum_integrated_note",
    ),
)


def load_sum_meter(module_name: str, class_name: str):
    """The meter class, or None while its module does not exist in this build."""
    try:
        module = importlib.import_module(module_name)
    except ModuleNotFoundError as exc:
        if exc.name == module_name:
            return None
        raise
    return getattr(module, class_name)


class StemTracker:
    """Frames, sample peak and content starts of one file in a set.

    ``first_start``: first frame at or above ``start_threshold_dbfs`` (-inf:
    the first frame with a non-zero sample). ``first_content``: first frame at
    or above ``content_threshold_dbfs``.
    """

    def __init__(
        self,
        name: str,
        info: StreamInfo,
        start_threshold_dbfs: float,
        content_threshold_dbfs: float,
    ) -> None:
        self.name = name
        self.info = info
        self.frames = 0
        self.peak = 0.0
        self.peak_frame: int | None = None
        self.first_start: int | None = None
        self.first_content: int | None = None
        self._start_amp = 10.0 ** (start_threshold_dbfs / 20.0)  # 0.0: any non-zero sample
        self._content_amp = 10.0 ** (content_threshold_dbfs / 20.0)
        self.error: str | None = None

    def feed(self, block: Block) -> None:
        n = block.frames
        if n == 0:
            return
        ax = np.abs(block.x)
        flat = ax.ravel()  # C order: index // channels is the frame
        channels = ax.shape[1]
        i = int(np.argmax(flat))
        if flat[i] > self.peak:  # strict: the first frame of the maximum is kept
            self.peak = float(flat[i])
            self.peak_frame = block.start + i // channels
        if self.first_start is None:
            self.first_start = _first(flat, self._start_amp, channels, block.start)
        if self.first_content is None:
            self.first_content = _first(flat, self._content_amp, channels, block.start)
        self.frames += n

    @property
    def peak_dbfs(self) -> float:
        return amplitude_to_db(self.peak)


def _first(flat: np.ndarray, amp: float, channels: int, start: int) -> int | None:
    """First frame with a sample at or above ``amp`` (strictly above 0 when ``amp`` is 0)."""
    hit = flat >= amp if amp > 0.0 else flat > 0.0
    k = int(np.argmax(hit))
    return start + k // channels if hit[k] else None


class SumMeters:
    """Sample peak, clipping, true peak and loudness of the sum of the stems."""

    def __init__(self, info: StreamInfo, layout: Layout, options: MeasureOptions) -> None:
        self.rate = info.sample_rate_hz
        self.peak = 0.0
        self.peak_frame: int | None = None
        self.first_clip: int | None = None
        self.clipped = 0
        self.frames = 0
        self._meters: list[tuple[Any, dict[str, str]]] = []
        self.missing: list[tuple[str, dict[str, str], str]] = []
        for module_name, class_name, keys, note_key in SUM_METERS:
            cls = load_sum_meter(module_name, class_name)
            if cls is None:
                self.missing.append((module_name, keys, note_key))
            else:
                self._meters.append((cls(info, layout, options), keys))

    def feed(self, total: np.ndarray, start: int) -> None:
        n = total.shape[0]
        if n == 0:
            return
        flat = np.abs(total).ravel()  # C order: index // channels is the frame
        channels = total.shape[1]
        i = int(np.argmax(flat))
        if flat[i] > self.peak:
            self.peak = float(flat[i])
            self.peak_frame = start + i // channels
        over = flat >= 1.0
        count = int(np.count_nonzero(over))
        if count:
            self.clipped += count
            if self.first_clip is None:
                self.first_clip = start + int(np.argmax(over)) // channels
        block = Block(x=total, raw=None, start=start)
        for meter, _ in self._meters:
            meter.feed(block)
        self.frames += n

    def values(self) -> dict[str, Any]:
        rate = self.rate
        v: dict[str, Any] = {
            "sum_sample_peak_dbfs": amplitude_to_db(self.peak),
            "sum_sample_peak_time_s": None if self.peak_frame is None else self.peak_frame / rate,
            "sum_first_clip_s": None if self.first_clip is None else self.first_clip / rate,
            "sum_clipped_samples": self.clipped,
        }
        for meter, keys in self._meters:
            d = meter.result().to_dict()
            for src, dst in keys.items():
                v[dst] = d.get(src)
        for module_name, keys, note_key in self.missing:
            for dst in keys.values():
                v[dst] = None
            v[note_key] = f"{module_name} is not available in this build"
        return v


def undefined_sum_values(reason: str) -> dict[str, Any]:
    """Every sum key as None, with the reason in the notes."""
    v: dict[str, Any] = {
        "sum_sample_peak_dbfs": None,
        "sum_sample_peak_time_s": None,
        "sum_first_clip_s": None,
        "sum_clipped_samples": None,
        "sum_note": reason,
    }
    for _, _, keys, note_key in SUM_METERS:
        for dst in keys.values():
            v[dst] = None
        v[note_key] = reason
    return v
