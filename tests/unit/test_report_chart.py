"""The batch chart: loudness against true peak for every file, with the acceptance region.

Expected positions are arithmetic on the chart's own axis mapping; the judged loudness of
a mono file under a dual-mono profile is the plain value + 3.0103 LU (BS.1770 channel
weights: the same signal on two channels doubles the power).
"""

from __future__ import annotations

import re

from numpy.testing import assert_allclose
from test_report_csv import values

from checker.model.measurement import Measurement
from checker.model.results import FileResult
from checker.model.verdict import Verdict
from checker.report.chart import batch_chart, points

LIMITS = {"band_low_lufs": -17.0, "band_high_lufs": -15.0, "target_lufs": -16.0,
          "ceiling_dbtp": -1.0}  # fmt: skip


def row(path: str, status: str, **over) -> FileResult:
    m = Measurement(path=path, values=values(**over))
    return FileResult(path, status, m, Verdict(status, ()))


def batch() -> list[FileResult]:
    return [
        row("a/in.wav", "pass", integrated_lufs=-16.2, true_peak_dbtp=-2.0),
        row("a/loud.wav", "fail", integrated_lufs=-12.0, true_peak_dbtp=0.5),
        row("a/quiet.wav", "warn", integrated_lufs=-20.0, true_peak_dbtp=-6.0),
        row("a/silent.wav", "fail", integrated_lufs=None, true_peak_dbtp=float("-inf")),
        row(
            "a/mono.wav",
            "pass",
            channels=1,
            integrated_lufs=-18.96,
            integrated_dual_mono_lufs=-18.96 + 3.0103,
            true_peak_dbtp=-3.0,
        ),  # fmt: skip
        FileResult.failed("a/broken.wav", "cannot open"),
    ]


def test_every_file_with_both_values_is_one_mark():
    svg = batch_chart(batch(), LIMITS, "dual_mono", "a/")
    assert svg.count('<g class="pt ') == 4  # silent and unreadable files are not drawn
    assert "1 without a finite loudness or true peak are not drawn" in svg
    # inside the region: -16.2 LUFS / -2 dBTP and the mono file judged at -15.95 LUFS / -3 dBTP
    assert "4 files drawn; 2 inside the profile&#x27;s acceptance region" in svg
    assert svg.count('class="accept"') == 1
    assert re.search(r'<g class="pt pt-fail"><title>loud\.wav: -12\.0 LUFS, \+0\.5 dBTP', svg)


def test_a_mono_file_is_placed_at_its_judged_loudness():
    pts = {p["path"]: p for p in points(batch(), "dual_mono")}
    assert_allclose(pts["a/mono.wav"]["x"], -18.96 + 3.0103, rtol=0, atol=1e-12)
    plain = {p["path"]: p for p in points(batch(), "single_channel")}
    assert_allclose(plain["a/mono.wav"]["x"], -18.96, rtol=0, atol=1e-12)


def test_the_region_box_spans_the_band_under_the_ceiling():
    svg = batch_chart(batch(), LIMITS, "", "")
    box = re.search(r'class="accept" x="([\d.]+)" y="([\d.]+)" width="([\d.]+)"', svg)
    x, y, width = (float(g) for g in box.groups())
    # axis: loudness from floor(-20 - 2) = -22 to ceil(-12 + 2) = -10 over 720 - 58 - 18 px;
    # the band -17..-15 LUFS starts at 58 + 5/12 * 644 and is 2/12 * 644 wide
    assert_allclose([x, width], [58 + 5 / 12 * 644, 2 / 12 * 644], rtol=0, atol=0.06)
    # true peak from floor(-6 - 2) = -8 to ceil(0.5 + 1.5) = 2 over 360 - 16 - 46 px;
    # the ceiling -1 dBTP sits 3/10 of the way down
    assert_allclose(y, 16 + 3 / 10 * 298, rtol=0, atol=0.06)


def test_no_drawable_file_means_no_chart():
    assert batch_chart([FileResult.failed("x.wav", "cannot open")], LIMITS) == ""
