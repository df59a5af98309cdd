"""Reports: report.csv, flags.csv, fixes.csv, parts.csv, results.jsonl and a self-contained
report.html.

The one entry point the batch runner calls is :func:`write_reports`; every file is
written atomically (temporary file in the same directory, fsync, rename). ``frame`` builds
the tables behind the CSV files, ``cells`` makes them spreadsheet-clean, ``judged`` says which
value a row shows, ``html``/``htmldata``/``chart`` draw the page, ``fixes`` groups the fix list,
``prepared`` makes each file's rows while the batch runs.

May import every stage below it (``model`` up to ``run``); reads results, never measures.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import UTC, datetime
from pathlib import Path

from checker.model.results import FileResult, RunInfo
from checker.report.atomic import write_text_atomic
from checker.report.csv_out import write_csv
from checker.report.fixes import fixes_frame
from checker.report.frame import flags_frame, not_checked_frame, results_frame, sorted_results
from checker.report.html import render_html
from checker.report.jsonl import write_jsonl
from checker.report.parts import parts_frame
from checker.report.prepared import PreparedRows

REPORT_FILES = {
    "csv": "report.csv",
    "flags": "flags.csv",
    "fixes": "fixes.csv",
    "parts": "parts.csv",
    "html": "report.html",
    "jsonl": "results.jsonl",
}


def write_reports(
    out_dir: Path,
    run: RunInfo,
    results: Sequence[FileResult],
    prepared: PreparedRows | None = None,
) -> dict[str, Path]:
    """Write the six reports into ``out_dir`` (created if missing); returns name -> path.
    ``prepared``: per-file pieces made while the batch ran (checker.report.prepared); the
    files are byte for byte the same with or without it."""
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    prepared = prepared or PreparedRows()  # an empty one makes every piece now
    ordered = sorted_results(results)
    paths = {name: out_dir / file for name, file in REPORT_FILES.items()}
    frame = results_frame(ordered, prepared.csv_row)
    if run.not_checked:  # files that are clearly not deliverables: listed after the rest
        frame = frame.extended(not_checked_frame(run, frame.columns))
    write_csv(frame, paths["csv"])
    write_csv(flags_frame(ordered), paths["flags"])
    write_csv(fixes_frame(ordered), paths["fixes"])
    write_csv(parts_frame(ordered), paths["parts"])  # programme parts (a header when none)
    write_jsonl(ordered, paths["jsonl"], not_checked=run.not_checked, line=prepared.jsonl_line)
    generated_at = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    page = render_html(run, ordered, generated_at=generated_at, prepared=prepared)
    write_text_atomic(paths["html"], page)
    return paths


__all__ = ["REPORT_FILES", "PreparedRows", "write_reports"]
