"""Plain data the HTML report embeds: per-file detail, reduced timelines, graph limits.

Everything here ends up inside ``<script type="application/json">`` blocks; :func:`embed_json`
makes that safe (no ``<``, ``>`` or ``&`` survives raw, so neither ``</script>`` nor a
comment opener can close the block early).
"""

from __future__ import annotations

import json
import math
import re
from typing import Any

import numpy as np

from checker.model.results import FileResult, RunInfo
from checker.model.timeline import Timeline
from checker.report.jsonl import safe

#: Points per series in the embedded graph data (the SVG is about 700 px wide).
GRAPH_POINTS = 480

_PLUS_MINUS = re.compile(r"^\s*(-?\d+(?:\.\d+)?)\s*(?:\+-|\+/-|±)\s*(\d+(?:\.\d+)?)")


def embed_json(value: Any) -> str:
    """JSON text that is inert inside an HTML ``<script type="application/json">`` element."""
    text = json.dumps(safe(value), allow_nan=False, ensure_ascii=False, separators=(",", ":"))
    return (
        text.replace("&", "\\u0026")
        .replace("<", "\\u003c")
        .replace(">", "\\u003e")
        .replace("\u2028", "\\u2028")
        .replace("\u2029", "\\u2029")
    )


def _finite(x: Any) -> float | None:
    if isinstance(x, bool) or not isinstance(x, (int, float)):
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def reduce_timeline(timeline: Timeline | None, max_points: int = GRAPH_POINTS) -> dict | None:
    """Max-preserving reduction of every series to at most ``max_points``, compactly encoded.

    Levels are integers in tenths of a LU (``-231`` is -23.1 LUFS; None = no level there);
    evenly spaced times are given as ``t0``, ``dt`` and ``n``, otherwise as a list ``t``.
    """
    if timeline is None or not timeline.times_s:
        return None
    times = np.asarray(timeline.times_s, dtype=np.float64)
    n = times.size
    step = max(1, math.ceil(n / max_points))
    m = math.ceil(n / step)
    kept = times[::step][:m]
    out: dict[str, Any] = {"n": m}
    gaps = np.diff(kept)
    if m > 1 and np.all(np.abs(gaps - gaps[0]) < 1e-3):
        out.update(t0=round(float(kept[0]), 3), dt=round(float(gaps[0]), 4))
    else:
        out["t"] = np.round(kept, 3).tolist()
    for name, values in timeline.series.items():
        v = np.full(m * step, -np.inf)
        given = np.array(values[:n], dtype=float)  # None -> NaN
        v[: given.size] = np.where(np.isfinite(given), given, -np.inf)
        buckets = v.reshape(m, step).max(axis=1)
        finite = np.isfinite(buckets)
        tenths = np.round(np.where(finite, buckets, 0.0) * 10).astype(np.int64).tolist()
        for k in np.flatnonzero(~finite).tolist():
            tenths[k] = None  # no level in this stretch (silence or not yet a full window)
        out[str(name)] = tenths
    return out


