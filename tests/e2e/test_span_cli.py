"""``check`` and ``measure`` with a programme span and parts: the command line over a
profile's [programme] section, parts.csv beside report.csv, the cache key.

Signals are generated here (line-up tone, silence, two noise parts); expected positions
are the generated layout in seconds.
"""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import soundfile as sf
from numpy.testing import assert_allclose

from checker.cli.main import main
from checker.model.errors import EXIT_FAILED, EXIT_USAGE

FS = 48000

PROFILE = """\
name = "span-e2e"
[loudness]
integrated_target_lufs = { value = -23.0, tolerance_lu = 20.0, severity = "fail", source = "test input" }
[programme]
lineup_tone_min_dbfs = { value = -18.5, severity = "fail", source = "test input" }
part_integrated_tolerance_lu = { value = 1.0, severity = "fail", source = "test input" }
"""


def cli(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(list(argv), out=out, err=err)
    return code, out.getvalue(), err.getvalue()


def _file(folder):
    rng = np.random.default_rng(4)
    t = np.arange(2 * FS) / FS
    tone = 10 ** (-18 / 20) * np.sin(2 * np.pi * 1000 * t)
    x = np.concatenate([tone, np.zeros(FS), 0.05 * rng.standard_normal(5 * FS), np.zeros(3 * FS),
                        0.005 * rng.standard_normal(5 * FS)])  # fmt: skip
    folder.mkdir()
    sf.write(folder / "prog.wav", np.stack([x, x], axis=1), FS, subtype="PCM_24")
    return folder / "prog.wav"


def test_check_with_span_and_parts(tmp_path):
    src = _file(tmp_path / "in")
    prof = tmp_path / "span.toml"
    prof.write_text(PROFILE)
    out = tmp_path / "out"
    code, _, err = cli("check", str(src.parent), "--profile", str(prof), "--out", str(out),
                       "--span", "auto", "--break-min-s", "2", "--quiet")  # fmt: skip
    assert code == EXIT_FAILED, err  # part 2 is 20 dB quieter than part 1
    with open(out / "parts.csv", newline="", encoding="utf-8") as handle:
        parts = list(csv.DictReader(handle))
    assert [p["part"] for p in parts] == ["1", "2"]
    assert_allclose([float(p["start_s"]) for p in parts], [3.0, 11.0], rtol=0, atol=1e-9)
    with open(out / "report.csv", newline="", encoding="utf-8") as handle:
        row = next(csv.DictReader(handle))
    assert_allclose(float(row["programme_start_s"]), 3.0, rtol=0, atol=1e-9)  # generated
    assert_allclose(float(row["lineup_tone_dbfs"]), -18.0, rtol=0, atol=0.05)
    assert row["parts_count"] == "2"
    assert "part_integrated_tolerance_lu" in row["flags"] or "each part" in row["flags"]
    with open(out / "flags.csv", newline="", encoding="utf-8") as handle:
        flags = {f["rule"]: f for f in csv.DictReader(handle)}
    assert "lineup_tone_min_dbfs" not in flags  # -18 dBFS tone passes -18.5
    assert "part 1 (" in flags["part_integrated_tolerance_lu"]["message"]
    assert "part 2 (" in flags["part_integrated_tolerance_lu"]["message"]
    jl = [json.loads(line) for line in (out / "results.jsonl").read_text().splitlines()]
    file_row = next(r for r in jl if r.get("path", "").endswith("prog.wav"))
    values = file_row.get("measurement", file_row)
    assert len(values["parts"]) == 2

    # without the options the same store measures again (they are in the cache key): the
    # profile's line-up limit still turns detection on, but nothing asks for parts now
    code, _, _ = cli("check", str(src.parent), "--profile", str(prof), "--out", str(out),
                     "--quiet")  # fmt: skip
    with open(out / "report.csv", newline="", encoding="utf-8") as handle:
        row = next(csv.DictReader(handle))
    assert_allclose(float(row["programme_start_s"]), 3.0, rtol=0, atol=1e-9)
    assert row["parts_count"] == ""
    assert (out / "parts.csv").read_text().count("\n") == 1  # the header only
    # --span whole_file over the profile: the whole file, no span keys changed
    code, _, _ = cli("check", str(src.parent), "--profile", str(prof), "--out", str(out),
                     "--span", "whole_file", "--quiet")  # fmt: skip
    with open(out / "report.csv", newline="", encoding="utf-8") as handle:
        row = next(csv.DictReader(handle))
    assert row["programme_start_s"] == ""


def test_bad_points_are_usage_errors(tmp_path):
    src = _file(tmp_path / "in")
    code, _, err = cli("measure", str(src), "--in-point", "soon")
    assert code == EXIT_USAGE and "--in-point" in err
    code, _, err = cli("check", str(src.parent), "--profile", "ebu-r128", "--out", str(tmp_path / "o"),
                       "--break-min-s", "0")  # fmt: skip
    assert code == EXIT_USAGE and "--break-min-s" in err
