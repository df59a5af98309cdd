"""``deliverycheck measure FILE... [--json]``: measure files, no profile."""

from __future__ import annotations

import argparse
import math
import os
from typing import TextIO

from checker.cli.spanargs import add_span_arguments, span_settings
from checker.model.errors import EXIT_OK, EXIT_UNCHECKED, CheckerError
from checker.model.names import for_terminal, readable_data
from checker.run import live
from checker.run.progress import Progress
from checker.run.workerproc import probe_duration_s

# The engine (checker.analysis.onepass, numpy, soundfile) is imported in run(): building the
# parser, for --help or another command, must not load it (README, Speed: start-up).


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        "measure",
        help="measure files (loudness, peaks, levels) without judging them",
        description="Measure each file once and print the results.",
    )
    p.add_argument("files", nargs="+", metavar="FILE")
    p.add_argument("--json", action="store_true", help="one JSON object per file per line")
    p.add_argument(
        "--timeline", action="store_true", help="with --json: include the loudness timeline"
    )
    p.add_argument(
        "--speech",
        action="store_true",
        help="also measure speech-gated loudness (speech_lufs, speech_share; several times slower)",
    )
    p.add_argument(
        "--quiet",
        action="store_true",
        help="no progress line on stderr (else redrawn on a terminal, every few seconds in a log)",
    )
    p.add_argument("--layout", help='channel layout, e.g. "L R C LFE Ls Rs" (default: from file)')
    add_span_arguments(p)
    # None: MeasureOptions' automatic block size (checker.io.audio.auto_block_frames)
    p.add_argument("--block-frames", type=int, default=None, help=argparse.SUPPRESS)
    return p


def _fmt(value) -> str:
    if value is None:
        return "-"
    if isinstance(value, float):
        if math.isinf(value):
            return "-inf" if value < 0 else "inf"
        return f"{value:.2f}"
    if isinstance(value, list):
        return "[" + ", ".join(_fmt(v) for v in value) + "]"
    return str(value)


def part_line(part: dict) -> str:
    """One programme part in words (checker/analysis/span.py)."""
    return (
        f"part {part['part']}: {_fmt(part['start_s'])}-{_fmt(part['end_s'])} s, integrated "
        f"{_fmt(part['integrated_lufs'])} LUFS, max short-term {_fmt(part['max_short_term_lufs'])}"
        f" LUFS, true peak {_fmt(part['true_peak_dbtp'])} dBTP"
    )


SUMMARY_KEYS = (
    "duration_s",
    "sample_rate_hz",
    "subtype",
    "channel_layout",
    "integrated_lufs",
    "integrated_dual_mono_lufs",
    "loudness_range_lu",
    "max_momentary_lufs",
    "max_short_term_lufs",
    "true_peak_dbtp",
    "sample_peak_dbfs",
    "speech_lufs",
    "speech_share",
    "speech_to_programme_lu",
    "speech_note",
    "programme_start_s",
    "programme_end_s",
    "lineup_tone_hz",
    "lineup_tone_dbfs",
    "lineup_tone_s",
    "file_integrated_lufs",
    "file_true_peak_dbtp",
    "parts_count",
)


def run(args, out: TextIO, err: TextIO) -> int:
    from checker.meters.base import MeasureOptions

    prog = span_settings(args)
    options = MeasureOptions(
        block_frames=args.block_frames,
        layout=args.layout,
        speech=args.speech,
        span="auto" if prog.get("span") == "auto" else None,
        span_in=prog.get("in_point"),
        span_out=prog.get("out_point"),
        timecode_fps=prog.get("timecode_fps"),
        break_min_s=prog.get("break_min_s"),
    )
    status = EXIT_OK
    # The batch's line (checker.run.progress): files, seconds of audio, also within a file.
    progress = Progress(err, quiet=args.quiet, verbs=("measuring", "measured"), summary=False)
    for index, path in enumerate(args.files):
        progress.audio.plan(index, _size_bytes(path))
    progress.start(len(args.files))
    try:
        for index, path in enumerate(args.files):
            status = max(status, _one(args, index, path, options, progress, out, err))
    finally:
        progress.close()
    return status


def _one(args, index: int, path: str, options, progress: Progress, out, err) -> int:
    from checker.analysis.onepass import measure
    from checker.model.serial import dumps

    decoded = [0.0]  # seconds, written by on_frames, read by the progress line's thread

    def on_frames(frames: int, sample_rate_hz: int) -> None:
        decoded[0] = frames / sample_rate_hz if sample_rate_hz > 0 else 0.0

    if progress.enabled:
        progress.audio.started(index, probe_duration_s(path), lambda: decoded[0])
    try:  # one file at a time: a core to spare for reading ahead
        m = measure(path, options, read_ahead=True, on_frames=live.held(on_frames))
    except CheckerError as exc:
        progress.audio.finished(index, decoded[0], whole=False)
        progress.advance()
        with progress.aside():
            if args.json:  # names in readable form: a non-UTF-8 name cannot stop the output
                line = dumps(readable_data({"path": path, "error": str(exc)}))
                print(line, file=out, flush=True)
            else:
                print(for_terminal(f"{path}: error: {exc}"), file=err, flush=True)
        return EXIT_UNCHECKED
    progress.audio.finished(index, m.values.get("duration_s") or decoded[0])
    progress.advance()
    with progress.aside():
        if args.json:
            print(dumps(readable_data(m.to_dict(timeline=args.timeline))), file=out, flush=True)
        else:
            print(for_terminal(path), file=out)
            for key in SUMMARY_KEYS:
                if key in m.values and m.values[key] is not None:
                    print(f"  {key:<28} {_fmt(m.values[key])}", file=out)
            for part in m.values.get("parts") or ():
                print(f"  {part_line(part)}", file=out)
            for finding in m.findings:
                print(for_terminal(f"  note: {finding}"), file=out)
            out.flush()
    return EXIT_OK


def _size_bytes(path: str) -> int:
    try:
        return os.path.getsize(path)
    except OSError:
        return 0
