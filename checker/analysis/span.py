"""The programme span and its parts, from the meters' per-100 ms records after the pass.

By default the whole file is the programme. ``MeasureOptions.span = "auto"`` looks for a
head and a tail made of line-up tone and silence (docs/standards.md#programme-structure);
``span_in`` / ``span_out`` set the points in seconds or as timecode relative to the WAV
bext time reference. Span edges fall on the 100 ms step grid of the loudness meter (an
explicit point goes to the nearest step boundary). Every loudness and peak value then
describes the span; the whole file's integrated loudness, true peak and sample peak stay
as ``file_*`` keys. ``break_min_s`` splits the span into parts at breaks (100 ms steps
below the absolute gate, -70 LUFS, or digital silence, for at least that long).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from checker.meters.base import MeasureOptions
from checker.meters.loudness import HOP_S
from checker.meters.steprecords import StepRecords, span_peaks, step_boundary
from checker.model import units

#: A sine's crest factor (peak over RMS), 20 log10(sqrt 2) dB; a step is tone-like within
#: TONE_CREST_TOLERANCE_DB of it (project choice: noise and programme sit far above).
SINE_CREST_DB = 3.0103
TONE_CREST_TOLERANCE_DB = 0.5
#: Consecutive tone steps belong to one tone when their level stays within this (dB) and
#: their crossing count within TONE_COUNT_TOLERANCE (relative) of the run's first step.
TONE_STEADY_DB = 0.5
TONE_COUNT_TOLERANCE = 0.03
#: A head or tail tone lasts at least this long (project choice: line-up runs for tens of
#: seconds; a sustained note in the programme would rarely be this steady for a second).
TONE_MIN_S = 1.0
#: Breaks between parts: a 100 ms step quieter than the absolute gate (BS.1770-4).
BREAK_LUFS = units.ABSOLUTE_GATE_LUFS

TIMECODE = re.compile(r"^(\d{1,2}):(\d{2}):(\d{2})[:](\d{2})$")


@dataclass
class Span:
    first: int  # first 100 ms step of the programme
    stop: int  # one past its last step
    source: str  # "whole file" | "detected" | "given"
    values: dict[str, Any] = field(default_factory=dict)
    findings: list[str] = field(default_factory=list)


def point_seconds(text: str, fps: float | None, bext_ref: int | None, rate: int) -> float:
    """Seconds from the file's start of an in/out point: "12.5" (seconds) or "HH:MM:SS:FF"
    (timecode at ``fps``, relative to the bext time reference ``bext_ref`` in samples since
    midnight). Raises ValueError saying what is missing."""
    m = TIMECODE.match(text.strip())
    if m is None:
        try:
            seconds = float(text)
        except ValueError:
            raise ValueError(
                f"point = {text!r} (expected seconds such as 12.5 or timecode HH:MM:SS:FF)"
            ) from None
        if not math.isfinite(seconds) or seconds < 0:
            raise ValueError(f"point = {text!r} (expected seconds >= 0)")
        return seconds
    if fps is None:
        raise ValueError(f"point = {text!r} is timecode (expected a frame rate: timecode_fps)")
    h, mi, s, f = (int(g) for g in m.groups())
    nominal = round(fps)
    if mi > 59 or s > 59 or f >= nominal:
        raise ValueError(f"point = {text!r} (expected minutes, seconds < 60, frames < {nominal})")
    if bext_ref is None:
        raise ValueError(
            f"point = {text!r} is timecode, but the file has no bext time reference "
            "(expected a Broadcast WAV file)"
        )
    # Timecode counts frames at the nominal rate; at 29.97 / 23.976 a frame lasts 1/fps s.
    frames = ((h * 60 + mi) * 60 + s) * nominal + f
    return frames / fps - bext_ref / rate


def _nearest_step(seconds: float, rate: int) -> int:
    return int(round(seconds / HOP_S))


def _tone_steps(rec: StepRecords) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Per step: (tone-like, level dB of the loudest channel's power, its crossings,
    largest |sample| of any channel)."""
    loud = np.argmax(rec.sumsq, axis=1) if rec.sumsq.size else np.zeros(0, dtype=np.int64)
    idx = np.arange(rec.steps)
    power = rec.sumsq[idx, loud] / np.maximum(rec.frames, 1)
    peak = rec.peak[idx, loud]
    with np.errstate(divide="ignore"):
        level = 10.0 * np.log10(power)
        crest = 20.0 * np.log10(np.where(power > 0, peak, 1.0)) - level
    ups = rec.crossings[idx, loud]
    tone = (power > 0) & (np.abs(crest - SINE_CREST_DB) <= TONE_CREST_TOLERANCE_DB) & (ups >= 2)
    return tone, level, ups.astype(np.float64), rec.peak.max(axis=1, initial=0.0)


