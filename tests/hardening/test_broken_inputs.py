"""Broken, hostile and odd inputs: each gets an explicit outcome, never a traceback or a NaN.

Outcomes are either an AudioReadError / UnsupportedAudioError whose one-line message is
asserted word for word, or a Measurement whose findings say what is wrong. Expected
durations come from how tests/corpus.py builds each item (frames / 48000 Hz); reference
values come from measuring an intact file holding the same samples the broken one decodes
to, so "frames actually decoded are what the measurement uses" is checked value by value.
"""

from __future__ import annotations

import importlib
import io
import json
import math
import os
import re
import shutil
import tempfile
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from corpus import (
    CORPUS,
    INF_COUNT,
    INF_FIRST_FRAME,
    NAMED_FILES,
    NAN_COUNT,
    NAN_FIRST_FRAME,
    RATE_HZ,
    good_wav,
    mp3_available,
    named_file,
    sine_pcm16,
    wav_bytes,
)
from numpy.testing import assert_allclose

from checker.analysis.onepass import measure
from checker.cli.main import main
from checker.meters.base import MeasureOptions
from checker.model.errors import AudioReadError, UnsupportedAudioError
from checker.model.measurement import Measurement
from checker.model.serial import dumps

# checker/__init__.py exports the function measure, which shadows the module attribute.
measure_module = importlib.import_module("checker.analysis.onepass")

NO_MP3 = "this libsndfile cannot write MP3 (needs libsndfile >= 1.1 built with LAME/mpg123)"


def nan_paths(value, where: str = "") -> list[str]:
    """Every place in a nested dict/list that holds a float NaN."""
    if isinstance(value, float) and math.isnan(value):
        return [where]
    if isinstance(value, dict):
        return [p for k, v in value.items() for p in nan_paths(v, f"{where}.{k}")]
    if isinstance(value, (list, tuple)):
        return [p for i, v in enumerate(value) for p in nan_paths(v, f"{where}[{i}]")]
    return []


def _no_constant(token: str):
    raise ValueError(f"non-standard JSON constant {token}")


def strict_json(line: str):
    """json.loads that refuses NaN / Infinity / -Infinity tokens."""
    return json.loads(line, parse_constant=_no_constant)


def make(name: str, tmp_path: Path) -> Path:
    if name == "mp3_garbage_middle" and not mp3_available():
        pytest.skip(NO_MP3)
    return CORPUS[name](tmp_path)


def checked_measure(path: Path, options: MeasureOptions | None = None) -> Measurement:
    m = measure(str(path), options)
    d = m.to_dict(timeline=True)
    assert nan_paths(d) == []
    strict_json(dumps(d))  # the project's JSON writer: no NaN/Infinity tokens
    return m


def comparable(m: Measurement) -> dict:
    """Values that depend on the decoded samples only (not on path, header or notes)."""
    d = m.to_dict(timeline=True)
    for key in (
        "path",
        "frames_declared",
        "findings",
        "header_findings",
        "nonfinite_samples",
        "container_intact",
        "undeclared_frames",
    ):
        d.pop(key)
    return d


# --- Items that must be refused, with the message asserted --------------------------------

