"""parts.csv: one spreadsheet-clean row per programme part, beside report.csv."""

from __future__ import annotations

import csv
import json

from checker.model.measurement import Measurement
from checker.model.results import FileResult, RunInfo
from checker.model.serial import dumps, from_json_safe
from checker.model.verdict import Verdict
from checker.report import write_reports

PARTS = [
    {"part": 1, "start_s": 3.0, "end_s": 9.04, "duration_s": 6.04, "integrated_lufs": -20.004,
     "integrated_note": None, "max_short_term_lufs": -19.5, "true_peak_dbtp": -3.21,
     "true_peak_note": None, "sample_peak_dbfs": float("-inf")},
    {"part": 2, "start_s": 12.0, "end_s": 13.0, "duration_s": 1.0, "integrated_lufs": None,
     "integrated_note": "=below absolute gate", "max_short_term_lufs": None,
     "true_peak_dbtp": -40.0, "true_peak_note": None, "sample_peak_dbfs": -41.0},
]  # fmt: skip


def _result(path: str, parts) -> FileResult:
    values = {"integrated_lufs": -21.0, "parts_count": len(parts or []), "parts": parts}
    m = Measurement(path=path, values=values)
    return FileResult(path=path, status="pass", measurement=m, verdict=Verdict(status="pass"))


def test_parts_csv_rows_and_round_trip(tmp_path):
    run = RunInfo("r", "2026-01-01T00:00:00+00:00", (), "p", "P")
    results = [_result("a.wav", PARTS), _result("b.wav", None)]
    paths = write_reports(tmp_path, run, results)
    with open(paths["parts"], newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert [r["part"] for r in rows] == ["1", "2"]  # b.wav has no parts: no rows
    assert rows[0]["path"] == "a.wav"
    assert (
        rows[0]["integrated_lufs"] == "-20"
    )  # rounded to 0.01 LU, whole numbers as ints (cells.py)
    assert rows[0]["end_s"] == "9.04"
    assert rows[0]["sample_peak_dbfs"] == "-inf"
    assert rows[1]["integrated_note"] == "'=below absolute gate"  # formula-neutralised
    # report.csv carries the count, not the nested list
    with open(paths["csv"], newline="", encoding="utf-8") as handle:
        report = list(csv.DictReader(handle))
    assert "parts" not in report[0] and report[0]["parts_count"] in ("2", "0")
    # the nested list survives the Measurement round trip (JSONL, store)
    m = results[0].measurement
    assert Measurement.from_dict(m.to_dict()).values["parts"] == PARTS
    # ... and the JSON text the store and results.jsonl hold (-inf written as a string)
    stored = from_json_safe(json.loads(dumps(m.to_dict())))
    assert Measurement.from_dict(stored).values["parts"] == PARTS
