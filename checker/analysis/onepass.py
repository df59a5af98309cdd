"""One pass over a file: read each block once, feed every meter, assemble a Measurement."""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import replace
from typing import Any

import numpy as np

from checker.analysis.span import apply_span
from checker.dsp.threads import one_thread_pools
from checker.io.audio import MAX_SAMPLE_MAGNITUDE, Block, StreamInfo, out_of_range, read_blocks
from checker.io.carriers import add_player_loudness, read_carriers
from checker.io.containers import (
    ContainerLength,
    length_values,
    read_container_length,
    with_declared,
)
from checker.io.layout import (
    Layout,
    default_layout,
    layout_count,
    layout_from_mask,
    mask_disagreement,
    parse_layout,
)
from checker.io.lossy import finish_lossy, read_lossy
from checker.io.streamlength import FlacUnknownLength
from checker.io.wavchunks import WavHeader, empty_values, read_wav_header, with_header_findings
from checker.meters import meter_classes
from checker.meters.base import MeasureOptions
from checker.meters.blockwalk import BlockWalk
from checker.meters.roundtrip import add_shifts, round_trip_meters
from checker.model.errors import AudioReadError, UnsupportedAudioError
from checker.model.measurement import Measurement
from checker.model.serial import plain
from checker.model.timeline import build_timeline
from checker.model.units import UNIT_SUFFIXES


def resolve_layout(
    info: StreamInfo, options: MeasureOptions, header: WavHeader | None = None
) -> Layout:
    """Given layout, else the WAV channel mask (when usable), else the default map.

    A given layout with another channel count than the file is a usage error when
    ``options.layout_strict``; in a batch it applies only to files of its own count."""
    if options.layout and (options.layout_strict or layout_count(options.layout) == info.channels):
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


#: The note of a value that came out NaN or +inf (a guard: the meters should not produce one).
NOT_MEASURABLE = "not measurable: the arithmetic overflowed on these samples"

#: Values whose +inf has a meaning: the headroom of digital silence (the mirror of its
#: -inf sample peak, checker/meters/levels.py).
UNBOUNDED_OK = ("headroom_db",)

#: (true peak, sample peak, their time keys) of the same signal: the file and its downmix.
PEAK_PAIRS = (
    ("true_peak_dbtp", "sample_peak_dbfs", "true_peak_time_s", "sample_peak_time_s"),
    ("downmix_true_peak_dbtp", "downmix_sample_peak_dbfs", "", ""),
)

#: What a file with no frames is called, in its findings and in every undefined value's note.
NO_AUDIO = "no audio (0 frames)"


def stream_findings(info: StreamInfo, frames: int) -> list[str]:
    findings = []
    declared = info.frames_declared
    rate = info.sample_rate_hz
    if declared is not None and declared != frames:
        what = "truncated" if frames < declared else "longer than declared"
        findings.append(
            f"header declares {declared / rate:.3f} s ({declared} frames), "
            f"{frames / rate:.3f} s ({frames} frames) decoded: {what}"
        )
    if declared is None:
        findings.append(f"header gives no length; {frames / rate:.3f} s ({frames} frames) decoded")
    if frames == 0:
        findings.append(NO_AUDIO)
    return findings


#: WAVE format tags of uncompressed audio, whose 'data' size gives the frame count
#: (0x0001 PCM, 0x0003 IEEE float; Microsoft mmreg.h).
UNCOMPRESSED_TAGS = (0x0001, 0x0003)
#: Tags libsndfile 1.2 decodes inside WAV (PCM, float, A-law, mu-law, IMA/MS ADPCM,
#: GSM 6.10, G.721, MPEG layer III: soundfile.available_subtypes("WAV"); tag values
#: from mmreg.h, from memory), and WAVE_FORMAT_EXTENSIBLE.
DECODABLE_TAGS = (1, 3, 0x0006, 0x0007, 0x0011, 0x0002, 0x0031, 0x0040, 0x0055, 0xFFFE)