#: name -> (exception class, message after "<path>: ")
REFUSED = {
    # check_file: an empty file is named as such, not "Format not recognised".
    "zero_byte": (AudioReadError, "size = 0 bytes (expected an audio file)"),
    # libsndfile's own reason for files that are not audio at all.
    "text_as_wav": (AudioReadError, "cannot open as audio (Format not recognised.)"),
    "image_as_wav": (AudioReadError, "cannot open as audio (Format not recognised.)"),
    "channels_0": (AudioReadError, "cannot open as audio (Channel count is zero.)"),
    # audio.py limits: 1 to 64 channels, 8 kHz to 768 kHz.
    "channels_1000": (UnsupportedAudioError, "channels = 1000 (expected 1 to 64)"),
    "rate_1_hz": (UnsupportedAudioError, "sample_rate_hz = 1 (expected 8000 to 768000 Hz)"),
    "rate_10_mhz": (
        UnsupportedAudioError,
        "sample_rate_hz = 10000000 (expected 8000 to 768000 Hz)",
    ),
    # 2.000 s of 16-bit mono = 192000 bytes after a data chunk that says 0.
    "riff_size_zero": (
        AudioReadError,
        "'data' chunk size = 0 with 192000 bytes after it (expected the size of the audio; "
        "the header was never finalised, e.g. a recorder that did not close the file)",
    ),
    "codec_mp3_in_wav": (
        AudioReadError,
        "cannot open as audio (the audio stream cannot be decoded)",
    ),
    "codec_unknown": (
        UnsupportedAudioError,
        "wav_format_tag = 0x7A7A (expected a codec this reader decodes, "
        "e.g. 0x0001 PCM or 0x0003 float)",
    ),
    "dangling_symlink": (AudioReadError, "dangling symbolic link (its target does not exist)"),
    "directory_named_wav": (AudioReadError, "is a directory (expected an audio file)"),
}


@pytest.mark.parametrize("name", sorted(REFUSED))
def test_refused_with_a_one_line_message(tmp_path, name):
    path = make(name, tmp_path)
    cls, text = REFUSED[name]
    with pytest.raises(AudioReadError) as info:
        measure(str(path))
    assert type(info.value) is cls
    assert str(info.value) == f"{path}: {text}"
    assert "\n" not in str(info.value)


def test_mp3_with_garbage_in_the_middle_fails_at_the_damage(tmp_path):
    path = make("mp3_garbage_middle", tmp_path)
    with pytest.raises(AudioReadError) as info:
        measure(str(path))
    message = str(info.value)
    assert "\n" not in message
    found = re.fullmatch(
        re.escape(str(path)) + r": decoding failed at (\d+\.\d\d) s \(.+\)", message
    )
    assert found, message
    # The first third of the bytes (about 1.0 s of the 3.0 s file) is intact: the decoder
    # must get some way in and must stop before the intact part ends (corpus.py layout).
    assert 0.0 < float(found.group(1)) <= 1.1


def test_mid_file_decode_error_is_an_error_not_a_partial_result(tmp_path):
    # Documented choice (audio.py): a decoding error part-way makes the whole file an
    # error naming the position; no partial measurement is returned.
    path = make("mp3_garbage_middle", tmp_path)
    with pytest.raises(AudioReadError, match="decoding failed at"):
        measure(str(path), MeasureOptions(block_frames=1024))


# --- Items that are measured, with findings -------------------------------------------------


def test_truncated_wav_uses_decoded_frames_and_says_truncated(tmp_path):
    path = make("data_claims_more", tmp_path)
    m = checked_measure(path)
    # corpus.py: header declares 3.000 s (144000 frames), 115200 frames (2.400 s) present.
    assert m.frames == 115_200
    assert m.frames_declared == 144_000
    assert_allclose(m.duration_s, 2.4, rtol=0, atol=0)
    assert (
        "header declares 3.000 s (144000 frames), 2.400 s (115200 frames) decoded: truncated"
        in m.findings
    )
    # Same samples as an intact 2.4 s file: every measured value agrees.
    ref = tmp_path / "ref.wav"
    ref.write_bytes(wav_bytes(sine_pcm16(3.0)[: 2 * 115_200]))
    assert comparable(m) == comparable(checked_measure(ref))


def test_header_only_is_measured_as_no_audio(tmp_path):
    m = checked_measure(make("header_only", tmp_path))
    assert (m.frames, m.frames_declared, m.duration_s) == (0, 48_000, 0.0)
    assert "header declares 1.000 s (48000 frames), 0.000 s (0 frames) decoded: truncated" in (
        m.findings
    )
    assert "no audio (0 frames)" in m.findings
    assert m.integrated_lufs is None and m.integrated_note


