"""One pass over a file: read each block once, feed every meter, assemble a Measurement."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from checker import __version__
from checker.audio import StreamInfo, read_blocks
from checker.errors import AudioReadError
from checker.layout import Layout, default_layout, layout_from_mask, parse_layout
from checker.meters import meter_classes
from checker.meters.base import MeasureOptions
from checker.serial import plain
from checker.timeline import Timeline, build_timeline
from checker.wavchunks import WavHeader, empty_values, read_wav_header, with_header_findings

#: Bumped whenever a change alters any measured value; part of the store's cache key.
ENGINE_VERSION = f"{__version__}+engine1"


@dataclass(frozen=True)
class Measurement:
    """Everything measured about one file, as flat unit-suffixed values.

    ``values`` holds plain data only (str, int, float, bool, None, lists), so a
    Measurement pickles cheaply across processes and round-trips through JSON
    and SQLite. Attribute access reads values: ``m.integrated_lufs``.
    """

    path: str
    values: dict[str, Any]
    timeline: Timeline | None = None
    findings: tuple[str, ...] = field(default_factory=tuple)
    engine_version: str = ENGINE_VERSION

    def __getattr__(self, name: str) -> Any:
        values = self.__dict__.get("values")
        if values is not None and name in values:
            return values[name]
        raise AttributeError(name)

    def get(self, name: str, default: Any = None) -> Any:
        return self.values.get(name, default)

    def to_dict(self, timeline: bool = False) -> dict[str, Any]:
        d: dict[str, Any] = {"path": self.path, **self.values}
        d["findings"] = list(self.findings)
        d["engine_version"] = self.engine_version
        if timeline:
            d["timeline"] = self.timeline.to_dict() if self.timeline else None
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> Measurement:
        d = dict(d)
        path = d.pop("path")
        findings = tuple(d.pop("findings", ()) or ())
        engine = d.pop("engine_version", ENGINE_VERSION)
        timeline = Timeline.from_dict(d.pop("timeline", None))
        return cls(path=path, values=d, timeline=timeline, findings=findings, engine_version=engine)


def resolve_layout(
    info: StreamInfo, options: MeasureOptions, header: WavHeader | None = None
) -> Layout:
    """Given layout, else the WAV channel mask (when usable), else the default map."""
    if options.layout:
        return parse_layout(options.layout, info.channels)
    if header is not None and header.channel_mask:
        layout = layout_from_mask(header.channel_mask, info.channels)
        if layout is not None:
            return layout
    return default_layout(info.channels)


def stream_values(info: StreamInfo, frames: int, layout: Layout) -> dict[str, Any]:
    return {
        "container": info.container,
        "subtype": info.subtype,
        "sample_rate_hz": info.sample_rate_hz,
        "channels": info.channels,
        "format_bits": info.format_bits,
        "frames": frames,
        "frames_declared": info.frames_declared,
        "duration_s": frames / info.sample_rate_hz,
        "channel_layout": layout.describe(),
        "layout_source": layout.source,
    }


def stream_findings(info: StreamInfo, frames: int) -> list[str]:
    findings = []
    declared = info.frames_declared
    if declared is not None and declared != frames:
        rate = info.sample_rate_hz
        what = "truncated" if frames < declared else "longer than declared"
        findings.append(
            f"header declares {declared / rate:.3f} s ({declared} frames), "
            f"{frames / rate:.3f} s ({frames} frames) decoded: {what}"
        )
    return findings


def measure(path: str, options: MeasureOptions | None = None) -> Measurement:
    """Measure one file in a single streaming pass. Raises AudioReadError."""
    options = options or MeasureOptions()
    try:
        info, blocks = read_blocks(str(path), options.block_frames)
    except AudioReadError as exc:  # say what the WAV header reader saw, if anything
        raise type(exc)(with_header_findings(str(path), str(exc))) from None
    header = read_wav_header(str(path))  # header only (seeks past the audio); None if not WAV
    layout = resolve_layout(info, options, header)
    meters = [cls(info, layout, options) for cls in meter_classes()]
    frames = 0
    for block in blocks:
        frames += block.frames
        for meter in meters:
            meter.feed(block)
    values = stream_values(info, frames, layout)
    values.update(header.values() if header else empty_values())
    findings = stream_findings(info, frames)
    findings.extend(header.findings if header else ())
    series: dict[str, Any] = {}
    for meter in meters:
        result = meter.result()
        values.update(result.to_dict())
        findings.extend(getattr(result, "findings", ()) or ())
        if hasattr(meter, "series"):
            series.update(meter.series())
    values = plain(values)
    for key, value in values.items():
        if isinstance(value, float) and math.isnan(value):  # pragma: no cover - guarded by plain()
            values[key] = None
    return Measurement(
        path=str(path),
        values=values,
        timeline=build_timeline(series),
        findings=tuple(findings),
    )