def profile_limits_for_graph(run: RunInfo) -> dict[str, float | None]:
    """Target band, true-peak ceiling and loudness maxima read from the profile's limits.

    Accepts the shapes a limit can take: a target with a ``tolerance`` field (the shape of
    ``Profile.limits_table()``), ``"-23.0 +- 1.0"`` text, a ``[low, high]`` pair, a
    ``{"target", "tolerance"}`` or ``{"min", "max"}`` mapping, or separate numeric limits
    whose keys name integrated loudness and target / tolerance / min / max.
    """
    target = tol = low = high = ceiling = short_max = momentary_max = None
    for limit in run.profile_limits:
        key = str(limit.get("key", "")).lower()
        value = limit.get("value")
        number = _finite(value)
        # Per-file levels only: not declared_* (header checks) nor sum_*/set_* (stem sets).
        if (
            key.startswith("true_peak")
            and ("max" in key or "ceiling" in key)
            and number is not None
        ):
            ceiling = number
        if key.startswith(("short_term", "max_short_term")) and "max" in key and number is not None:
            short_max = number
        if key.startswith(("momentary", "max_momentary")) and "max" in key and number is not None:
            momentary_max = number
        if not key.startswith("integrated"):
            continue
        if _finite(limit.get("tolerance")) is not None:
            tol = _finite(limit.get("tolerance"))
        if isinstance(value, str) and (match := _PLUS_MINUS.match(value)):
            target, tol = float(match.group(1)), float(match.group(2))
        elif isinstance(value, (list, tuple)) and len(value) == 2:
            low, high = _finite(value[0]), _finite(value[1])
        elif isinstance(value, dict):
            target = _finite(value.get("target", target))
            tol = _finite(value.get("tolerance", tol))
            low = _finite(value.get("min", low))
            high = _finite(value.get("max", high))
        elif number is not None:
            if "tolerance" in key:
                tol = number
            elif "min" in key:
                low = number
            elif "max" in key:
                high = number
            else:
                target = number
    if target is not None and tol is not None:
        low, high = target - tol, target + tol
    elif target is None and low is not None and high is not None:
        target = (low + high) / 2
    return {
        "target_lufs": target,
        "band_low_lufs": low,
        "band_high_lufs": high,
        "ceiling_dbtp": ceiling,
        "short_term_max_lufs": short_max,
        "momentary_max_lufs": momentary_max,
    }


def graph_limits(result: FileResult, profile: dict[str, float | None]) -> dict[str, Any]:
    """Limits drawn on one file's graph: the profile's, else what the file itself implies."""
    limits = dict(profile)
    values = result.measurement.values if result.measurement else {}
    gain = result.verdict.gain if result.verdict else None
    if limits["target_lufs"] is None and gain is not None:
        loudness = _finite(values.get("integrated_lufs"))
        step = _finite(gain.gain_to_target_db)
        if loudness is not None and step is not None:
            limits["target_lufs"] = round(loudness + step, 2)
    limits["ceiling_from"] = "profile"
    if limits["ceiling_dbtp"] is None:
        # No true-peak limit in the profile: show the level the meter counted overs against.
        limits["ceiling_dbtp"] = _finite(values.get("true_peak_ceiling_dbtp"))
        limits["ceiling_from"] = "meter"
    return limits


def graph_marks(result: FileResult) -> list[dict[str, Any]]:
    """Positions worth a mark on the time axis: true-peak overs, clipped runs, flag positions."""
    values = result.measurement.values if result.measurement else {}
    marks: list[dict[str, Any]] = []
    for key, label in (
        ("true_peak_over_times_s", "true-peak over"),
        ("clipped_run_times_s", "clipped run"),
    ):
        for t in values.get(key) or ():
            if _finite(t) is not None:
                marks.append({"t": float(t), "label": label})
    if result.verdict is not None:
        for flag in result.verdict.flags:
            if _finite(flag.position_s) is not None:
                marks.append(
                    {"t": float(flag.position_s), "label": f"{flag.rule} ({flag.severity})"}
                )
    return marks


def file_detail(result: FileResult, profile: dict[str, float | None]) -> dict[str, Any]:
    """Everything the detail view shows for one file, as JSON-safe plain data."""
    m = result.measurement
    verdict = result.verdict
    detail = safe(
        {
            "path": result.path,
            "kind": result.kind,
            "group": result.group,
            "status": result.status,
            "error": result.error,
            "findings": list(m.findings) if m else [],
            "flags": [f.to_dict() for f in verdict.flags] if verdict else [],
            "gain": verdict.gain.to_dict() if verdict and verdict.gain else None,
            "values": dict(m.values) if m else {},
            "limits": graph_limits(result, profile),
            "marks": graph_marks(result),
        }
    )
    # Already JSON-ready (finite rounded floats and None): kept out of safe() for speed.
    detail["timeline"] = reduce_timeline(m.timeline if m else None)
    return detail