def test_zero_frames_is_measured_as_no_audio(tmp_path):
    m = checked_measure(make("zero_frames", tmp_path))
    assert (m.frames, m.frames_declared, m.duration_s) == (0, 0, 0.0)
    assert m.findings == ("no audio (0 frames)",)
    assert m.integrated_lufs is None and m.integrated_note
    assert m.sample_peak_dbfs == -math.inf  # the house convention for no signal
    # Every undefined value says why in the same words, not "shorter than one 400 ms block".
    notes = {k: v for k, v in m.values.items() if k.endswith("_note") and v}
    assert "integrated_note" in notes and "loudness_range_note" in notes
    assert set(notes.values()) == {"no audio (0 frames)"}, notes


def test_empty_data_chunk_followed_by_a_chunk_is_measured_not_refused(tmp_path):
    # Contrast with riff_size_zero: here a LIST chunk, not audio, follows the empty data chunk.
    m = checked_measure(make("zero_frames_then_chunk", tmp_path))
    assert (m.frames, m.duration_s) == (0, 0.0)
    assert m.findings == ("no audio (0 frames)",)


def test_data_chunk_claiming_less_is_measured_as_declared(tmp_path):
    m = checked_measure(make("data_claims_less", tmp_path))
    # The data chunk says 96000 bytes = 48000 frames; what follows is not audio by the header.
    assert (m.frames, m.duration_s) == (48_000, 1.0)
    finding = next(f for f in m.findings if "unreadable chunk header at byte 96044" in f)
    # It says what the bytes probably are and what was measured (96000 declared + 44 header).
    assert "bytes after the 'data' chunk (96000 bytes declared) are not a chunk" in finding
    assert "only the declared audio was measured" in finding


def test_riff_size_zero_with_good_data_size_is_measured_with_a_finding(tmp_path):
    m = checked_measure(make("riff_size_zero_data_ok", tmp_path))
    assert (m.frames, m.duration_s) == (48_000, 1.0)
    assert any(f.startswith("RIFF header claims 8 bytes") for f in m.findings), m.findings


def test_flac_without_length_reads_every_frame(tmp_path):
    path = make("flac_no_length", tmp_path)
    # libsndfile reports 2**63 - 1 frames for it (its log says "bumping to SF_COUNT_MAX").
    assert sf.info(str(path)).frames == 2**63 - 1
    m = checked_measure(path)
    assert (m.frames, m.frames_declared, m.duration_s) == (48_000, None, 1.0)
    assert "header gives no length; 1.000 s (48000 frames) decoded" in m.findings
    # Same codes as an intact FLAC written from the same samples.
    ref = tmp_path / "ref.flac"
    sf.write(str(ref), 0.1 * np.sin(2 * np.pi * 1000.0 * np.arange(48_000) / 48_000), 48_000,
             subtype="PCM_16", format="FLAC")  # fmt: skip
    assert comparable(m) == comparable(checked_measure(ref))


@pytest.mark.parametrize("block_frames", [48_000, 1_000, 57_605])
def test_nan_and_inf_are_counted_and_measured_as_zero(tmp_path, block_frames):
    path = make("float_nan_inf", tmp_path)
    m = checked_measure(path, MeasureOptions(block_frames=block_frames))
    # corpus.py: 12 NaN from frame 57600 (1.200 s), 3 Inf from frame 72000 (1.500 s), 48 kHz.
    assert NAN_FIRST_FRAME / RATE_HZ == 1.2 and INF_FIRST_FRAME / RATE_HZ == 1.5
    assert m.nonfinite_samples == NAN_COUNT + INF_COUNT
    assert any(f.startswith("NaN samples: 12, first at 1.200 s") for f in m.findings)
    assert any(f.startswith("Inf samples: 3, first at 1.500 s") for f in m.findings)
    for key in ("integrated_lufs", "true_peak_dbtp", "sample_peak_dbfs", "max_momentary_lufs"):
        assert math.isfinite(m.values[key]), key
    # Every meter sees them as 0: identical to the same file with zeros written there.
    x = sf.read(str(path), dtype="float32")[0]
    x[~np.isfinite(x)] = 0.0
    ref = tmp_path / "zeros.wav"
    ref.write_bytes(wav_bytes(x.astype("<f4").tobytes(), bits=32, format_tag=3))
    assert comparable(m) == comparable(checked_measure(ref, MeasureOptions(block_frames)))