def _wav_tag(header: WavHeader) -> int | None:
    if header.format_tag == 0xFFFE:
        return header.subformat_tag
    return header.format_tag


def header_frames(header: WavHeader | None) -> int | None:
    """Frames the WAV 'data' chunk size declares (uncompressed formats only), else None.

    libsndfile clamps a truncated file's frame count to what is present and only
    logs it, so this is what "header declares" means for a WAV."""
    if header is None or _wav_tag(header) not in UNCOMPRESSED_TAGS:
        return None
    if not header.channels or not header.bits_per_sample:
        return None
    data = next((c for c in header.chunks if c.chunk_id == "data"), None)
    if data is None or data.size == 0xFFFFFFFF:
        return None
    return data.size // (header.channels * ((header.bits_per_sample + 7) // 8))


def check_header(path: str, info: StreamInfo, header: WavHeader | None) -> StreamInfo:
    """``info`` with the WAV header's frame count when it declares more than libsndfile
    reports (a truncated file); raises AudioReadError for a never-finalised header."""
    if header is None:
        return info
    chunks = list(header.chunks)
    data = next((c for c in chunks if c.chunk_id == "data"), None)
    if data is not None and data.size == 0:
        after = header.file_size - (data.offset + 8)
        # Audio bytes, not chunks, follow it: no chunk parsed after it, or only a bogus one.
        rest = chunks[chunks.index(data) + 1 :]
        if after > 0 and all(c.size > c.present for c in rest):
            raise AudioReadError(
                f"{path}: 'data' chunk size = 0 with {after} bytes after it (expected the "
                "size of the audio; the header was never finalised, e.g. a recorder that "
                "did not close the file)"
            )
    declared = header_frames(header)
    if declared is not None and (info.frames_declared is None or declared > info.frames_declared):
        return replace(info, frames_declared=declared)
    return info


def open_error(path: str, exc: AudioReadError) -> AudioReadError:
    """The open failure, naming an undecodable WAV format tag, plus the header's findings
    (the WAV header's, or another container's length findings)."""
    length = read_container_length(path)
    if length is not None and length.findings:
        return type(exc)(f"{exc}; header: {'; '.join(length.findings)}")
    header = read_wav_header(path)
    tag = _wav_tag(header) if header is not None else None
    if tag is not None and tag not in DECODABLE_TAGS and not isinstance(exc, UnsupportedAudioError):
        return UnsupportedAudioError(
            f"{path}: wav_format_tag = 0x{tag:04X} (expected a codec this reader decodes, "
            "e.g. 0x0001 PCM or 0x0003 float)"
        )
    return type(exc)(with_header_findings(path, str(exc)))


def _stat(path: str) -> tuple[int, int]:
    """(size, mtime in ns), or (-1, -1) when the file cannot be stat'ed."""
    try:
        st = os.stat(path)
    except OSError:
        return (-1, -1)
    return (st.st_size, st.st_mtime_ns)


def name_no_audio(values: dict[str, Any]) -> None:
    """A file without frames: every undefined value's note says so, instead of the meter's
    reason for a short file ("shorter than one 400 ms block")."""
    for key, value in values.items():
        if key.endswith("_note") and value and key != "container_intact_note":
            values[key] = NO_AUDIO


def has_nonfinite(block: Block) -> bool:
    """True when a float block holds NaN, Inf or an out-of-range sample."""
    return out_of_range(block)


def zero_nonfinite(block: Block) -> None:
    """Set NaN/Inf and out-of-range samples to 0 in place (the buffer is the reader's own,
    refilled on the next read), once, so every meter after the levels meter sees finite
    samples whose squares and sums cannot overflow."""
    np.copyto(block.x, 0.0, where=~(np.abs(block.x) <= MAX_SAMPLE_MAGNITUDE))


