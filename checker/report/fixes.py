"""The fix list: flagged files grouped by the action that fixes them (fixes.csv, top of report.html).

Every flag (and every file that could not be checked) lands in exactly one group, chosen
from the limit's catalogue entry (checker.profile.catalogue): its section, with a few limits moved
to where the work actually happens. Loudness off target goes to "apply gain" when the gain
advice says plain gain is enough, otherwise to "limit or remix". A limit that could not be
measured goes to "listen and decide". A file may appear in several groups.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from html import escape
from typing import Any

from checker.model.results import FileResult
from checker.model.verdict import ERROR, Flag
from checker.profile.catalogue import BY_KEY
from checker.report.cells import limit_cells, number, value_cell
from checker.report.frame import ERROR_RULE, Table, object_frame, sorted_results


@dataclass(frozen=True)
class FixGroup:
    key: str
    title: str
    blurb: str


#: The groups, in the order the fix list shows them (what blocks a delivery first).
GROUPS: tuple[FixGroup, ...] = (
    FixGroup("resend", "Re-export or re-upload", "the file is broken, cut off, in the wrong "
             "format or was made at a lower quality than it claims: go back to the source"),
    FixGroup("routing", "Check channel routing", "channels are silent, copies of each other, "
             "inverted or out of phase"),
    FixGroup("gain", "Apply gain", "a plain level change is enough (the numbers say how much)"),
    FixGroup("dynamics", "Limit or remix", "gain alone would break a peak or range limit: "
             "limit, compress or rebalance the mix"),
    FixGroup("edges", "Trim or pad head and tail", "silence at the start or the end is too "
             "long or too short"),
    FixGroup("metadata", "Fix metadata", "the file's own loudness fields disagree with the "
             "measurement or are missing"),
    FixGroup("listen", "Listen and decide", "a value could not be measured, or the limit "
             "needs a person to judge it"),
)  # fmt: skip
GROUP_BY_KEY = {g.key: g for g in GROUPS}

_BY_SECTION = {
    "format": "resend",
    "loudness": "dynamics",
    "peaks": "dynamics",
    "levels": "dynamics",
    "silence": "edges",
    "channels": "routing",
    "bandwidth": "resend",
    "metadata": "metadata",
    "stems": "resend",
}
_BY_RULE = {
    "clipped_runs_max": "resend",
    "nonfinite_samples_max": "resend",
    "effective_bits_min": "resend",
    "unused_low_bits_max": "resend",
    "dropouts_max": "resend",
    "rms_min_dbfs": "gain",
    "rms_max_dbfs": "gain",
    "sample_peak_min_dbfs": "gain",
    "sum_clipped_samples_max": "gain",
    "sum_true_peak_max_dbtp": "gain",
    "sum_sample_peak_max_dbfs": "gain",
}

FIX_COLUMNS: tuple[str, ...] = (
    "fix",
    "fix_title",
    "path",
    "status",
    "severity",
    "rule",
    "what",
    "measured",
    "unit",
    "limit_low",
    "limit_high",
    "limit_text",
    "position_s",
    "todo",
)


@dataclass(frozen=True)
class FixItem:
    group: str
    result: FileResult
    flag: Flag | None  # None: the file could not be checked
    what: str
    todo: str


def group_of(flag: Flag, result: FileResult) -> str:
    d = BY_KEY.get(flag.rule)
    if flag.measured is None and d is not None and d.kind not in ("required",):
        return "listen"
    if flag.rule == "integrated_target_lufs":
        gain = result.verdict.gain if result.verdict else None
        return "gain" if gain is not None and gain.plain_gain_enough else "dynamics"
    if flag.rule in _BY_RULE:
        return _BY_RULE[flag.rule]
    if d is None:
        return "listen"
    return _BY_SECTION.get(d.section, "listen")


def _todo(group: str, flag: Flag, result: FileResult) -> str:
    d = BY_KEY.get(flag.rule)
    gain = result.verdict.gain if result.verdict else None
    if flag.rule == "integrated_target_lufs" and gain and gain.gain_to_target_db is not None:
        peak = gain.predicted_true_peak_dbtp
        after = "" if peak is None else f" (true peak then {peak:.2f} dBTP)"
        if group == "gain":
            return f"apply {gain.gain_to_target_db:+.2f} dB{after}"
        return (
            f"{gain.gain_to_target_db:+.2f} dB of plain gain is not enough{after}: limit or remix"
        )
    if flag.measured is None:
        return "could not be measured: listen and check by hand"
    hint = d.hint if d is not None else flag.message
    at = "" if flag.position_s is None else f" (at {flag.position_s:.2f} s)"
    return f"{hint}{at}"


def fix_items(results: Sequence[FileResult]) -> list[FixItem]:
    """Every flagged file's flags (and every unchecked file), in group order, worst first."""
    items: list[FixItem] = []
    for r in sorted_results(results):
        if r.status == ERROR and r.error:
            items.append(FixItem("resend", r, None, "could not be checked", r.error))
        for f in r.verdict.flags if r.verdict else ():
            g = group_of(f, r)
            d = BY_KEY.get(f.rule)
            items.append(FixItem(g, r, f, d.what if d else f.rule, _todo(g, f, r)))
    order = {g.key: n for n, g in enumerate(GROUPS)}
    return sorted(items, key=lambda it: order[it.group])  # stable: worst files first inside