# --- Permissions --------------------------------------------------------------------------


def _as_nobody(paths: list[Path]) -> list[str]:
    """measure() each path in a forked child running as uid/gid 65534; one answer per path
    ("measured" or the error message), or a single "SETUP ..." if privileges cannot drop."""
    read_end, write_end = os.pipe()
    pid = os.fork()
    if pid == 0:  # child: never return into pytest
        answers = []
        try:
            os.setgid(65534)
            os.setuid(65534)
            for p in paths:
                try:
                    measure(str(p))
                    answers.append("measured")
                except AudioReadError as exc:
                    answers.append(str(exc))
        except BaseException as exc:  # noqa: BLE001 - reported to the parent
            answers = [f"SETUP {type(exc).__name__}: {exc}"]
        os.write(write_end, "\0".join(answers).encode())
        os._exit(0)
    os.close(write_end)
    with os.fdopen(read_end, "rb") as fh:
        answers = fh.read().decode().split("\0")
    os.waitpid(pid, 0)
    return answers


def test_unreadable_file_is_refused(tmp_path):
    if os.geteuid() != 0:
        path = CORPUS["unreadable"](tmp_path)
        with pytest.raises(AudioReadError) as info:
            measure(str(path))
        assert str(info.value) == f"{path}: cannot open (Permission denied)"
        return
    # Root reads mode-000 files anyway, so an unprivileged forked child reads them (modules
    # are imported first: the child may not read the interpreter's tree). pytest's tmp_path
    # sits under a root-only folder, so these two files live in a world-searchable one.
    folder = Path(tempfile.mkdtemp(prefix="deliverycheck-perm-"))
    try:
        os.chmod(folder, 0o755)
        control = checked_measure(good_wav(folder / "readable.wav"))  # also warms the imports
        path = CORPUS["unreadable"](folder)
        answers = _as_nobody([Path(control.path), path])
    finally:
        shutil.rmtree(folder)
    if answers[0].startswith("SETUP"):
        pytest.skip(f"running as root and cannot drop privileges to test it ({answers[0]})")
    # The readable control proves the refusal comes from the file's mode, not the folder.
    assert answers == ["measured", f"{path}: cannot open (Permission denied)"]


# --- Hostile file names ---------------------------------------------------------------------


@pytest.mark.parametrize("key", sorted(NAMED_FILES))
def test_hostile_names_are_measured_and_kept_verbatim(tmp_path, key):
    path = named_file(tmp_path, key)
    m = checked_measure(path)
    assert m.path == str(path)
    assert m.findings == ()
    ref = checked_measure(good_wav(tmp_path / "plain.wav"))
    assert comparable(m) == comparable(ref)


def test_hostile_names_through_the_cli_one_json_line_each(tmp_path):
    paths = [str(named_file(tmp_path, key)) for key in sorted(NAMED_FILES)]
    out, err = io.StringIO(), io.StringIO()
    assert main(["measure", "--json", *paths], out=out, err=err) == 0
    lines = out.getvalue().splitlines()
    assert len(lines) == len(paths)  # a newline inside a name is escaped, not a line break
    assert [strict_json(line)["path"] for line in lines] == paths
    assert err.getvalue() == ""


def test_dash_name_after_double_dash(tmp_path, monkeypatch):
    named_file(tmp_path, "formula_minus")
    monkeypatch.chdir(tmp_path)
    out, err = io.StringIO(), io.StringIO()
    assert main(["measure", "--json", "--", "-x.wav"], out=out, err=err) == 0
    assert strict_json(out.getvalue())["path"] == "-x.wav"


