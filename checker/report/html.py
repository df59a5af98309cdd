"""report.html: one self-contained page (inline CSS, JS and SVG; a CSP that forbids any load).

The table rows are rendered here, escaped; the script sorts, filters and opens a detail
view built from per-file JSON blocks that are parsed only when a file is opened, so a
5,000-file report stays light. Template, style and script are package data beside this
module (report.html, report.css, report.js).
"""

from __future__ import annotations

import base64
import hashlib
import math
import os
import re
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from functools import cache
from html import escape
from importlib import resources
from typing import Any

from checker.model.results import FileResult, RunInfo
from checker.model.verdict import STATUS_ORDER
from checker.report.chart import batch_chart
from checker.report.fixes import fixes_html
from checker.report.frame import list_text, sorted_results
from checker.report.htmldata import as_number, detail_json, embed_json, profile_limits_for_graph
from checker.report.judged import SET_SUM_CELLS, cell_values, judged_as_dual_mono

#: Status word, symbol and the sentence a screen reader hears. Colour is never the only cue.
STATUS_LOOK = {
    "error": ("\u2298", "could not be checked"),
    "fail": ("\u2715", "fails the profile"),
    "warn": ("!", "passes with warnings"),
    "pass": ("\u2713", "passes the profile"),
}

INPUTS_SHOWN = 12


@dataclass(frozen=True)
class Column:
    key: str
    label: str
    unit: str = ""
    numeric: bool = True


#: Columns of the HTML table (report.csv carries every measurement).
COLUMNS: tuple[Column, ...] = (
    Column("status", "Status", numeric=True),
    Column("path", "File", numeric=False),
    Column("integrated_lufs", "Integrated", "LUFS"),
    Column("loudness_range_lu", "Loudness range", "LU"),
    Column("true_peak_dbtp", "True peak", "dBTP"),
    Column("max_short_term_lufs", "Max short-term", "LUFS"),
    Column("max_momentary_lufs", "Max momentary", "LUFS"),
    Column("sample_peak_dbfs", "Sample peak", "dBFS"),
    Column("duration_s", "Duration", "m:s"),
    Column("format", "Format", numeric=False),
    Column("gain_to_target_db", "Gain to target", "dB"),
    Column("flags", "Flags", "count"),
)


@cache
def _asset(name: str) -> str:
    return resources.files("checker.report").joinpath(name).read_text(encoding="utf-8")


def _csp_hash(text: str) -> str:
    digest = hashlib.sha256(text.encode("utf-8")).digest()
    return "'sha256-" + base64.b64encode(digest).decode("ascii") + "'"


def fmt_level(value: Any, decimals: int = 1, signed: bool = False) -> str:
    x = as_number(value)
    if x is None:
        return ""
    if math.isinf(x):
        return "-inf" if x < 0 else "inf"
    text = f"{x:.{decimals}f}"
    if not text.strip("-0."):  # zero after rounding: no sign
        return text.lstrip("-")
    return "+" + text if signed and x > 0 else text


def fmt_duration(value: Any) -> str:
    x = as_number(value)
    if x is None or not math.isfinite(x):
        return ""
    minutes, seconds = divmod(x, 60.0)
    return f"{int(minutes)}:{seconds:04.1f}"


def fmt_format(values: dict[str, Any]) -> str:
    parts = []
    rate = as_number(values.get("sample_rate_hz"))
    if rate:
        parts.append(f"{rate / 1000:g} kHz")
    subtype = values.get("subtype")
    bits = values.get("format_bits")
    if isinstance(subtype, str) and subtype.upper() in ("FLOAT", "DOUBLE"):
        parts.append(f"{bits}-bit float" if bits else "float")
    elif bits:
        parts.append(f"{bits}-bit")
    channels = values.get("channels")
    if channels:
        parts.append(f"{channels} ch")
    return " \u00b7 ".join(parts)


