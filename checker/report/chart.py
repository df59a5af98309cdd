"""The batch chart of report.html: every file's loudness against its true peak (inline SVG).

x: the integrated loudness that was judged (a mono file under a dual-mono profile: its
dual-mono value), y: true peak. The profile's acceptance region (the loudness target's
tolerance band, under the true-peak ceiling) is a shaded box with its edges labelled;
the target is a vertical hairline. Each file is a mark whose shape says its status
(ring: pass, diamond: warn, square: fail), so colour is never the only cue; hovering a
mark shows the file and its numbers. Files without a finite loudness or true peak (silent,
unreadable) are counted under the chart, not drawn. Stem-set rows show their sum.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from html import escape
from typing import Any

from checker.model.results import FileResult
from checker.report.judged import cell_values  # the same judged value as the table

W, H = 720, 360
L, R, T, B = 58, 18, 16, 46

SHAPES = {"pass": "ring", "warn": "diamond", "fail": "square", "error": "square"}
COLOURS = {"pass": "#2e6b3f", "warn": "#9a6400", "fail": "#a0242c", "error": "#5a3b8c"}


def _finite(x: Any) -> float | None:
    if isinstance(x, bool) or not isinstance(x, (int, float)):
        return None
    return float(x) if math.isfinite(x) else None


def points(results: Sequence[FileResult], mono_loudness: str = "") -> list[dict[str, Any]]:
    """(loudness, true peak, status, name) per file that has both values."""

    out = []
    for r in results:
        if r.measurement is None:
            continue
        v = cell_values(r, mono_loudness)
        x, y = _finite(v.get("integrated_lufs")), _finite(v.get("true_peak_dbtp"))
        if x is None or y is None:
            continue
        out.append({"x": x, "y": y, "status": r.status, "path": r.path, "kind": r.kind})
    return out


def _ticks(lo: float, hi: float, want: int = 6) -> list[float]:
    span = max(hi - lo, 1e-9)
    raw = span / want
    step = min((s for s in (0.5, 1, 2, 5, 10, 20) if s >= raw), default=20)
    first = math.ceil(lo / step) * step
    return [first + k * step for k in range(int((hi - first) / step) + 1)]


def _mark(shape: str, cx: float, cy: float, colour: str) -> str:
    if shape == "ring":
        return (
            f'<circle cx="{cx:.1f}" cy="{cy:.1f}" r="5" fill="#fff" stroke="{colour}" '
            'stroke-width="2"/>'
        )
    if shape == "diamond":
        return (
            f'<path d="M{cx:.1f} {cy - 6:.1f}l6 6l-6 6l-6 -6z" fill="{colour}" '
            'fill-opacity="0.85"/>'
        )
    return f'<rect x="{cx - 5:.1f}" y="{cy - 5:.1f}" width="10" height="10" fill="{colour}"/>'


def batch_chart(
    results: Sequence[FileResult],
    limits: dict[str, float | None],
    mono_loudness: str = "",
    prefix: str = "",
) -> str:
    """The chart's figure (empty string when no file has both values)."""
    pts = points(results, mono_loudness)
    missing = sum(1 for r in results if r.measurement is not None) - len(pts)
    if not pts:
        return ""
    low, high = limits.get("band_low_lufs"), limits.get("band_high_lufs")
    target, ceiling = limits.get("target_lufs"), limits.get("ceiling_dbtp")
    xs = [p["x"] for p in pts] + [v for v in (low, high, target) if v is not None]
    ys = [p["y"] for p in pts] + [v for v in (ceiling,) if v is not None]
    x0, x1 = math.floor(min(xs) - 2), math.ceil(max(xs) + 2)
    y0, y1 = math.floor(min(ys) - 2), math.ceil(max(ys) + 1.5)

    def px(v: float) -> float:
        return L + (v - x0) / (x1 - x0) * (W - L - R)

    def py(v: float) -> float:
        return T + (y1 - v) / (y1 - y0) * (H - T - B)

    parts = [
        f'<svg viewBox="0 0 {W} {H}" role="img" aria-labelledby="bc-title bc-desc" '
        'class="batch-chart" font-family="system-ui, sans-serif" font-size="11">',
        '<title id="bc-title">Loudness against true peak, every file</title>',
    ]
    inside = sum(
        1
        for p in pts
        if (low is None or p["x"] >= low - 1e-9)
        and (high is None or p["x"] <= high + 1e-9)
        and (ceiling is None or p["y"] <= ceiling + 1e-9)
    )
    region = "the profile's acceptance region" if (low is not None or ceiling is not None) else ""
    desc = f"{len(pts)} files drawn"
    if region:
        desc += f"; {inside} inside {region}"
    parts.append(f'<desc id="bc-desc">{escape(desc)}.</desc>')
    # frame and grid
    parts.append(
        f'<rect x="{L}" y="{T}" width="{W - L - R}" height="{H - T - B}" fill="#fbfaf7" '
        'stroke="#d9d5cb"/>'
    )
    for v in _ticks(x0, x1):
        parts.append(
            f'<line x1="{px(v):.1f}" x2="{px(v):.1f}" y1="{T}" y2="{H - B}" stroke="#efece5"/>'
            f'<text x="{px(v):.1f}" y="{H - B + 15}" text-anchor="middle" fill="#6b7385">'
            f"{v:g}</text>"
        )
    for v in _ticks(y0, y1, 5):
        parts.append(
            f'<line x1="{L}" x2="{W - R}" y1="{py(v):.1f}" y2="{py(v):.1f}" stroke="#efece5"/>'
            f'<text x="{L - 6}" y="{py(v) + 4:.1f}" text-anchor="end" fill="#6b7385">{v:g}</text>'
        )
    # acceptance region: loudness band (or the whole width) under the ceiling (or the top)
    if low is not None or high is not None or ceiling is not None:
        rx0 = px(low) if low is not None else L
        rx1 = px(high) if high is not None else W - R
        ry = py(ceiling) if ceiling is not None else T
        parts.append(
            f'<rect class="accept" x="{rx0:.1f}" y="{ry:.1f}" width="{max(rx1 - rx0, 1):.1f}" '
            f'height="{max(H - B - ry, 1):.1f}" fill="#2e6b3f" fill-opacity="0.10" '
            'stroke="#2e6b3f" stroke-width="1.5" stroke-dasharray="5 3"/>'
        )
        words = []
        if low is not None and high is not None:
            words.append(f"{low:g} to {high:g} LUFS")
        if ceiling is not None:
            words.append(f"true peak at most {ceiling:g} dBTP")
        accepted = ", ".join(words)
        parts.append(
            f'<text x="{L + 6}" y="{T + 13}" fill="#2e6b3f" font-weight="600">'
            f"accepted region (dashed box): {escape(accepted)}</text>"
        )
    if target is not None:
        parts.append(
            f'<line class="target" x1="{px(target):.1f}" x2="{px(target):.1f}" y1="{T}" '
            f'y2="{H - B}" stroke="#2e6b3f" stroke-width="1"/>'
        )
    # marks, worst last so they sit on top
    order = {"pass": 0, "warn": 1, "fail": 2, "error": 3}
    for p in sorted(pts, key=lambda p: order.get(p["status"], 0)):
        shape, colour = SHAPES.get(p["status"], "square"), COLOURS.get(p["status"], "#444")
        name = p["path"][len(prefix) :] if prefix and p["path"].startswith(prefix) else p["path"]
        tip = f"{name}: {p['x']:.1f} LUFS, {p['y']:+.1f} dBTP, {p['status']}"
        if p["kind"] == "set":
            tip += " (sum of the stems)"
        parts.append(
            f'<g class="pt pt-{escape(p["status"])}"><title>{escape(tip)}</title>'
            f"{_mark(shape, px(p['x']), py(p['y']), colour)}</g>"
        )
    parts.append(
        f'<text x="{(L + W - R) / 2:.0f}" y="{H - 8}" text-anchor="middle" fill="#4a5366">'
        "integrated loudness as judged (LUFS)</text>"
        f'<text x="14" y="{(T + H - B) / 2:.0f}" text-anchor="middle" fill="#4a5366" '
        f'transform="rotate(-90 14 {(T + H - B) / 2:.0f})">true peak (dBTP)</text></svg>'
    )
    note = f" {missing} without a finite loudness or true peak are not drawn." if missing else ""
    legend = (
        '<ul class="legend bc-legend"><li class="k-ring">pass</li><li class="k-diamond">warn</li>'
        '<li class="k-square">fail</li><li class="k-accept">accepted region</li></ul>'
    )
    return (
        '<section class="glance" aria-labelledby="glance-h"><h2 id="glance-h">The batch at a '
        'glance</h2><figure class="graph batch">'
        + "".join(parts)
        + legend
        + f"<figcaption>Each mark is one file (a stem set: its sum). {escape(desc)}.{note} "
        "Hover a mark for the file and its numbers.</figcaption></figure></section>"
    )
