"""The meter protocol shared by every streaming meter.

A meter is built once per file with the stream's facts and the options, is fed
every block in order, and gives one result at the end:

    meter = SomeMeter(info, layout, options)
    for block in blocks:
        meter.feed(block)        # Block: x (frames, channels) float64, raw int32|None, start
    result = meter.result()      # has .to_dict() -> flat {unit_suffixed_name: value}

Optional ``prepare(block)``: measure() calls it on every block, in order, as soon as the
block is decoded, before any feed() of that block; with read-ahead that happens in the
reader thread, one block ahead of feed(). It may only do work on the block's own samples
and on state that nothing else touches (e.g. the K-weighting filter state), should be
GIL-free compiled work (else it only moves time between threads), and leaves its results
in ``block.memo`` for feed(); feed() must give the same result when prepare() never ran.

Rules every meter follows (tested for each one):
- feed() accepts any frame count, including 0, and results do not depend on how
  the signal was split into blocks (exact for peaks and counts, ~1e-9 for sums).
- Blocks are views of a reused read buffer: copy anything kept past feed().
- Memory grows at most by one small record per 100 ms of audio.
- No Python loop over samples; vectorise within the block.
- result() does not change state and never returns NaN: undefined values are
  None (with a reason in a *_note field where useful); silence levels are -inf.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Protocol

from checker.io.audio import Block, StreamInfo
from checker.io.layout import Layout


@dataclass(frozen=True)
class MeasureOptions:
    #: Frames per block; None: automatic (checker.io.audio.auto_block_frames). Values do not
    #: depend on it beyond rounding.
    block_frames: int | None = None
    #: Explicit channel layout ("L R C LFE Ls Rs"); None = from file or assumed.
    layout: str | None = None
    #: False (batches): ``layout`` applies only to files with as many channels as it names,
    #: other files keep their own layout. True (``measure`` of named files): a file with
    #: another channel count is a usage error.
    layout_strict: bool = True
    #: True-peak overs are counted above this ceiling.
    true_peak_ceiling_dbtp: float = -1.0
    #: Clipped run: at least this many consecutive samples at full scale (common practice: 3).
    clip_run_min_samples: int = 3
    #: Leading/trailing silence threshold (common practice: -60 dBFS).
    silence_threshold_dbfs: float = -60.0
    #: Mid-file digital-zero dropouts shorter than this are ignored (common practice: 10 ms).
    dropout_min_s: float = 0.010
    #: How many first positions to keep for overs, clips, dropouts.
    max_positions: int = 10
    #: Encode round trip (codec, kbit/s) asked for by a profile's [encode] section, or None
    #: (checker.meters.roundtrip; part of the store's cache key like every option).
    encode: tuple[str, float] | None = None
    #: Speech-gated loudness (checker/meters/speech.py): off by default, it costs several
    #: times the rest of the analysis; on for `measure --speech` and profiles with a speech
    #: limit. Off adds no keys, so stored measurements without it stay valid.
    speech: bool = False
    #: The programme span (checker/analysis/span.py): "auto" (detect a head and tail of
    #: line-up tone and silence), or None (the whole file, unless in/out points are given).
    span: str | None = None
    #: Explicit in and out points: seconds ("12.5") or timecode ("10:00:00:00", relative to
    #: the WAV bext time reference, at ``timecode_fps``); None: the file's start / end.
    span_in: str | None = None
    span_out: str | None = None
    timecode_fps: float | None = None
    #: Parts: a break is at least this long below the absolute gate (or digital silence);
    #: None: no split into parts.
    break_min_s: float | None = None

    @property
    def keeps_step_records(self) -> bool:
        """Meters keep per-100 ms / per-chunk records for a span or parts."""
        return bool(self.span or self.span_in or self.span_out or self.break_min_s)


class MeterResult(Protocol):
    def to_dict(self) -> dict[str, Any]: ...


class Meter(Protocol):
    def __init__(self, info: StreamInfo, layout: Layout, options: MeasureOptions) -> None: ...

    def feed(self, block: Block) -> None: ...

    def result(self) -> MeterResult: ...