def _runs(tone: np.ndarray, level: np.ndarray, ups: np.ndarray, i: int, step: int) -> int:
    """Length of the steady tone run starting at step i going in direction ``step``."""
    n = tone.size
    k = i
    while 0 <= k < n and tone[k]:
        if abs(level[k] - level[i]) > TONE_STEADY_DB:
            break
        if abs(ups[k] - ups[i]) > max(2.0, TONE_COUNT_TOLERANCE * ups[i]):
            break
        k += step
    return abs(k - i)


def _edge(rec: StepRecords, quiet_amp: float, step: int) -> tuple[int, list[tuple[int, int]]]:
    """Scan from the start (step = 1) or the end (step = -1): (steps in the head or tail,
    its tone runs as (first, stop) step ranges)."""
    tone, level, ups, peak_all = _tone_steps(rec)
    n = rec.steps
    quiet = peak_all <= quiet_amp
    min_steps = math.ceil(TONE_MIN_S / HOP_S)
    runs: list[tuple[int, int]] = []
    i = 0 if step == 1 else n - 1
    while 0 <= i < n:
        if quiet[i]:
            i += step
            continue
        # a step straddling silence and tone: let the tone run start after it
        j = i
        if not tone[i] and 0 <= i + step < n and tone[i + step]:
            j = i + step
        length = _runs(tone, level, ups, j, step)
        if length < min_steps:
            break
        end = j + step * length  # first step after the run
        run_peak = float(peak_all[j])
        if j != i and peak_all[i] > run_peak * 1.06:
            break  # the straddling step holds more than tone
        # a step straddling the tone's end and silence (or the file's edge)
        if 0 <= end < n and not quiet[end] and peak_all[end] <= run_peak * 1.06:
            after = end + step
            if not 0 <= after < n or quiet[after]:
                end = after
        lo, hi = (i, end) if step == 1 else (end + 1, i + 1)
        runs.append((lo, hi))
        i = end
    head = i if step == 1 else n - 1 - i
    return max(head, 0), runs


def _tone_values(rec: StepRecords, runs: list[tuple[int, int]]) -> dict[str, Any]:
    """Frequency and level of the longest tone run (its loudest channel): frequency from
    the upward zero crossings over the run (+-1 crossing over its length), level as the
    sine's peak level (AES17: RMS + 3.01 dB)."""
    a, b = max(runs, key=lambda r: r[1] - r[0])
    core = slice(a + 1, b - 1) if b - a > 4 else slice(a, b)  # edges may be partial steps
    sq = rec.sumsq[core].sum(axis=0)
    c = int(np.argmax(sq))
    frames = float(rec.frames[core].sum())
    power = float(sq[c]) / frames
    hz = float(rec.crossings[core, c].sum()) * rec.rate_hz / frames
    return {
        "lineup_tone_hz": hz,
        "lineup_tone_dbfs": units.power_to_db(power) + SINE_CREST_DB,
        "lineup_tone_s": float(sum(rec.frames[x:y].sum() for x, y in runs)) / rec.rate_hz,
    }


