"""Values computed from other measured values so that limits can judge them (unused low bits,
missing frames, container intact, anchor loudness and its note).

One job: DERIVED (key -> inputs, function) and with_derived(values), used by judge/rules.py
before the limits of checker/profile/catalogue.py are evaluated.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any


def _unused_low_bits(v: Mapping[str, Any]) -> int | None:
    """Integer PCM only: stored bits minus bits in use (float and lossy: None)."""
    fb, eb, st = v.get("format_bits"), v.get("effective_bits"), v.get("subtype")
    if isinstance(st, str) and st.startswith("PCM_") and isinstance(fb, int):
        return fb - eb if isinstance(eb, int) else None
    return None


def _missing_frames(v: Mapping[str, Any]) -> int | None:
    """Frames the header declares beyond those decoded (None: the header gives no length)."""
    declared, decoded = v.get("frames_declared"), v.get("frames")
    if isinstance(declared, int) and isinstance(decoded, int):
        return max(declared - decoded, 0)
    return None


def _container_ok(v: Mapping[str, Any]) -> bool | None:
    """The container is intact, or its only damage is frames missing from the end, which
    truncation_max_frames counts (so a cut-short file is not flagged twice)."""
    intact = v.get("container_intact")
    if intact is None:
        return None
    return intact or bool(_missing_frames(v))


def _anchor_lufs(v: Mapping[str, Any]) -> float | None:
    """The anchor element's loudness (ATSC A/85, from memory): the speech loudness where the
    gate found enough speech, else the whole programme's; None where the gate did not run."""
    if v.get("speech_detector") is None:
        return None
    speech = v.get("speech_lufs")
    return speech if speech is not None else v.get("integrated_lufs")


#: Values computed from other measured values, for limits: key -> (inputs, function).
#: Added only when absent and when every input key is present in the values.
DERIVED: dict[str, tuple[tuple[str, ...], Callable[[Mapping[str, Any]], Any]]] = {
    "unused_low_bits": (("subtype", "format_bits", "effective_bits"), _unused_low_bits),
    "missing_frames": (("frames_declared", "frames"), _missing_frames),
    "container_ok": (("container_intact", "frames_declared", "frames"), _container_ok),
    "anchor_lufs": (("speech_detector", "speech_lufs", "integrated_lufs"), _anchor_lufs),
    # why the anchor could not be measured (the speech gate's note), for the message
    "anchor_note": (
        ("speech_detector", "speech_note"),
        lambda v: v.get("speech_note") if v.get("speech_detector") is None else None,
    ),
}


def with_derived(values: Mapping[str, Any]) -> Mapping[str, Any]:
    extra = {
        k: f(values)
        for k, (inputs, f) in DERIVED.items()
        if k not in values and all(i in values for i in inputs)
    }
    return {**values, **extra} if extra else values