def _sort_key(value: Any) -> Any:
    """JSON sort key: numbers stay numbers, -inf becomes "-inf", missing becomes null."""
    x = as_number(value)
    if x is None:
        return None
    if math.isinf(x):
        return "-inf" if x < 0 else "inf"
    return x


def _split_path(path: str) -> tuple[str, str]:
    cut = max(path.rfind("/"), path.rfind("\\"))
    return path[cut + 1 :], path[: cut + 1]


def _status_badge(status: str) -> str:
    symbol, sentence = STATUS_LOOK.get(status, ("?", "unknown status"))
    s = escape(status)
    return (
        f'<span class="badge b-{s}" title="{escape(sentence)}">'
        f'<span class="sym" aria-hidden="true">{symbol}</span>{s}</span>'
    )


def common_folder(paths: Sequence[str]) -> str:
    """The folder every path starts with (ending in a separator), or "" when none is shared."""
    folders = [_split_path(p)[1] for p in paths]
    if not folders:
        return ""
    prefix = os.path.commonprefix(folders)
    cut = max(prefix.rfind("/"), prefix.rfind("\\"))
    return prefix[: cut + 1]


def _row(
    i: int, r: FileResult, folder_prefix: str = "", mono_loudness: str = ""
) -> tuple[str, dict[str, Any]]:
    values = cell_values(r, mono_loudness)
    plain = r.measurement.values if r.measurement else {}
    dual = r.kind != "set" and judged_as_dual_mono(plain, mono_loudness)
    gain = r.verdict.gain if r.verdict else None
    flags = r.verdict.flags if r.verdict else ()
    name, folder = _split_path(r.path)
    folder = folder[len(folder_prefix) :]
    fmt = fmt_format(values)
    flag_words = " | ".join(f"{f.severity}: {f.message}" for f in flags)
    if r.status == "error":
        message = r.error or "could not be measured"
        if message.startswith(r.path + ": "):  # the row already names the file
            message = message[len(r.path) + 2 :]
        flag_cell = escape(message)
    elif flags:
        worst = next((f for f in flags if f.severity == "fail"), flags[0])
        cls = "fc has-fail" if worst.severity == "fail" else "fc"
        noun = "flag" if len(flags) == 1 else "flags"
        flag_cell = (
            f'<span class="{cls}" title="{escape(flag_words)}">'
            f'<b>{len(flags)}<span class="vh"> {noun}, worst:</span></b> '
            f"{escape(worst.message)}</span>"
        )
    else:
        flag_cell = '<span class="none">none</span>'
    tag = '<span class="tag">set</span> ' if r.kind == "set" else ""
    group = f'<span class="grp">in set {escape(r.group)}</span>' if r.group else ""
    gain_db = gain.gain_to_target_db if gain else None
    cells = [
        f"<td>{_status_badge(r.status)}</td>",
        f'<th scope="row" class="file">{tag}<span class="name">{escape(name)}</span>'
        f'<span class="dir">{escape(folder)}</span>{group}</th>',
    ]
    for col in COLUMNS[2:8]:
        signed = col.unit in ("dBTP", "dBFS")
        text = fmt_level(values.get(col.key), signed=signed)
        if r.kind == "set" and col.key in SET_SUM_CELLS:
            cells.append(f'<td class="n" title="of the stems\' sum">{text}</td>')
        elif dual and col.key == "integrated_lufs":
            one = fmt_level(plain.get("integrated_lufs"))
            cells.append(
                f'<td class="n" title="mono file: {one} LUFS on its one channel">{text}'
                '<span class="judged">judged as dual mono</span></td>'
            )
        else:
            cells.append(f'<td class="n">{text}</td>')
    cells.append(f'<td class="n">{fmt_duration(values.get("duration_s"))}</td>')
    first, _, rest = fmt.partition(" \u00b7 ")  # rate on one line, bits and channels below
    fmt_html = escape(first) + (f'<span class="sub">{escape(rest)}</span>' if rest else "")
    cells.append(f'<td class="fmt">{fmt_html}</td>')
    cells.append(f'<td class="n">{fmt_level(gain_db, signed=True)}</td>')
    cells.append(f'<td class="flags">{flag_cell}</td>')
    cells.append(
        f'<td><button type="button" class="open" data-i="{i}" aria-haspopup="dialog">'
        f'Details<span class="vh"> for {escape(name)}</span></button></td>'
    )
    html_row = f'<tr data-i="{i}" class="r-{escape(r.status)}">{"".join(cells)}</tr>'
    sort = [
        STATUS_ORDER.get(r.status, 9),
        r.path,
        *(_sort_key(values.get(c.key)) for c in COLUMNS[2:8]),
        _sort_key(values.get("duration_s")),
        fmt,
        _sort_key(gain_db),
        len(flags),
    ]
    hay = " ".join(x for x in (r.path, r.group or "", r.error or "", flag_words, fmt) if x)
    return html_row, {"s": sort, "st": r.status, "h": hay.lower()}