def resolve_span(
    options: MeasureOptions, rec: StepRecords, bext_ref: int | None, quiet_dbfs: float
) -> Span:
    """Where the programme lies, from the options and the records."""
    n = rec.steps
    rate = rec.rate_hz
    span = Span(0, n, "whole file")
    tone_keys = {"lineup_tone_hz": None, "lineup_tone_dbfs": None, "lineup_tone_s": None}
    span.values.update(tone_keys, tail_tone_s=None)
    if options.span == "auto" and n:
        amp = units.db_to_amplitude(quiet_dbfs)
        head, head_runs = _edge(rec, amp, 1)
        tail, tail_runs = _edge(rec, amp, -1)
        if head + tail < n:
            span.first, span.stop, span.source = head, n - tail, "detected"
            if head_runs:
                span.values.update(_tone_values(rec, head_runs))
            if tail_runs:
                span.values["tail_tone_s"] = (
                    float(sum(rec.frames[x:y].sum() for x, y in tail_runs)) / rate
                )
        else:
            span.findings.append(
                "programme span: the whole file looks like line-up tone and silence; "
                "measured the whole file"
            )
        if span.values["lineup_tone_hz"] is None:
            span.values["lineup_tone_note"] = "no line-up tone found in the head"
    for which, text in (("in", options.span_in), ("out", options.span_out)):
        if not text:
            continue
        try:
            seconds = point_seconds(text, options.timecode_fps, bext_ref, rate)
        except ValueError as exc:
            span.findings.append(f"programme {which} {exc}; measured without it")
            continue
        total = float(rec.frames.sum()) / rate
        if seconds > total:
            span.findings.append(
                f"programme {which} point {text} lies {seconds:.3f} s into a {total:.3f} s file"
                + ("; measured without it" if which == "in" else "; measured to the end")
            )
            if which == "in":
                continue
        k = min(max(_nearest_step(seconds, rate), 0), n)
        if which == "in":
            span.first = k
        else:
            span.stop = k
        span.source = "given"
    if span.stop <= span.first:
        span.findings.append(
            f"programme span: in point {span.first * HOP_S:.1f} s is not before out point "
            f"{span.stop * HOP_S:.1f} s; measured the whole file"
        )
        span.first, span.stop, span.source = 0, n, "whole file"
    return span


def step_seconds(rec: StepRecords, k: int) -> float:
    return float(min(step_boundary(k, rec.rate_hz), int(rec.frames.sum()))) / rec.rate_hz


def split_parts(
    step_powers: np.ndarray, rec: StepRecords, first: int, stop: int, break_min_s: float
) -> list[tuple[int, int]]:
    """Parts of steps [first, stop): stretches between breaks (at least ``break_min_s`` of
    steps below the absolute gate or digitally silent)."""
    n = min(stop, rec.steps)
    power = np.zeros(rec.steps)
    m = min(step_powers.size, rec.steps)
    power[:m] = step_powers[:m]
    quiet = (units.powers_to_lufs(power) <= BREAK_LUFS) | (rec.peak.max(axis=1, initial=0) == 0)
    need = max(1, math.ceil(break_min_s / HOP_S - 1e-9))
    parts: list[tuple[int, int]] = []
    start = None
    k = first
    while k < n:
        if not quiet[k]:
            start = k if start is None else start
            k += 1
            continue
        e = k
        while e < n and quiet[e]:
            e += 1
        if start is not None and (e - k >= need or e == n):
            parts.append((start, k))  # a break, or quiet up to the span's end
            start = None
        k = e
    if start is not None:
        parts.append((start, n))
    return parts


def span_note(span: Span, rec: StepRecords) -> str | None:
    """The excluded head and tail in words, or None for the whole file."""
    if span.source == "whole file":
        return None
    start, end = step_seconds(rec, span.first), step_seconds(rec, span.stop)
    total = step_seconds(rec, rec.steps)
    pieces = []
    if span.first > 0:
        what = ""
        if span.values.get("lineup_tone_s"):
            what = (
                f" ({span.values['lineup_tone_s']:.1f} s of "
                f"{span.values['lineup_tone_hz']:.0f} Hz line-up tone at "
                f"{span.values['lineup_tone_dbfs']:.1f} dBFS, and silence)"
            )
        pieces.append(f"head 0.0-{start:.1f} s{what}")
    if span.stop < rec.steps:
        what = ""
        if span.values.get("tail_tone_s"):
            what = f" ({span.values['tail_tone_s']:.1f} s of tone, and silence)"
        pieces.append(f"tail {end:.1f}-{total:.1f} s{what}")
    excluded = " and ".join(pieces) if pieces else "nothing"
    return (
        f"programme span {start:.1f}-{end:.1f} s ({span.source}); {excluded} excluded from "
        "loudness and peak values (file_* keys: the whole file)"
    )


