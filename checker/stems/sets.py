"""Set-level checks over a group of stem files plus an optional reference mix.

All stems (and the mix) are read in lockstep, one block of each per step, with
``checker.io.audio.read_blocks`` and the same block size, so block ``k`` of every
file starts at frame ``k * block_frames``. Per step the stems' blocks are
summed (a stem that has ended contributes nothing), and the sum feeds the sum
meters and the null test. Nothing kept grows with the length of the set.

What is measured (flat keys in ``SetMeasurement.values``):

- format: ``set_sample_rates_hz``, ``set_subtypes``, ``set_channel_counts``
  (one entry per stem, None for a stem that could not be read) and the mix's
  ``set_mix_*``; ``set_format_mismatch`` is True when any of the three differs
  among the stems or between the stems and the mix (``set_formats_match`` is
  its negation, for the profiles' must-be-true limit).
- length: ``set_length_frames`` (frames actually decoded, per stem),
  ``set_mix_length_frames``, ``set_length_mismatch_frames`` (longest minus
  shortest over stems and mix).
- start, for information: ``set_start_times_s`` is each stem's first frame
  with a non-zero sample (or, with ``start_threshold_dbfs``, the first at or
  above that level); ``set_content_start_times_s`` uses the options' silence
  threshold (-60 dBFS by default); ``set_start_offset_max_s`` is the spread
  of the starts (it counts arrangement too: a stem silent until the chorus).
- alignment (checker.stems.align): each stem's offset from the signal, by
  cross-correlation against the mix (or the other stems) within
  ``slip_window_s`` (default 0.1 s): ``set_stem_offsets_samples`` /
  ``set_stem_offsets_ms`` (positive: late), ``set_slipped_stems`` (only the
  stems that moved), ``set_slip_max_s`` (the scalar a profile limits) and
  ``set_slip_details`` (names and offsets, for the flag).
- peaks: ``set_stem_sample_peaks_dbfs`` and ``set_max_stem_sample_peak_dbfs``
  (each stem's true peak comes from its own per-file pass).
- sum: see checker.stems.mixsum; undefined (None, ``sum_note``) when the stems
  differ in sample rate or channel count.
- null test against the mix: see checker.stems.null for the method and the
  lag range; undefined (None, ``null_note``) without a usable mix.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from checker.analysis.onepass import FramesCallback, resolve_layout
from checker.io.audio import DEFAULT_BLOCK_FRAMES, Block, StreamInfo, read_blocks
from checker.io.intake import is_audio
from checker.meters.base import MeasureOptions
from checker.model.errors import AudioReadError
from checker.model.measurement import FlatValues, Measurement
from checker.model.serial import plain
from checker.model.verdict import ERROR, Verdict, worst_status
from checker.stems.align import SetAligner
from checker.stems.findings import findings
from checker.stems.mixsum import StemTracker, SumMeters, undefined_sum_values
from checker.stems.null import DEFAULT_MAX_LAG_SAMPLES, NullAccumulator

DEFAULT_SLIP_WINDOW_S = 0.1


@dataclass(frozen=True)
class StemSet:
    name: str
    folder: str
    stem_paths: tuple[str, ...]
    mix_path: str | None = None


def stem_set_from_folder(folder: str, mix_path: str | None = None) -> StemSet:
    """The audio files directly inside ``folder`` (not recursive), sorted by name.

    What is audio is decided by checker.io.intake.classify, the same function that
    decides which files a batch measures: every file it counts as audio is a stem
    (one it cannot read makes the set an error, never a smaller sum that passes);
    text, images, sidecars and ``._*`` resource forks are not. The mix is left out
    of the stems when it lies in the same folder. The set's name is the folder's name.
    """
    folder = os.path.abspath(folder)
    mix_real = os.path.realpath(mix_path) if mix_path else None
    stems = []
    for entry in sorted(os.scandir(folder), key=lambda e: e.name):
        if not entry.is_file() or not is_audio(entry.path):
            continue
        if mix_real and os.path.realpath(entry.path) == mix_real:
            continue
        stems.append(entry.path)
    return StemSet(os.path.basename(folder), folder, tuple(stems), mix_path)


@dataclass(frozen=True)
class SetMeasurement(FlatValues):
    """A stem set's flat values, plain-words findings and read errors."""

    path: str  # the set's folder
    name: str
    values: dict[str, Any]
    findings: tuple[str, ...] = field(default_factory=tuple)
    errors: tuple[str, ...] = field(default_factory=tuple)
    stem_paths: tuple[str, ...] = field(default_factory=tuple)
    mix_path: str | None = None

    def to_dict(self) -> dict[str, Any]:
        """Plain data (for the store); from_dict() reads it back."""
        return {
            "path": self.path,
            "name": self.name,
            "values": self.values,
            "findings": list(self.findings),
            "errors": list(self.errors),
            "stem_paths": list(self.stem_paths),
            "mix_path": self.mix_path,
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> SetMeasurement:
        return cls(
            path=d["path"],
            name=d["name"],
            values=dict(d["values"]),
            findings=tuple(d.get("findings") or ()),
            errors=tuple(d.get("errors") or ()),
            stem_paths=tuple(d.get("stem_paths") or ()),
            mix_path=d.get("mix_path"),
        )

    def as_measurement(self) -> Measurement:
        """The same values as a Measurement, for rules, the store and the reports."""
        findings = tuple(self.errors) + tuple(self.findings)
        return Measurement(path=self.path, values=dict(self.values), findings=findings)


def set_file_result(sm: SetMeasurement, verdict: Verdict):
    """The set's own report row: FileResult(kind="set", path=folder, group=name)."""
    from checker.model.results import FileResult

    status = worst_status([verdict.status] + ([ERROR] if sm.errors else []))
    return FileResult(
        path=sm.path,
        status=status,
        measurement=sm.as_measurement(),
        verdict=verdict,
        error="; ".join(sm.errors) or None,
        kind="set",
        group=sm.name,
    )


def evaluate_set(sm: SetMeasurement, profile):
    """Evaluate the set's values with the profile's generic limits (checker.judge.rules)."""
    from checker.judge import rules

    return set_file_result(sm, rules.evaluate(sm.as_measurement(), profile))


def check_stem_set(
    stem_paths: list[str],
    mix_path: str | None,
    options: MeasureOptions | None = None,
    *,
    name: str | None = None,
    folder: str | None = None,
    max_lag_samples: int = DEFAULT_MAX_LAG_SAMPLES,
    slip_window_s: float = DEFAULT_SLIP_WINDOW_S,
    start_threshold_dbfs: float | None = None,
    on_frames: FramesCallback | None = None,
) -> SetMeasurement:
    """Check a stem set in one lockstep pass. Unreadable files become errors, never raise.

    ``on_frames(frames_done, sample_rate_hz)``: called after each lockstep step with the
    frames read so far (the longest file's position; the rate of the first readable stem,
    else the mix's, else 0): strictly increasing, the last call equals the longest
    decoded length of the stems and the mix whatever the block size (a set with no frames
    gets one call with 0), as measure()'s. For a progress line (checker/run/stemsets.py);
    the values do not depend on it."""
    options = options or MeasureOptions()
    stem_paths = [str(p) for p in stem_paths]
    if folder is None:
        dirs = [os.path.dirname(os.path.abspath(p)) for p in stem_paths]
        folder = os.path.commonpath(dirs) if dirs else os.getcwd()
    name = name or os.path.basename(folder)
    names = [os.path.basename(p) for p in stem_paths]
    errors: list[str] = []
    if not stem_paths:
        errors.append(f"{folder}: stems = 0 (expected at least one audio file in the set)")
    start_threshold = -float("inf") if start_threshold_dbfs is None else start_threshold_dbfs

    def open_one(label: str, path: str, threshold: float):
        try:
            # One block size for every file of the set: they are read in lockstep.
            info, blocks = read_blocks(path, options.block_frames or DEFAULT_BLOCK_FRAMES)
        except AudioReadError as exc:
            errors.append(f"{label}: {exc}")
            return None
        tracker = StemTracker(label, info, threshold, options.silence_threshold_dbfs)
        return _Source(label, blocks, tracker)

    stems = [
        open_one(f"stem {n}", p, start_threshold) for n, p in zip(names, stem_paths, strict=True)
    ]
    mix = open_one("mix", str(mix_path), start_threshold) if mix_path else None
    readable = [s for s in stems if s is not None]
    try:
        sum_reason = _sum_problem(readable)
        null_reason = _null_problem(readable, mix, mix_path, sum_reason)
        sum_meters = null = None
        if sum_reason is None:
            info0 = readable[0].tracker.info
            sum_info = StreamInfo(
                path=f"{name} (sum of stems)",
                container="SUM",
                subtype="DOUBLE",
                sample_rate_hz=info0.sample_rate_hz,
                channels=info0.channels,
                frames_declared=None,
            )
            sum_meters = SumMeters(sum_info, resolve_layout(info0, options), options)
        if null_reason is None:
            null = NullAccumulator(readable[0].tracker.info.channels, max_lag_samples)
        aligner = SetAligner.make(readable, mix, sum_reason, null_reason, slip_window_s)
        _run(readable, mix, sum_meters, null, aligner, on_frames)
    finally:
        for s in readable + ([mix] if mix else []):
            s.close()
    for s in readable + ([mix] if mix else []):
        if s.tracker.error:
            errors.append(s.tracker.error)

    values = _set_values(stems, mix, names)
    values.update(SetAligner.values(aligner, stems, names, sum_reason, slip_window_s))
    values.update(sum_meters.values() if sum_meters else undefined_sum_values(sum_reason))
    values.setdefault("sum_note", None)
    if null is not None:
        values.update(null.result().to_dict())
    else:
        values.update(
            null_residual_db=None,
            null_fit_gain_db=None,
            null_fit_offset_samples=None,
            null_fit_inverted=None,
            null_fit_residual_db=None,
            null_max_lag_samples=max_lag_samples,
            null_note=null_reason,
        )
    values["set_unreadable_stems"] = [n for n, s in zip(names, stems, strict=True) if s is None]
    values = plain(values)
    return SetMeasurement(
        path=folder,
        name=name,
        values=values,
        findings=tuple(findings(values, names)),
        errors=tuple(errors),
        stem_paths=tuple(stem_paths),
        mix_path=str(mix_path) if mix_path else None,
    )


class _Source:
    """One open file of the set: its block iterator and its tracker."""

    def __init__(self, label: str, blocks: Iterator[Block], tracker: StemTracker):
        self.label = label
        self.blocks = blocks
        self.tracker = tracker
        self.alive = True

    def next(self) -> Block | None:
        if not self.alive:
            return None
        try:
            block = next(self.blocks)
        except StopIteration:
            self.alive = False
            return None
        except AudioReadError as exc:
            self.alive = False
            self.tracker.error = f"{self.label}: {exc}"
            return None
        self.tracker.feed(block)
        return block

    def close(self) -> None:
        close = getattr(self.blocks, "close", None)
        if close:
            close()


def _sum_problem(stems: list[_Source]) -> str | None:
    if not stems:
        return "no stem could be read"
    rates = {s.tracker.info.sample_rate_hz for s in stems}
    chans = {s.tracker.info.channels for s in stems}
    if len(rates) > 1:
        return "the stems differ in sample rate: no sum"
    if len(chans) > 1:
        return "the stems differ in channel count: no sum"
    return None


def _null_problem(stems, mix, mix_path, sum_reason) -> str | None:
    if not mix_path:
        return "no reference mix given"
    if mix is None:
        return "the reference mix could not be read"
    if sum_reason:
        return sum_reason
    s, m = stems[0].tracker.info, mix.tracker.info
    if m.sample_rate_hz != s.sample_rate_hz:
        return "the mix and the stems differ in sample rate: no null test"
    if m.channels != s.channels:
        return "the mix and the stems differ in channel count: no null test"
    return None


def _run(
    stems: list[_Source],
    mix: _Source | None,
    sum_meters,
    null,
    aligner=None,
    on_frames: FramesCallback | None = None,
) -> None:
    """The lockstep loop: one block of every file per step."""
    channels = stems[0].tracker.info.channels if stems else 1
    first = stems[0] if stems else mix
    rate_hz = first.tracker.info.sample_rate_hz if first is not None else 0
    pos = 0
    while True:
        each = [s.next() for s in stems]
        blocks = [b for b in each if b is not None]
        mix_block = mix.next() if mix else None
        n = max([b.frames for b in blocks] + [mix_block.frames if mix_block else 0])
        if n == 0:
            if on_frames is not None and pos == 0:
                on_frames(0, rate_hz)
            return
        if aligner is not None:
            aligner.feed(each, mix_block, n)
        if sum_meters is not None:
            width = max((b.frames for b in blocks), default=0)
            total = np.zeros((width, channels))
            for b in blocks:
                total[: b.frames] += b.x
            sum_meters.feed(total, pos)
            if null is not None:
                m = mix_block.x if mix_block is not None else np.zeros((0, channels))
                null.feed(m, total)
        pos += n
        if on_frames is not None:
            on_frames(pos, rate_hz)


def _set_values(stems, mix, names) -> dict[str, Any]:
    def each(fn):
        return [None if s is None else fn(s) for s in stems]

    readable = [s for s in stems if s is not None]
    v: dict[str, Any] = {"set_stem_count": len(stems), "set_stem_names": names}
    v["set_sample_rates_hz"] = each(lambda s: s.tracker.info.sample_rate_hz)
    v["set_subtypes"] = each(lambda s: s.tracker.info.subtype)
    v["set_channel_counts"] = each(lambda s: s.tracker.info.channels)
    mi = mix.tracker.info if mix else None
    v["set_mix_sample_rate_hz"] = mi.sample_rate_hz if mi else None
    v["set_mix_subtype"] = mi.subtype if mi else None
    v["set_mix_channels"] = mi.channels if mi else None
    every = readable + ([mix] if mix else [])
    v["set_format_mismatch"] = any(
        len({key(s.tracker.info) for s in every}) > 1
        for key in (
            lambda i: i.sample_rate_hz,
            lambda i: i.subtype,
            lambda i: i.channels,
        )
    )
    v["set_formats_match"] = not v["set_format_mismatch"]
    v["set_length_frames"] = each(lambda s: s.tracker.frames)
    v["set_mix_length_frames"] = mix.tracker.frames if mix else None
    lengths = [s.tracker.frames for s in every]
    v["set_length_mismatch_frames"] = max(lengths) - min(lengths) if lengths else None

    # first non-zero sample, or first at start_threshold_dbfs when given
    starts = each(lambda s: s.tracker.first_start)
    v["set_start_times_s"] = [
        None if f is None else f / s.tracker.info.sample_rate_hz
        for f, s in zip(starts, stems, strict=True)
    ]
    v["set_content_start_times_s"] = each(
        lambda s: (
            None
            if s.tracker.first_content is None
            else s.tracker.first_content / s.tracker.info.sample_rate_hz
        )
    )
    defined = [t for t in v["set_start_times_s"] if t is not None]
    v["set_start_offset_max_s"] = max(defined) - min(defined) if len(defined) >= 2 else None
    v["set_start_offset_max_note"] = (
        None if len(defined) >= 2 else "fewer than two stems have content"
    )
    v["set_stem_sample_peaks_dbfs"] = each(lambda s: s.tracker.peak_dbfs)
    peaks = [s.tracker.peak_dbfs for s in readable]
    v["set_max_stem_sample_peak_dbfs"] = max(peaks) if peaks else None
    return v
