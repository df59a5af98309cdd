"""`deliverycheck measure --json` on the containers users deliver: WAV, FLAC, MP3, Ogg Vorbis.

The same seeded programme is written in each container; lossless containers must agree exactly with
WAV, lossy ones within a loose bound (the codec changes the waveform: 0.5 LU is our allowance, not a
published figure). The keys issue 2 names are present in every line.
"""

from __future__ import annotations

import io
import json
import subprocess
import sys

import pytest
import soundfile as sf
from numpy.testing import assert_allclose
from signals import programme

from checker.cli.main import main

KEYS = (
    "path",
    "container",
    "subtype",
    "sample_rate_hz",
    "channels",
    "frames",
    "duration_s",
    "integrated_lufs",
    "integrated_dual_mono_lufs",
    "loudness_range_lu",
    "max_momentary_lufs",
    "max_short_term_lufs",
    "channel_layout",
    "true_peak_dbtp",
    "sample_peak_dbfs",
)


def _strict(line: str) -> dict:
    def refuse(token):
        raise AssertionError(f"non-JSON token {token}")

    return json.loads(line, parse_constant=refuse)


def _write_all(tmp_path, channels: int) -> dict[str, str]:
    x = programme(6.0, 48_000, channels, seed=7, level_dbfs=-20.0)
    paths = {}
    for name, fmt, subtype in (
        ("wav", "WAV", "PCM_24"),
        ("flac", "FLAC", "PCM_24"),
        ("ogg", "OGG", "VORBIS"),
        ("mp3", "MP3", "MPEG_LAYER_III"),
    ):
        path = tmp_path / f"prog-{channels}.{name}"
        try:
            sf.write(str(path), x, 48_000, format=fmt, subtype=subtype)
        except Exception:  # this libsndfile cannot write the format
            continue
        paths[name] = str(path)
    return paths


@pytest.mark.parametrize("channels", [1, 2])
def test_measure_json_on_each_container(tmp_path, channels):
    paths = _write_all(tmp_path, channels)
    assert {"wav", "flac"} <= set(paths)
    out, err = io.StringIO(), io.StringIO()
    assert main(["measure", "--json", *paths.values()], out, err) == 0, err.getvalue()
    rows = {r["path"]: r for r in map(_strict, out.getvalue().splitlines())}
    assert len(rows) == len(paths)
    for row in rows.values():
        assert set(KEYS) <= set(row)
    wav, flac = rows[paths["wav"]], rows[paths["flac"]]
    # FLAC is lossless, but libsndfile's float -> 24-bit conversion rounds differently for WAV
    # and FLAC (1 LSB, about 1e-6 dB at these levels): the two agree to 1e-4.
    assert_allclose(flac["sample_peak_dbfs"], wav["sample_peak_dbfs"], atol=1e-4)
    assert_allclose(flac["true_peak_dbtp"], wav["true_peak_dbtp"], atol=1e-4)
    assert_allclose(flac["integrated_lufs"], wav["integrated_lufs"], atol=1e-4)
    if channels == 1:
        # BS.1770 mono convention: dual mono reads 10 log10(2) = 3.01 LU higher.
        assert_allclose(
            wav["integrated_dual_mono_lufs"] - wav["integrated_lufs"], 3.0103, atol=1e-4
        )
    else:
        assert wav["integrated_dual_mono_lufs"] is None
    for lossy in ("ogg", "mp3"):
        if lossy in paths:
            row = rows[paths[lossy]]
            assert_allclose(row["integrated_lufs"], wav["integrated_lufs"], atol=0.5)
            assert row["subtype"] in ("VORBIS", "MPEG_LAYER_III")
            assert row["effective_bits"] is None  # no integer grid in a lossy stream


def test_measure_by_subprocess_exit_status_and_error_line(tmp_path):
    good = tmp_path / "good.wav"
    sf.write(str(good), programme(2.0, 48_000, 2, seed=1), 48_000, subtype="PCM_16")
    bad = tmp_path / "bad.wav"
    bad.write_text("not audio")
    proc = subprocess.run(
        [sys.executable, "-m", "checker", "measure", "--json", str(bad), str(good)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert proc.returncode == 3  # README: 3 = at least one file could not be measured
    lines = [_strict(x) for x in proc.stdout.splitlines()]
    assert lines[0]["path"] == str(bad) and "cannot open as audio" in lines[0]["error"]
    assert lines[1]["path"] == str(good) and lines[1]["integrated_lufs"] is not None
    assert "Traceback" not in proc.stderr
