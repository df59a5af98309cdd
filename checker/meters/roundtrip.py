"""Encode round trip: what survives a lossy encode (only when a profile asks for it).

A profile's ``[encode]`` section names a codec and a bit rate (``codec = "mp3"``,
``bit_rate_kbps = 128``); ``checker.run.batch.measure_options`` turns that request into
``MeasureOptions.encode``, which is part of the store's cache key, so measured values still
never depend on a profile's limits, only on the measurement options.

``RoundTrip`` is fed the same blocks as every meter during the single pass and encodes them,
block by block, into a temporary file with libsndfile's encoder (LAME for MPEG Layer III,
libvorbis, libopus). ``result()`` then decodes that file in blocks and measures its true peak
and integrated loudness with the project's own meters: one extra decode of the encoded
file (a second pass over the audio, acceptable only because the profile asks for it). No
whole-file buffer is kept; the temporary file is removed afterwards, also on failure.

This is one encoder's behaviour at one setting: an estimate of what others do, not a
guarantee (docs/standards.md#codecs).

Bit rate control (libsndfile 1.2.2; ``compression_level`` c in [0, 1]):
- MPEG Layer III, constant bit rate: 320 - 288 c kbit/s at 32 kHz and above, 160 - 152 c
  at 16-24 kHz, 64 - 56 c below (libsndfile's mpeg_l3_encode.c, checked in its source).
- Opus: about (256 - 250 c) kbit/s per channel (measured here: c = 0.5 gave 134.5 kbit/s
  mono and 266.6 stereo, container included); only 8, 12, 16, 24 and 48 kHz.
- Vorbis: a quality setting; the nominal bit rate in the identification header is
  searched by bisection on tiny probe encodes (it depends only on rate, channels, quality).
"""

from __future__ import annotations

import math
import os
import tempfile
import weakref
from dataclasses import dataclass
from typing import Any

import numpy as np
import soundfile as sf

from checker.io import oggpages
from checker.io.audio import Block, StreamInfo, read_blocks
from checker.io.layout import Layout
from checker.io.lossy import read_lossy

#: codec -> (libsndfile format, subtype, file suffix, plain name)
CODECS = {
    "mp3": ("MP3", "MPEG_LAYER_III", ".mp3", "MP3"),
    "vorbis": ("OGG", "VORBIS", ".ogg", "Ogg Vorbis"),
    "opus": ("OGG", "OPUS", ".opus", "Opus"),
}
MP3_RATES = (8000, 11025, 12000, 16000, 22050, 24000, 32000, 44100, 48000)
OPUS_RATES = (8000, 12000, 16000, 24000, 48000)

ROUNDTRIP_KEYS: tuple[str, ...] = (
    "encoded_codec",
    "encoded_bit_rate_kbps",
    "encoded_encoder",
    "encoded_true_peak_dbtp",
    "encoded_integrated_lufs",
    "encoded_true_peak_shift_db",
    "encoded_loudness_shift_lu",
    "encoded_note",
)


@dataclass(frozen=True)
class RoundTripResult:
    values: dict[str, Any]

    def to_dict(self) -> dict[str, Any]:
        return dict(self.values)


def unsupported(codec: str, info: StreamInfo) -> str | None:
    """Why libsndfile cannot encode this stream with ``codec`` (None: it can)."""
    if codec not in CODECS:
        return f"codec = {codec!r} (expected one of {', '.join(CODECS)})"
    rate, ch = info.sample_rate_hz, info.channels
    if codec == "mp3" and (ch > 2 or rate not in MP3_RATES):
        return f"MP3 encoding needs 1 or 2 channels at {', '.join(map(str, MP3_RATES))} Hz"
    if codec == "opus" and rate not in OPUS_RATES:
        return f"Opus encoding needs {', '.join(map(str, OPUS_RATES))} Hz (resample first)"
    return None


def compression_level(codec: str, kbps: float, rate_hz: int, channels: int) -> float:
    """libsndfile's compression level for about ``kbps`` (see the module notes)."""
    if codec == "mp3":
        hi, lo = (320, 32) if rate_hz >= 32000 else (160, 8) if rate_hz >= 16000 else (64, 8)
        return min(max((hi - kbps + 0.5) / (hi - lo), 0.0), 1.0)
    if codec == "opus":
        return min(max((256.0 - kbps / channels) / 250.0, 0.0), 1.0)
    lo_c, hi_c = 0.0, 1.0  # vorbis: nominal bit rate falls as the level rises
    for _ in range(12):
        mid = (lo_c + hi_c) / 2
        if _vorbis_nominal_kbps(mid, rate_hz, channels) > kbps:
            lo_c = mid
        else:
            hi_c = mid
    return round((lo_c + hi_c) / 2, 4)


