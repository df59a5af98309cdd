"""checker.report.prepared: report pieces made while the batch runs give the same files.

The expected files are the ones write_reports makes without prepared pieces (the writer
before this module existed); the fixtures are test_report_csv's (every kind of row: pass,
fail, silence with -inf, an error row, a stem set, hostile names), plus a mono file among
stereo ones (fewer channel columns) and a mono file judged as dual mono.
"""

from __future__ import annotations

import dataclasses
import re

import pytest
from test_report_csv import make_results, make_run, result, values

import checker.report.prepared as prepared_module
from checker.model.results import FileResult
from checker.report import REPORT_FILES, write_reports
from checker.report.frame import csv_file_row
from checker.report.prepared import PreparedRows

WRITTEN_AT = re.compile(rb"<time>\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ</time>")  # generated_at


def batch() -> list[FileResult]:
    mono = values(
        channels=1,
        channel_layout="M",
        true_peak_channel_dbtp=[-1.7],
        sample_peak_channel_dbfs=[-2.0],
        dc_offset_channel_percent=[0.01],
        channel_correlations=[],
        integrated_dual_mono_lufs=-20.1,
    )
    return [*make_results(), result("mono/voice.wav", "pass", mono, seed=7)]


def files(folder) -> dict[str, bytes]:
    return {
        name: WRITTEN_AT.sub(b"T", (folder / name).read_bytes()) for name in REPORT_FILES.values()
    }


@pytest.mark.parametrize("mono_loudness", ["", "dual_mono"])
def test_prepared_pieces_give_the_same_files_byte_for_byte(tmp_path, mono_loudness):
    run = dataclasses.replace(make_run(), mono_loudness=mono_loudness)
    results = batch()
    prepared = PreparedRows()
    for r in results:
        prepared.add(run, r)
    assert len(prepared) == len(results)  # every piece was made early
    write_reports(tmp_path / "plain", run, results)
    write_reports(tmp_path / "prepared", run, results, prepared)
    assert files(tmp_path / "prepared") == files(tmp_path / "plain")


def test_pieces_are_used_only_for_the_result_they_were_made_from():
    run = make_run()
    results = batch()
    prepared = PreparedRows()
    prepared.add(run, results[0])
    early = prepared.csv_row(results[0], 2)
    assert prepared.csv_row(results[0], 2) is early  # made once, used as it is
    twin = dataclasses.replace(results[0])  # equal, but another object: made now
    assert prepared.csv_row(twin, 2) is not early
    assert prepared.csv_row(twin, 2) == csv_file_row(twin, 2)
    assert prepared.detail_json(twin, run) is None
    assert prepared.detail_json(results[0], run) is not None
    # Another profile's limits or mono rule: the HTML detail is made again.
    other = dataclasses.replace(run, profile_limits=run.profile_limits[:1])
    assert prepared.detail_json(results[0], other) is None
    assert prepared.detail_json(results[0], dataclasses.replace(run, mono_loudness="x")) is None


def test_a_value_key_that_looks_like_a_channel_column_gets_no_early_row(tmp_path):
    run = make_run()
    # Before the per-channel list: report.csv's third true-peak column is then the list's
    # (empty for two channels), which a row made for two channels would not know.
    odd = result("odd/ch.wav", "pass", {"true_peak_ch3_dbtp": -9.0, **values()}, seed=8)
    wide = result(
        "wide/six.wav", "pass", values(channels=6, true_peak_channel_dbtp=[-1.0] * 6), seed=9
    )
    results = [odd, wide]
    prepared = PreparedRows()
    for r in results:
        prepared.add(run, r)
    assert prepared._entry(odd)[1] is None and prepared._entry(wide)[1] is not None
    write_reports(tmp_path / "plain", run, results)
    write_reports(tmp_path / "prepared", run, results, prepared)
    assert files(tmp_path / "prepared") == files(tmp_path / "plain")


def test_a_piece_that_cannot_be_made_early_fails_when_the_reports_are_written(
    tmp_path, monkeypatch
):
    def broken(r):
        raise RuntimeError(f"no line for {r.path}")

    monkeypatch.setattr(prepared_module, "result_line", broken)
    run, results = make_run(), batch()
    prepared = PreparedRows()
    prepared.add(run, results[0])  # never raises in the batch
    assert len(prepared) == 0
    with pytest.raises(RuntimeError, match="no line for"):
        write_reports(tmp_path, run, results, prepared)
