"""The fix list: flagged files grouped by the action that fixes them (fixes.csv and report.html).

Fixtures are FileResult objects built from real rule keys of the limit catalogue, judged by
checker.judge.rules against a shipped profile, so each group is reached the way a run reaches it.
Expected numbers are the fixture values themselves (arithmetic on them is named).
"""

from __future__ import annotations

import csv

from test_report_csv import make_run, values

from checker.judge.rules import evaluate
from checker.model.measurement import Measurement
from checker.model.results import FileResult
from checker.profile.load import load_profile
from checker.report import REPORT_FILES, write_reports
from checker.report.fixes import GROUPS, fix_items


def judged(path: str, **over) -> FileResult:
    """A measured file judged by the podcast-stereo profile (target -16 LUFS +- 1 LU)."""
    clean = dict(clipped_runs=0, nonfinite_samples=0, dc_offset_dbfs=-120.0, effective_bits=24,
                 leading_silence_s=0.5, trailing_silence_s=1.0, dropouts=0, silent_channels=[],
                 bandwidth_fraction=0.9, bandwidth_note=None, container_intact=True)  # fmt: skip
    v = values(**{**clean, **over})
    m = Measurement(path=path, values=v)
    verdict = evaluate(m, load_profile("podcast-stereo"))
    return FileResult(path, verdict.status, m, verdict)


def batch() -> list[FileResult]:
    quiet = dict(integrated_lufs=-21.0, true_peak_dbtp=-8.0, sample_peak_dbfs=-8.5)
    return [
        judged("show/ep01-quiet.wav", **quiet),  # 5 LU under: +5 dB, peak to -3 dBTP
        judged("show/ep02-hot.wav", integrated_lufs=-12.0, true_peak_dbtp=1.2),
        judged("show/ep03-long-head.wav", integrated_lufs=-16.0, leading_silence_s=9.5),
        judged("show/ep04-dead-right.wav", integrated_lufs=-16.0, silent_channels=[1]),
        FileResult.failed("show/ep05-notes.wav", "show/ep05-notes.wav: cannot open as audio"),
        judged("show/ep06-fine.wav", integrated_lufs=-16.0),
    ]


def test_each_flag_lands_in_the_group_of_its_fix():
    items = fix_items(batch())
    by_file: dict[str, set[str]] = {}
    for it in items:
        by_file.setdefault(it.result.path.rsplit("/", 1)[1], set()).add(it.group)
    assert "gain" in by_file["ep01-quiet.wav"]  # plain gain is enough: +5 dB
    assert "dynamics" in by_file["ep02-hot.wav"]  # a true-peak over: limit, not gain
    assert "edges" in by_file["ep03-long-head.wav"]
    assert "routing" in by_file["ep04-dead-right.wav"]
    assert by_file["ep05-notes.wav"] == {"resend"}  # could not be checked: in the list too
    assert "ep06-fine.wav" not in by_file  # nothing to fix
    order = [g.key for g in GROUPS]
    assert [order.index(it.group) for it in items] == sorted(order.index(it.group) for it in items)


def test_gain_item_carries_the_numbers():
    gain = next(it for it in fix_items(batch()) if it.group == "gain")
    # arithmetic: target -16 LUFS minus measured -21 LUFS = +5.00 dB
    assert gain.todo.startswith("apply +5.00 dB")


def test_fixes_csv_and_flags_csv_list_the_unchecked_file(tmp_path):
    paths = write_reports(tmp_path, make_run(), batch())
    assert paths["fixes"] == tmp_path / REPORT_FILES["fixes"] == tmp_path / "fixes.csv"
    with open(paths["fixes"], newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert list(rows[0]) == ["fix", "fix_title", "path", "status", "severity", "rule", "what",
                             "measured", "unit", "limit_low", "limit_high", "limit_text",
                             "position_s", "todo"]  # fmt: skip
    first = rows[0]  # group order: re-export first, the unreadable file
    assert (first["fix"], first["path"], first["rule"]) == (
        "resend",
        "show/ep05-notes.wav",
        "not_checked",
    )
    gain = next(r for r in rows if r["fix"] == "gain")
    # podcast-stereo: -16 LUFS +- 1 LU -> limit_low -17, limit_high -15
    assert (gain["measured"], gain["limit_low"], gain["limit_high"]) == ("-21", "-17", "-15")
    with open(paths["flags"], newline="", encoding="utf-8") as handle:
        flags = list(csv.DictReader(handle))
    assert any(r["path"] == "show/ep05-notes.wav" and r["severity"] == "error" for r in flags)


def test_report_html_opens_with_the_fix_list(tmp_path):
    paths = write_reports(tmp_path, make_run(), batch())
    page = paths["html"].read_text(encoding="utf-8")
    fixes_at, table_at = page.index('id="fixes"'), page.index('id="file-table"')
    assert fixes_at < table_at
    section = page[fixes_at:table_at]
    titles = [g.title for g in GROUPS if f'id="fg-{g.key}"' in section]
    assert titles[0] == "Re-export or re-upload"
    assert "Apply gain" in titles and "Limit or remix" in titles
    assert "ep05-notes.wav" in section and "apply +5.00 dB" in section
    assert "-21 LUFS (limit -17 to -15 LUFS)" in section