# --- Files that change while being read ------------------------------------------------------


def _changing(path: Path, change):
    """A read_blocks that calls change(path) after yielding the first block."""
    real = measure_module.read_blocks

    def read_blocks(p, block_frames, **kwargs):
        info, blocks = real(p, block_frames, **kwargs)

        def gen():
            for i, block in enumerate(blocks):
                yield block
                if i == 0:
                    change(path)

        return info, gen()

    return read_blocks


def test_file_shrinking_while_read_is_truncated_with_findings(tmp_path, monkeypatch):
    path = good_wav(tmp_path / "shrinking.wav", duration_s=2.0)
    keep = 44 + 2 * 24_000  # header + 0.5 s

    def shrink(p):
        os.truncate(p, keep)

    monkeypatch.setattr(measure_module, "read_blocks", _changing(path, shrink))
    m = checked_measure(path, MeasureOptions(block_frames=4_800))
    # At least the first block was read; libsndfile may have buffered a little more.
    assert 4_800 <= m.frames < 96_000
    assert m.frames_declared == 96_000
    assert any(f.endswith("decoded: truncated") for f in m.findings), m.findings
    assert f"file changed while it was read (size {44 + 192_000} -> {keep} bytes): " in " ".join(
        m.findings
    )


def test_file_growing_while_read_is_measured_as_opened_with_a_finding(tmp_path, monkeypatch):
    path = good_wav(tmp_path / "growing.wav", duration_s=1.0)

    def grow(p):
        with open(p, "ab") as fh:
            fh.write(sine_pcm16(1.0))

    monkeypatch.setattr(measure_module, "read_blocks", _changing(path, grow))
    m = checked_measure(path, MeasureOptions(block_frames=4_800))
    assert (m.frames, m.frames_declared) == (48_000, 48_000)
    assert any(
        f.startswith(f"file changed while it was read (size {44 + 96_000} -> {44 + 192_000} bytes")
        for f in m.findings
    ), m.findings


# --- The whole corpus through the CLI ----------------------------------------------------------


def test_cli_runs_the_whole_corpus_exit_3_and_strict_json(tmp_path):
    names = [n for n in sorted(CORPUS) if n != "mp3_garbage_middle" or mp3_available()]
    paths = [str(CORPUS[name](tmp_path)) for name in names]
    paths.append(str(good_wav(tmp_path / "good.wav")))
    out, err = io.StringIO(), io.StringIO()
    # errors.py: exit code 3 = at least one file could not be measured.
    assert main(["measure", "--json", *paths], out=out, err=err) == 3
    lines = out.getvalue().splitlines()
    assert len(lines) == len(paths)
    rows = {row["path"]: row for row in map(strict_json, lines)}
    assert list(rows) == paths
    # tests/unit/test_containers.py: a cut CAF and a cut FLAC are refused naming the cut.
    refused = set(REFUSED) | {"mp3_garbage_middle", "caf_cut", "flac_cut"}
    if os.geteuid() != 0:
        refused.add("unreadable")
    for name, path in zip(names, paths[:-1], strict=True):
        row = rows[path]
        if name in refused:
            assert set(row) == {"path", "error"}, name
            assert row["error"].startswith(f"{path}: ") and "\n" not in row["error"], name
        else:
            assert "error" not in row and row["frames"] >= 0, name
            assert nan_paths(row) == []
    assert "error" not in rows[paths[-1]] and rows[paths[-1]]["findings"] == []
    assert "Traceback" not in err.getvalue() and "internal error" not in err.getvalue()


def test_cli_exit_0_when_every_file_is_measured_even_with_findings(tmp_path):
    paths = [str(CORPUS[n](tmp_path)) for n in ("zero_frames", "data_claims_more", "float_nan_inf")]
    out, err = io.StringIO(), io.StringIO()
    assert main(["measure", "--json", *paths], out=out, err=err) == 0
    rows = [strict_json(line) for line in out.getvalue().splitlines()]
    assert all(row["findings"] for row in rows)
