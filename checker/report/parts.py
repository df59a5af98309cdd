"""parts.csv: one row per programme part (checker/analysis/span.py ``parts``), files in
report order, cells spreadsheet-clean like report.csv (checker/report/cells.py)."""

from __future__ import annotations

from collections.abc import Sequence

from checker.model.results import FileResult
from checker.report.cells import value_cell
from checker.report.frame import Table, object_frame, sorted_results

PART_COLUMNS: tuple[str, ...] = (
    "path",
    "part",
    "start_s",
    "end_s",
    "duration_s",
    "integrated_lufs",
    "integrated_note",
    "max_short_term_lufs",
    "true_peak_dbtp",
    "true_peak_note",
    "sample_peak_dbfs",
)


def parts_frame(results: Sequence[FileResult]) -> Table:
    """Every part of every file that was split into parts (a header only when none was)."""
    rows = []
    for r in sorted_results(results):
        parts = r.measurement.values.get("parts") if r.measurement is not None else None
        for part in parts or ():
            row = {"path": r.path}
            row.update({k: value_cell(k, part.get(k)) for k in PART_COLUMNS[1:]})
            rows.append(row)
    return object_frame(rows, PART_COLUMNS)