def _header_cells() -> str:
    out = []
    for n, c in enumerate(COLUMNS):
        unit = f'<span class="unit">{escape(c.unit)}</span>' if c.unit else ""
        kind = "num" if c.numeric else "text"
        out.append(
            f'<th scope="col" data-col="{n}" data-kind="{kind}" class="h-{escape(c.key)}">'
            f'<button type="button" class="sort">{escape(c.label)}{unit}'
            f'<span class="arrow" aria-hidden="true"></span></button></th>'
        )
    out.append('<th scope="col"><span class="vh">Open details</span></th>')
    return "".join(out)


def _limit_text(value: Any) -> str:
    if isinstance(value, (list, tuple)):
        return list_text(value)
    if isinstance(value, dict):
        return ", ".join(f"{k} {v}" for k, v in value.items())
    return "" if value is None else str(value)


def _profile_table(run: RunInfo) -> str:
    if not run.profile_limits:
        return '<p class="muted">This profile sets no limits: values are measured only.</p>'
    rows = []
    for lim in run.profile_limits:
        text = lim.get("text")
        if not text:
            unit = lim.get("unit") or ""
            text = f"{_limit_text(lim.get('value'))} {unit}".strip()
        rows.append(
            "<tr>"
            f'<th scope="row"><code>{escape(str(lim.get("key", "")))}</code></th>'
            f"<td>{escape(str(text))}</td>"
            f"<td>{escape(str(lim.get('severity') or ''))}</td>"
            f"<td>{escape(str(lim.get('source') or ''))}</td></tr>"
        )
    return (
        '<div class="scroll"><table class="limits"><caption>Limits of this profile '
        "and the source of each</caption><thead><tr>"
        '<th scope="col">Limit</th><th scope="col">Value</th>'
        '<th scope="col">Severity</th><th scope="col">Source</th></tr></thead>'
        f"<tbody>{''.join(rows)}</tbody></table></div>"
    )


def _inputs(run: RunInfo) -> str:
    shown = "".join(f"<li><code>{escape(p)}</code></li>" for p in run.inputs[:INPUTS_SHOWN])
    rest = len(run.inputs) - INPUTS_SHOWN
    more = f'<li class="muted">and {rest} more</li>' if rest > 0 else ""
    return f'<ul class="inputs">{shown or "<li>none given</li>"}{more}</ul>'


def _totals(counts: Counter, total: int) -> tuple[str, str]:
    tiles, filters = [], []
    for status in ("fail", "error", "warn", "pass"):
        symbol, sentence = STATUS_LOOK[status]
        n = counts.get(status, 0)
        tiles.append(
            f'<li class="tile t-{status}"><span class="sym" aria-hidden="true">{symbol}</span>'
            f'<span class="count">{n}</span><span class="word">{status}</span>'
            f'<span class="vh"> ({sentence})</span></li>'
        )
        filters.append(
            f'<label class="chip c-{status}"><input type="checkbox" name="status" '
            f'value="{status}" checked><span class="sym" aria-hidden="true">{symbol}</span>'
            f'{status} <span class="muted">({n})</span></label>'
        )
    tile_html = (
        f'<ul class="tiles" aria-label="Totals by status, {total} files">{"".join(tiles)}</ul>'
    )
    return tile_html, "".join(filters)