def _vorbis_nominal_kbps(level: float, rate_hz: int, channels: int) -> float:
    fd, path = tempfile.mkstemp(suffix=".ogg", prefix="dc-probe-")
    os.close(fd)
    try:
        with sf.SoundFile(path, "w", rate_hz, channels, "VORBIS", format="OGG",
                          compression_level=level) as f:  # fmt: skip
            f.write(np.zeros((64, channels)))
        with open(path, "rb") as fh:
            head = oggpages.read_head(fh, os.fstat(fh.fileno()).st_size, packets_wanted=1)
        ident = head.packets[0] if head.packets else b""
        return int.from_bytes(ident[20:24], "little", signed=True) / 1000.0
    finally:
        os.unlink(path)


def _remove(handle: sf.SoundFile | None, path: str) -> None:
    if handle is not None and not handle.closed:
        handle.close()
    if os.path.exists(path):
        os.unlink(path)


class RoundTrip:
    """Encodes the fed blocks; ``result()`` decodes them and measures what survived."""

    def __init__(self, info: StreamInfo, layout: Layout, options) -> None:
        self.codec, self.kbps = options.encode
        self.info, self.layout, self.options = info, layout, options
        self.note = unsupported(self.codec, info)
        self.path = ""
        self._out: sf.SoundFile | None = None
        if self.note is not None:
            return
        fmt, subtype, suffix, _ = CODECS[self.codec]
        fd, self.path = tempfile.mkstemp(suffix=suffix, prefix="dc-roundtrip-")
        os.close(fd)
        level = compression_level(self.codec, self.kbps, info.sample_rate_hz, info.channels)
        mode = "CONSTANT" if self.codec == "mp3" else None
        try:
            self._out = sf.SoundFile(self.path, "w", info.sample_rate_hz, info.channels,
                                     subtype, format=fmt, compression_level=level,
                                     bitrate_mode=mode)  # fmt: skip
        except (sf.LibsndfileError, RuntimeError, ValueError) as exc:
            self.note = f"libsndfile could not start the {self.codec} encoder: {exc}"
        self._cleanup = weakref.finalize(self, _remove, self._out, self.path)

    def feed(self, block: Block) -> None:
        if self._out is not None and block.frames:
            self._out.write(np.ascontiguousarray(block.x))

    def result(self) -> RoundTripResult:
        values: dict[str, Any] = dict.fromkeys(ROUNDTRIP_KEYS)
        values["encoded_codec"] = self.codec
        values["encoded_bit_rate_kbps"] = float(self.kbps)
        if self._out is None:
            values["encoded_note"] = self.note
            if self.path:
                self._cleanup()
            return RoundTripResult(values)
        try:
            self._out.close()
            values.update(self._measure_encoded())
        except Exception as exc:  # per-file problems are data, never a crash of the batch
            values["encoded_note"] = f"the round trip failed: {type(exc).__name__}: {exc}"
        finally:
            self._cleanup()
        return RoundTripResult(values)

    def _measure_encoded(self) -> dict[str, Any]:
        from checker.meters.loudness import LoudnessMeter
        from checker.meters.truepeak import TruePeakMeter

        info, blocks = read_blocks(self.path, self.options.block_frames)
        meters = [LoudnessMeter(info, self.layout, self.options),
                  TruePeakMeter(info, self.layout, self.options)]  # fmt: skip
        for block in blocks:
            for meter in meters:
                meter.feed(block)
        got: dict[str, Any] = {}
        for meter in meters:
            got.update(meter.result().to_dict())
        stream = read_lossy(self.path, info.subtype, info.container, info.sample_rate_hz,
                            info.channels, None)  # fmt: skip
        return {
            "encoded_encoder": stream.get("encoder"),
            "encoded_true_peak_dbtp": got.get("true_peak_dbtp"),
            "encoded_integrated_lufs": got.get("integrated_lufs"),
        }


def add_shifts(values: dict[str, Any]) -> None:
    """Encoded minus source, once both are measured (None when either is not finite)."""
    for enc, src, key in (
        ("encoded_true_peak_dbtp", "true_peak_dbtp", "encoded_true_peak_shift_db"),
        ("encoded_integrated_lufs", "integrated_lufs", "encoded_loudness_shift_lu"),
    ):
        if enc not in values:
            continue  # no round trip in this measurement
        a, b = values.get(enc), values.get(src)
        ok = all(isinstance(x, float) and math.isfinite(x) for x in (a, b))
        values[key] = round(a - b, 4) if ok else None


def round_trip_meters(info: StreamInfo, layout: Layout, options) -> list[RoundTrip]:
    """The round trip as an extra meter of the pass, when the options ask for one."""
    return [RoundTrip(info, layout, options)] if getattr(options, "encode", None) else []