def measured_key(flag: Flag) -> str:
    d = BY_KEY.get(flag.rule)
    key = d.measure if d is not None else None
    return key if isinstance(key, str) else f"x_{flag.unit.lower()}"


def fixes_frame(results: Sequence[FileResult]) -> Table:
    """fixes.csv: one row per (group, file, flag); numbers rounded like report.csv."""
    rows: list[dict[str, Any]] = []
    for it in fix_items(results):
        f, r = it.flag, it.result
        row: dict[str, Any] = {
            "fix": it.group,
            "fix_title": GROUP_BY_KEY[it.group].title,
            "path": r.path,
            "status": r.status,
            "severity": f.severity if f else ERROR,
            "rule": f.rule if f else ERROR_RULE,
            "what": it.what,
            "todo": it.todo,
        }
        if f is not None:
            row.update(
                measured=value_cell(measured_key(f), f.measured),
                unit=f.unit,
                position_s=number(f.position_s, "position_s"),
                **limit_cells(f.rule, f.limit, f.unit),
            )
        rows.append(row)
    return object_frame(rows, FIX_COLUMNS)


def _numbers(flag: Flag | None) -> str:
    """'-21 LUFS (limit -17 to -15)' for the HTML list."""
    if flag is None:
        return ""
    unit = f" {flag.unit}" if flag.unit else ""
    m = value_cell(measured_key(flag), flag.measured)
    got = "not measured" if m is None else f"{m}{unit}"
    lim = limit_cells(flag.rule, flag.limit, flag.unit)
    low, high, text = lim["limit_low"], lim["limit_high"], lim["limit_text"]
    if low is not None and high is not None:
        want = f"{low} to {high}{unit}"
    elif high is not None:
        want = f"at most {high}{unit}"
    elif low is not None:
        want = f"at least {low}{unit}"
    else:
        want = text or ""
    return f"{got} (limit {want})" if want else got


def fixes_html(results: Sequence[FileResult], prefix: str = "") -> str:
    """The fix list section for report.html (empty string when nothing needs fixing)."""
    items = fix_items(results)
    if not items:
        return ""
    parts = []
    for g in GROUPS:
        mine = [it for it in items if it.group == g.key]
        if not mine:
            continue
        files = len({it.result.path for it in mine})
        lis = []
        for it in mine:
            path = (
                it.result.path[len(prefix) :]
                if it.result.path.startswith(prefix)
                else (it.result.path)
            )
            sev = it.flag.severity if it.flag else ERROR
            lis.append(
                f'<li class="fx-{escape(sev)}"><span class="fx-file">{escape(path)}</span> '
                f'<span class="fx-what">{escape(it.what)}</span> '
                f'<span class="fx-num">{escape(_numbers(it.flag))}</span> '
                f'<span class="fx-todo">{escape(it.todo)}</span></li>'
            )
        noun = "file" if files == 1 else "files"
        parts.append(
            f'<section class="fixgroup fg-{g.key}" aria-labelledby="fg-{g.key}">'
            f'<h3 id="fg-{g.key}">{escape(g.title)} <span class="muted">{files} {noun}</span></h3>'
            f'<p class="muted">{escape(g.blurb)}</p><ul>{"".join(lis)}</ul></section>'
        )
    return (
        '<section class="fixes" aria-labelledby="fixes-h" id="fixes">'
        '<h2 id="fixes-h">What to fix</h2>'
        '<p class="muted">The flagged files grouped by the action that fixes them; '
        "<code>fixes.csv</code> beside this page has the same list. When a fix suggests gain, "
        "check the result at a safe listening level.</p>"
        f"{''.join(parts)}</section>"
    )