def _not_checked(run: RunInfo) -> str:
    """A section listing the files that were not checked, with the reason; "" when none."""
    if not run.not_checked:
        return ""
    rows = "".join(
        f"<tr><td><code>{escape(x['path'])}</code></td><td>{escape(x['reason'])}</td></tr>"
        for x in run.not_checked
    )
    n = len(run.not_checked)
    return (
        '<section aria-labelledby="not-checked-h">'
        f'<h2 id="not-checked-h">Not checked ({n} file{"s" if n != 1 else ""})</h2>'
        '<p class="muted">Found under the inputs but clearly not deliverables, so not measured. '
        "Name such a file on the command line to have it checked anyway.</p>"
        '<table class="limits"><thead><tr><th>File</th><th>Why not checked</th></tr></thead>'
        f"<tbody>{rows}</tbody></table></section>"
    )


def render_html(
    run: RunInfo, results: Sequence[FileResult], generated_at: str, prepared: Any = None
) -> str:
    """The complete page as one string. ``prepared``: a checker.report.prepared.PreparedRows
    holding details made while the batch ran (the same text)."""
    ordered = sorted_results(results)
    profile = profile_limits_for_graph(run)
    rows_html, rows_data, details = [], [], []
    prefix = common_folder([r.path for r in ordered])
    for i, r in enumerate(ordered):
        row_html, data = _row(i, r, prefix, run.mono_loudness)
        rows_html.append(row_html)
        rows_data.append(data)
        text = prepared.detail_json(r, run) if prepared is not None else None
        if text is None:
            text = detail_json(r, profile, run.mono_loudness)
        details.append(f'<script type="application/json" id="d-{i}">{text}</script>')
    counts = Counter(r.status for r in ordered)
    tiles, filters = _totals(counts, len(ordered))
    css, js = _asset("report.css"), _asset("report.js")
    title = f"Delivery check: {run.profile_title or run.profile_name}"
    fields = {
        "csp": (
            "default-src 'none'; img-src data:; "
            f"style-src {_csp_hash(css)}; script-src {_csp_hash(js)}; "
            "base-uri 'none'; form-action 'none'"
        ),
        "title": escape(title),
        "css": css,
        "js": js,
        "profile_title": escape(run.profile_title or run.profile_name),
        "profile_name": escape(run.profile_name),
        "run_id": escape(run.run_id),
        "started_at": escape(run.started_at),
        "finished_at": escape(run.finished_at or "not recorded"),
        "generated_at": escape(generated_at),
        "engine_version": escape(run.engine_version or "not recorded"),
        "inputs": _inputs(run),
        "folder": (
            '<div class="wide"><dt>Common folder (not repeated in the table)</dt>'
            f"<dd><code>{escape(prefix)}</code></dd></div>"
            if prefix
            else ""
        ),
        "limits": _profile_table(run),
        "fixes": fixes_html(ordered, prefix),
        "chart": batch_chart(ordered, profile, run.mono_loudness, prefix),
        "limit_count": str(len(run.profile_limits)),
        "tiles": tiles,
        "filters": filters,
        "total": str(len(ordered)),
        "head": _header_cells(),
        "rows": "\n".join(rows_html),
        "empty": "" if ordered else '<p class="muted">No files were checked.</p>',
        "not_checked": _not_checked(run),
        "rows_json": embed_json({"rows": rows_data}),
        "details": "\n".join(details),
    }
    return re.sub(r"\{\{(\w+)\}\}", lambda m: fields[m.group(1)], _asset("report.html"))