def guard_values(values: dict[str, Any]) -> None:
    """The last line of defence before values leave: true peak is never below sample peak
    (the interpolated signal passes through every sample), and no number is NaN or +inf
    (None with a note instead; -inf stays: digital silence; so does UNBOUNDED_OK's +inf)."""
    for tp_key, sp_key, tp_time, sp_time in PEAK_PAIRS:
        tp, sp = values.get(tp_key), values.get(sp_key)
        if isinstance(tp, float) and isinstance(sp, float) and math.isfinite(sp) and tp < sp:
            values[tp_key] = sp
            if tp_time in values and sp_time in values:
                values[tp_time] = values[sp_time]
    for key, value in list(values.items()):
        if key in UNBOUNDED_OK:
            continue
        if isinstance(value, float) and (math.isnan(value) or value == math.inf):
            values[key] = None
            stem = key.rsplit("_", 1)[0] if key.rsplit("_", 1)[-1] in UNIT_SUFFIXES else key
            values.setdefault(f"{stem}_note", None)
            values[f"{stem}_note"] = values[f"{stem}_note"] or NOT_MEASURABLE


#: ``on_frames(frames_done, sample_rate_hz)``: how far the pass has got (see measure()).
FramesCallback = Callable[[int, int], None]


def measure(
    path: str,
    options: MeasureOptions | None = None,
    *,
    read_ahead: bool = False,
    on_frames: FramesCallback | None = None,
) -> Measurement:
    """Measure one file in a single streaming pass. Raises AudioReadError.

    ``read_ahead``: decode in a second thread, overlapping the meters, and run the
    meters' prepare steps there (for a lone measurement with a core to spare; batch
    workers keep one thread each unless there are fewer files than jobs). The values are
    the same either way. Library thread pools (BLAS) run one thread meanwhile
    (checker/dsp/threads.py): parallelism is deliverycheck's own.

    ``on_frames(frames_done, sample_rate_hz)``: called in the calling thread after each
    block has been fed to every meter, with the frames measured so far: strictly
    increasing, the last call equals the file's decoded frames whatever the block size
    (a file with no frames gets one call with 0). A batch worker uses it for the progress
    line (checker/run/workers.py); it is not an option, so it never enters a cache key."""
    with one_thread_pools():
        return _measure_one(str(path), options or MeasureOptions(), read_ahead, on_frames)


def _measure_one(
    path: str, options: MeasureOptions, read_ahead: bool, on_frames: FramesCallback | None
) -> Measurement:
    before = _stat(str(path))
    length = read_container_length(str(path))  # AIFF, W64, AU, CAF, FLAC, Ogg; else None
    source = _unknown_length_view(str(path), length)
    try:
        return _measure(str(path), options, read_ahead, before, length, source, on_frames)
    finally:
        if source is not None:
            source.close()


def _unknown_length_view(path: str, length: ContainerLength | None) -> FlacUnknownLength | None:
    """A FLAC whose last frame header shows more frames than STREAMINFO declares is read
    with the total marked unknown: libsndfile stops at the declared total otherwise."""
    if length is None or length.kind != "FLAC" or length.frames_declared is None:
        return None
    if length.frames_held is None or length.frames_held <= length.frames_declared:
        return None
    try:
        return FlacUnknownLength(path)
    except OSError:
        return None


def _feed_all(
    blocks, meters: list, on_frames: FramesCallback | None = None, rate_hz: int = 0
) -> int:
    """Feed every block to every meter; the frames decoded. ``on_frames``: see measure()."""
    # Meters that count NaN/Inf (class attribute sees_nonfinite = True) get the untouched
    # block; every other meter then gets those samples as 0.
    counting = [m for m in meters if getattr(m, "sees_nonfinite", False)]
    others = [m for m in meters if not getattr(m, "sees_nonfinite", False)]
    frames = 0
    for block in blocks:
        frames += block.frames
        if has_nonfinite(block):
            for meter in counting:
                meter.feed(block)
            zero_nonfinite(block)
            for meter in others:
                meter.feed(block)
        else:
            for meter in meters:
                meter.feed(block)
        if on_frames is not None and block.frames:
            on_frames(frames, rate_hz)
    if on_frames is not None and frames == 0:
        on_frames(0, rate_hz)
    return frames


