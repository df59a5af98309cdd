"""The programme-span and parts options shared by ``measure`` and ``check``
(checker/analysis/span.py): --span, --in-point, --out-point, --timecode-fps, --break-min-s."""

from __future__ import annotations

import argparse
import dataclasses
from typing import Any

from checker.model.errors import UsageError


def add_span_arguments(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group(
        "programme span and parts (default: the profile's, else the whole file)"
    )
    g.add_argument(
        "--span",
        choices=("auto", "whole_file"),
        help="auto: leave out a head and tail of line-up tone and silence",
    )
    g.add_argument(
        "--in-point",
        metavar="POINT",
        help='programme start: seconds ("12.5") or timecode ("10:00:00:00", relative to the '
        "file's bext time reference; needs --timecode-fps)",
    )
    g.add_argument("--out-point", metavar="POINT", help="programme end, as --in-point")
    g.add_argument(
        "--timecode-fps", type=float, metavar="FPS", help="frame rate of timecode points"
    )
    g.add_argument(
        "--break-min-s",
        type=float,
        metavar="S",
        help="split the programme into parts at breaks at least this long (below -70 LUFS)",
    )


def span_settings(args: argparse.Namespace) -> dict[str, Any]:
    """The [programme] settings the command line gives (checked), by profile key."""
    from checker.analysis.span import TIMECODE  # here: building the parser loads no numpy

    got = {
        "span": args.span,
        "in_point": args.in_point,
        "out_point": args.out_point,
        "timecode_fps": args.timecode_fps,
        "break_min_s": args.break_min_s,
    }
    for flag in ("in_point", "out_point"):
        text = got[flag]
        if text is not None and TIMECODE.match(text.strip()) is None:
            try:
                ok = float(text) >= 0
            except ValueError:
                ok = False
            if not ok:
                raise UsageError(
                    f"--{flag.replace('_', '-')}: {text!r} (expected seconds >= 0 or HH:MM:SS:FF)"
                )
    if got["timecode_fps"] is not None and not 1 <= got["timecode_fps"] <= 120:
        raise UsageError(f"--timecode-fps: {got['timecode_fps']} (expected 1-120)")
    if got["break_min_s"] is not None and not 0.1 <= got["break_min_s"] <= 3600:
        raise UsageError(f"--break-min-s: {got['break_min_s']} (expected 0.1-3600 s)")
    return {k: v for k, v in got.items() if v is not None}


def with_span_settings(profile: Any, args: argparse.Namespace) -> Any:
    """The profile with the command line's [programme] settings over its own."""
    given = span_settings(args)
    if not given:
        return profile
    merged = {**dict(profile.programme), **given}
    return dataclasses.replace(profile, programme=tuple(merged.items()))