def apply_span(
    values: dict[str, Any], meters: list, options: MeasureOptions, bext_ref: int | None
) -> list[str]:
    """Replace the loudness and peak values by the span's and add the span and parts keys;
    returns findings. A no-op unless the options ask for a span or parts."""
    if not options.keeps_step_records:
        return []
    by_name = {type(m).__name__: m for m in meters}
    loud, tp, lev = by_name["LoudnessMeter"], by_name["TruePeakMeter"], by_name["LevelsMeter"]
    rec = lev.steps.records()
    span = resolve_span(options, rec, bext_ref, options.silence_threshold_dbfs)
    findings = list(span.findings)
    values.update(span.values)
    values["file_integrated_lufs"] = values.get("integrated_lufs")
    values["file_true_peak_dbtp"] = values.get("true_peak_dbtp")
    values["file_sample_peak_dbfs"] = values.get("sample_peak_dbfs")
    values["programme_start_s"] = step_seconds(rec, span.first)
    values["programme_end_s"] = step_seconds(rec, span.stop)
    values["programme_span_source"] = span.source
    note = span_note(span, rec)
    values["programme_span_note"] = note
    if note:
        findings.append(note)
        first_frame = int(step_boundary(span.first, rec.rate_hz))
        stop_frame = int(min(step_boundary(span.stop, rec.rate_hz), rec.frames.sum()))
        values.update(loud.span_values(span.first, span.stop))
        values.update(tp.span_values(first_frame, stop_frame))
        values.update(span_peaks(rec, span.first, span.stop))
        if "SpeechMeter" in by_name:
            values.update(by_name["SpeechMeter"].span_values(span.first, span.stop))
        if "DownmixMeter" in by_name:
            down = by_name["DownmixMeter"].span_values(
                span.first, span.stop, first_frame, stop_frame
            )
            values.update(down)
    if options.break_min_s:
        values["parts"] = part_values(loud, tp, rec, span, options.break_min_s)
        values["parts_count"] = len(values["parts"])
    return findings


def part_values(loud, tp, rec: StepRecords, span: Span, break_min_s: float) -> list[dict]:
    """One plain dict per part: its time range, integrated loudness, maximum short-term
    loudness, true peak and sample peak (each part measured like a programme)."""
    out = []
    ranges = split_parts(loud.step_powers(), rec, span.first, span.stop, break_min_s)
    for i, (a, b) in enumerate(ranges, start=1):
        lv = loud.span_values(a, b)
        first_frame = int(step_boundary(a, rec.rate_hz))
        stop_frame = int(min(step_boundary(b, rec.rate_hz), rec.frames.sum()))
        peaks = tp.span_values(first_frame, stop_frame)
        out.append(
            {
                "part": i,
                "start_s": step_seconds(rec, a),
                "end_s": step_seconds(rec, b),
                "duration_s": step_seconds(rec, b) - step_seconds(rec, a),
                "integrated_lufs": lv["integrated_lufs"],
                "integrated_note": lv["integrated_note"],
                "max_short_term_lufs": lv["max_short_term_lufs"],
                "true_peak_dbtp": peaks["true_peak_dbtp"],
                "true_peak_note": peaks["true_peak_note"],
                "sample_peak_dbfs": span_peaks(rec, a, b)["sample_peak_dbfs"],
            }
        )
    return out


__all__ = [
    "Span",
    "apply_span",
    "point_seconds",
    "resolve_span",
    "span_note",
    "split_parts",
    "step_seconds",
]