def _measure(
    path: str,
    options: MeasureOptions,
    read_ahead: bool,
    before: tuple[int, int],
    length: ContainerLength | None,
    source: FlacUnknownLength | None,
    on_frames: FramesCallback | None = None,
) -> Measurement:
    hooks: list = []  # the meters' prepare steps, filled once the meters exist
    walks: list = []  # the fused walk over integer PCM blocks, likewise
    try:
        info, blocks = read_blocks(
            path,
            options.block_frames,
            read_ahead=read_ahead,
            prepare=hooks,
            source=source,
            walk=walks,
        )
    except AudioReadError as exc:  # say what the header readers saw, if anything
        raise open_error(path, exc) from None
    header = read_wav_header(path)  # header only (seeks past the audio); None if not WAV
    info = with_declared(check_header(path, info, header), length)
    layout = resolve_layout(info, options, header)
    meters = [cls(info, layout, options) for cls in meter_classes()]
    meters += round_trip_meters(info, layout, options)  # only when a profile asks for one
    for meter in meters:  # meters that reuse another meter's records (speech: loudness)
        if hasattr(meter, "bind"):
            meter.bind(meters)
    # Meters with a prepare step (GIL-free compiled work on the block's own samples) have it
    # run as each block is decoded: in the read-ahead thread, overlapping the other meters.
    hooks.extend(m.prepare for m in meters if hasattr(m, "prepare"))
    # Integer PCM: deinterleaving, sample statistics, pair products, frame scan and
    # K-weighting in one compiled walk per block (checker/meters/blockwalk.py).
    if BlockWalk.fits(info):
        walks.append(BlockWalk(info, meters))
    try:
        frames = _feed_all(blocks, meters, on_frames, info.sample_rate_hz)
    except AudioReadError as exc:  # a cut FLAC loses sync at its end: say so
        if length is None or not length.findings:
            raise
        raise type(exc)(f"{exc}; header: {'; '.join(length.findings)}") from None
    values = stream_values(info, frames, layout)
    values.update(header.values() if header else empty_values())
    values.update(read_carriers(path, header))  # iXML, axml, Vorbis/Opus gain tags
    values.update(
        read_lossy(
            path, info.subtype, info.container, info.sample_rate_hz, info.channels, info.format_bits
        )
    )  # codec, bit rate, gapless
    finish_lossy(values, frames)
    findings = stream_findings(info, frames)
    container, container_findings = length_values(info, frames, length, header)
    values.update(container)
    findings.extend(container_findings)
    after = _stat(path)
    if after != before:
        findings.append(
            f"file changed while it was read (size {before[0]} -> {after[0]} bytes): "
            "measure it again once it is complete"
        )
    findings.extend(header.findings if header else ())
    if header is not None and layout.source == "given":
        findings.extend(mask_disagreement(header.channel_mask, layout))
    series: dict[str, Any] = {}
    for meter in meters:
        result = meter.result()
        values.update(result.to_dict())
        findings.extend(getattr(result, "findings", ()) or ())
        if hasattr(meter, "series"):
            series.update(meter.series())
    bext_ref = header.bext_time_reference_frames if header else None
    findings.extend(apply_span(values, meters, options, bext_ref))
    add_player_loudness(values)
    add_shifts(values)
    findings.extend(values["metadata_findings"])
    findings.extend(values["lossy_findings"])
    guard_values(values)
    if frames == 0:
        name_no_audio(values)
    return Measurement(
        path=path,
        values=plain(values),  # plain data; NaN would become None (plain maps it)
        timeline=build_timeline(series),
        findings=tuple(findings),
    )
