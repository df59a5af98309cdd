"""A broadcast-style delivery end to end: a 5.1 file with line-up tone, two parts and a downmix that
overs, checked against a profile that asks for all of it; the reports show span, parts and downmix
with their flags.

Expected values come from the generated signal (stated beside each check) and from the ITU-R BS.775
fold-down arithmetic (centre and surrounds at -3 dB, LFE dropped; docs/standards.md#programme-structure).
"""

from __future__ import annotations

import csv
import io
import json
import math

import numpy as np
import soundfile as sf
from numpy.testing import assert_allclose

from checker.cli.main import main
from checker.model.errors import EXIT_FAILED

FS = 48_000

PROFILE = """\
name = "programme-delivery-test"
title = "Test: line-up tone, parts and a stereo fold-down"
[loudness]
integrated_target_lufs = { value = -23.0, tolerance_lu = 30.0, severity = "fail", source = "test input" }
[peaks]
true_peak_max_dbtp = { value = -1.0, severity = "fail", source = "test input" }
[downmix]
downmix_true_peak_max_dbtp = { value = -1.0, severity = "fail", source = "test input" }
[programme]
span = "auto"
break_min_s = 2.0
lineup_tone_min_dbfs = { value = -18.5, severity = "fail", source = "test input" }
lineup_tone_max_dbfs = { value = -17.5, severity = "fail", source = "test input" }
part_integrated_tolerance_lu = { value = 1.0, severity = "fail", source = "test input" }
"""


def _programme(path):
    """L R C LFE Ls Rs (the default order for six channels). 2 s of 1 kHz line-up tone at -18 dBFS
    on every channel, 1 s of silence, part 1 (4 s: the same swelling chord on L, R and C, scaled to
    a peak of 0.6; each channel peaks at 20 log10(0.6) = -4.4 dBFS, the fold-down Lo = L + 0.707 C
    at 20 log10(0.6 * 1.707) = +0.2 dBFS), 3 s of silence, part 2 (4 s: noise far quieter)."""
    t = np.arange(2 * FS) / FS
    tone = 10 ** (-18 / 20) * np.sin(2 * np.pi * 1000.0 * t)
    head = np.repeat(tone[:, None], 6, axis=1)
    t1 = np.arange(4 * FS) / FS
    chord = sum(
        a * np.sin(2 * np.pi * f * t1) for f, a in ((220.0, 1.0), (330.0, 0.5), (495.0, 0.3))
    )
    s = chord * (0.75 + 0.25 * np.sin(2 * np.pi * 0.7 * t1))  # a programme, not a steady tone
    s *= 0.6 / np.max(np.abs(s))
    part1 = np.zeros((4 * FS, 6))
    part1[:, 0] = part1[:, 1] = part1[:, 2] = s
    noise = 0.02 * np.random.default_rng(7).standard_normal((4 * FS, 6))
    noise[:, 3] = 0.0
    x = np.concatenate([head, np.zeros((FS, 6)), part1, np.zeros((3 * FS, 6)), noise])
    sf.write(path, x, FS, subtype="PCM_24")


def test_a_programme_delivery_shows_span_parts_and_downmix_with_flags(tmp_path):
    src = tmp_path / "in"
    src.mkdir()
    _programme(src / "episode-5-1.wav")
    profile = tmp_path / "delivery.toml"
    profile.write_text(PROFILE)
    out = tmp_path / "out"
    err = io.StringIO()
    code = main(
        ["check", str(src), "--profile", str(profile), "--out", str(out), "--quiet"],
        out=io.StringIO(),
        err=err,
    )
    assert code == EXIT_FAILED, err.getvalue()
    with open(out / "report.csv", newline="", encoding="utf-8") as fh:
        row = next(csv.DictReader(fh))
    # the span: tone (2 s) and silence (1 s) left out; the programme ends with part 2 (at 14 s)
    assert_allclose(float(row["programme_start_s"]), 3.0, rtol=0, atol=0.1)
    assert_allclose(float(row["programme_end_s"]), 14.0, rtol=0, atol=0.1)
    assert_allclose(float(row["lineup_tone_hz"]), 1000.0, rtol=0, atol=1.0)
    assert_allclose(float(row["lineup_tone_dbfs"]), -18.0, rtol=0, atol=0.05)
    assert row["parts_count"] == "2"
    # every channel stays under -1 dBTP (-4.4 dBFS sine), the fold-down overs (+0.2 dBFS)
    assert float(row["true_peak_dbtp"]) < -4.0
    assert_allclose(
        float(row["downmix_sample_peak_dbfs"]),
        20 * math.log10(0.6 * (1 + 10 ** (-3 / 20))),
        rtol=0,
        atol=0.05,
    )
    with open(out / "flags.csv", newline="", encoding="utf-8") as fh:
        flags = {f["rule"]: f for f in csv.DictReader(fh)}
    assert "downmix_true_peak_max_dbtp" in flags
    assert "true_peak_max_dbtp" not in flags
    assert "lineup_tone_min_dbfs" not in flags and "lineup_tone_max_dbfs" not in flags
    # part 2 is about 20 dB below part 1: both parts are off the programme's own level by > 1 LU
    assert "part_integrated_tolerance_lu" in flags
    with open(out / "parts.csv", newline="", encoding="utf-8") as fh:
        parts = list(csv.DictReader(fh))
    assert [p["part"] for p in parts] == ["1", "2"]
    assert_allclose([float(p["start_s"]) for p in parts], [3.0, 10.0], rtol=0, atol=0.1)
    assert float(parts[0]["integrated_lufs"]) - float(parts[1]["integrated_lufs"]) > 10.0
    record = json.loads((out / "results.jsonl").read_text().splitlines()[0])
    assert len(record["measurement"]["parts"]) == 2
    page = (out / "report.html").read_text(encoding="utf-8")
    assert "downmix_true_peak_max_dbtp" in page and "programme_start_s" in page
