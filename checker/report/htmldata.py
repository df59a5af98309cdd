"""Plain data the HTML report embeds: per-file detail, reduced timelines, graph limits.

Everything here ends up inside ``<script type="application/json">`` blocks; :func:`embed_json`
makes that safe (no ``<``, ``>`` or ``&`` survives raw, so neither ``</script>`` nor a
comment opener can close the block early).
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

from checker.model.results import FileResult, RunInfo
from checker.model.serial import json_safe
from checker.model.timeline import Timeline, bucket_max, bucket_step
from checker.profile.catalogue import BY_KEY, FILE, MAX, TARGET
from checker.report.judged import judged_as_dual_mono

#: Points per series in the embedded graph data (the SVG is about 700 px wide).
GRAPH_POINTS = 480


def embed_json(value: Any) -> str:
    """JSON text that is inert inside an HTML ``<script type="application/json">`` element."""
    return embed_safe_json(json_safe(value))


def embed_safe_json(value: Any) -> str:
    """:func:`embed_json` of a value that is json_safe() output already (json_safe gives
    such a value back unchanged, so walking it again is skipped)."""
    text = json.dumps(value, allow_nan=False, ensure_ascii=False, separators=(",", ":"))
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
    step = bucket_step(n, max_points)
    m = math.ceil(n / step)
    kept = times[::step][:m]
    out: dict[str, Any] = {"n": m}
    gaps = np.diff(kept)
    if m > 1 and np.all(np.abs(gaps - gaps[0]) < 1e-3):
        out.update(t0=round(float(kept[0]), 3), dt=round(float(gaps[0]), 4))
    else:
        out["t"] = np.round(kept, 3).tolist()
    for name, values in timeline.series.items():
        given = np.full(n, -np.inf)
        level = np.array(values[:n], dtype=float)  # None -> NaN: no level
        given[: level.size] = level
        buckets = bucket_max(given, step)
        finite = np.isfinite(buckets)
        tenths = np.round(np.where(finite, buckets, 0.0) * 10).astype(np.int64).tolist()
        for k in np.flatnonzero(~finite).tolist():
            tenths[k] = None  # no level in this stretch (silence or not yet a full window)
        out[str(name)] = tenths
    return out


#: What a file's graph draws, by the catalogue's meaning of a limit: (measured key, kind) ->
#: field. Only file-scope limits count (a stem set's sum or a downmix has its own values).
GRAPH_LINES: dict[tuple[str, str], str] = {
    ("integrated_lufs", TARGET): "target_lufs",
    ("true_peak_dbtp", MAX): "ceiling_dbtp",
    ("max_short_term_lufs", MAX): "short_term_max_lufs",
    ("max_momentary_lufs", MAX): "momentary_max_lufs",
}


def profile_limits_for_graph(run: RunInfo) -> dict[str, float | None]:
    """Target band, true-peak ceiling and loudness maxima of the run's profile, each found by
    what the limit catalogue says the limit judges (checker.profile.catalogue), never by its
    name. Rows are ``Profile.limits_table()`` dicts; a key the catalogue does not know is
    ignored."""
    got: dict[str, float | None] = {field: None for field in GRAPH_LINES.values()}
    tolerance = None
    for limit in run.profile_limits:
        definition = BY_KEY.get(str(limit.get("key", "")))
        if definition is None or definition.scope != FILE:
            continue
        field = GRAPH_LINES.get((definition.measure, definition.kind))  # type: ignore[arg-type]
        number = _finite(limit.get("value"))
        if field is None or number is None:
            continue
        got[field] = number
        if field == "target_lufs":
            tolerance = _finite(limit.get("tolerance"))
    target = got["target_lufs"]
    low = high = None
    if target is not None and tolerance is not None:
        low, high = target - tolerance, target + tolerance
    return {
        "target_lufs": target,
        "band_low_lufs": low,
        "band_high_lufs": high,
        "ceiling_dbtp": got["ceiling_dbtp"],
        "short_term_max_lufs": got["short_term_max_lufs"],
        "momentary_max_lufs": got["momentary_max_lufs"],
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
    detail = json_safe(
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
    # Already JSON-ready (finite rounded floats and None): kept out of json_safe() for speed.
    detail["timeline"] = reduce_timeline(m.timeline if m else None)
    return detail


def as_number(value: Any) -> float | None:
    """A number as a float (infinities kept), else None (NaN, bools, text)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    return None if math.isnan(value) else float(value)


def detail_json(r: FileResult, profile: dict[str, float | None], mono_loudness: str) -> str:
    """One file's detail data (``file_detail``, and how a mono file was judged) as embedded."""
    detail = file_detail(r, profile)
    plain = r.measurement.values if r.measurement else {}
    if r.kind != "set" and judged_as_dual_mono(plain, mono_loudness):
        judged, one = plain["integrated_dual_mono_lufs"], as_number(plain.get("integrated_lufs"))
        detail["judged"] = {
            "judged_lufs": judged,
            "plain_lufs": one,
            "offset_lu": (judged - one) if one is not None and math.isfinite(one) else 0.0,
        }
    for key in ("timeline", "judged"):  # the parts file_detail did not pass through json_safe
        if key in detail:
            detail[key] = json_safe(detail[key])
    return embed_safe_json(detail)
