"""Declared lengths of AIFF, W64, AU, CAF, FLAC and Ogg against what decodes; extreme floats.

Expected frame counts come from how tests/corpus.py builds each item (byte layouts stated
there: Apple AIFF 1.3, Sun AU, FLAC STREAMINFO, Ogg pages); libsndfile's own frame count for
an intact file is the outside reference for the readers (it reads the same fields).
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from corpus import (
    CORPUS,
    CUT_FRAMES,
    EXTREME_FIRST_FRAME,
    RATE_HZ,
    half_length_samples,
    wav_bytes,
)
from numpy.testing import assert_allclose
from test_broken_inputs import checked_measure, comparable

from checker.io.containers import read_container_length
from checker.judge.rules import evaluate
from checker.meters.base import MeasureOptions
from checker.model.errors import AudioReadError
from checker.profile.load import load_profile

#: (libsndfile format, subtype, extension) of every container with a reader here.
WRITTEN = [
    ("AIFF", "PCM_16", "aiff"),
    ("AIFF", "FLOAT", "aifc"),
    ("W64", "PCM_24", "w64"),
    ("AU", "PCM_16", "au"),
    ("AU", "ULAW", "snd"),
    ("CAF", "PCM_16", "caf"),
    ("CAF", "ALAC_16", "m4a.caf"),
    ("FLAC", "PCM_24", "flac"),
    ("OGG", "VORBIS", "ogg"),
    ("OGG", "OPUS", "opus"),
]


@pytest.mark.parametrize("fmt, subtype, ext", WRITTEN, ids=[w[2] for w in WRITTEN])
def test_intact_files_declare_what_libsndfile_reads(tmp_path, fmt, subtype, ext):
    if subtype not in sf.available_subtypes(fmt):
        pytest.skip(f"this libsndfile cannot write {fmt}/{subtype}")
    p = tmp_path / f"ok.{ext}"
    x = 0.1 * np.sin(2 * np.pi * 1000.0 * np.arange(RATE_HZ + 123) / RATE_HZ)
    sf.write(str(p), np.stack([x, -x], axis=1), RATE_HZ, format=fmt, subtype=subtype)
    length = read_container_length(str(p))
    assert length is not None and length.findings == ()
    # libsndfile reads the same header fields (reference): the frame counts agree.
    assert length.declared_at(RATE_HZ) == sf.info(str(p)).frames
    m = checked_measure(p)
    assert m.container_intact is True and m.undeclared_frames == 0 and m.findings == ()


#: name -> (frames decoded, frames declared, container finding), from corpus.py's layouts.
CUT = {
    # 54-byte AIFF header + 2 bytes per frame kept; COMM declares 144000 frames, and the
    # SSND size 8 + 288000 bytes; 8 + 192000 present.
    "aiff_cut": (
        CUT_FRAMES,
        144_000,
        "'SSND' chunk claims 288008 bytes, 192008 present: the file is truncated",
    ),
    # 24-byte AU header; data size 288000 declared, 192000 present.
    "au_cut": (
        CUT_FRAMES,
        144_000,
        "AU data size claims 288000 bytes, 192000 present: the file is truncated",
    ),
}


@pytest.mark.parametrize("name", sorted(CUT))
def test_cut_files_are_measured_as_truncated_and_fail_the_profile(tmp_path, name):
    frames, declared, finding = CUT[name]
    m = checked_measure(CORPUS[name](tmp_path))
    assert (m.frames, m.frames_declared, m.container_intact) == (frames, declared, False)
    assert finding in m.findings
    assert (
        f"header declares 3.000 s ({declared} frames), 2.000 s ({frames} frames) decoded: "
        "truncated" in m.findings
    )
    # The same samples in an intact WAV: every value from the decoded frames agrees.
    ref = tmp_path / "ref.wav"
    ref.write_bytes(wav_bytes(sf.read(str(tmp_path / m.path), dtype="int16")[0].tobytes()))
    same = {k: v for k, v in comparable(m).items() if k not in ("container", "wav_format_tag")}
    assert same == {k: v for k, v in comparable(checked_measure(ref)).items() if k in same}
    verdict = evaluate(m, load_profile("ebu-r128"))
    rules = {f.rule for f in verdict.flags}
    # Flagged once: the missing frames are the truncation rule's; the container rule judges
    # only damage that count does not cover.
    assert "truncation_max_frames" in rules and "container_intact_required" not in rules
    assert verdict.status == "fail"


def test_cut_w64_declares_its_data_size(tmp_path):
    path = CORPUS["w64_cut"](tmp_path)
    m = checked_measure(path)
    # libsndfile's W64 header is 104 bytes here (riff 40 + fmt 40 + data header 24);
    # 2/3 of the bytes are kept, so (size - 104) // 2 frames are whole.
    assert m.frames == (path.stat().st_size - 104) // 2
    assert (m.frames_declared, m.container_intact) == (144_000, False)
    assert any(f.startswith("'data' chunk claims 288000 bytes") for f in m.findings)


def test_cut_caf_is_refused_naming_the_cut(tmp_path):
    path = CORPUS["caf_cut"](tmp_path)
    with pytest.raises(AudioReadError) as info:
        checked_measure(path)
    message = str(info.value)
    assert message.startswith(f"{path}: cannot open as audio (")
    assert re.search(r"; header: 'data' chunk claims 288004 bytes, \d+ present: the file is "
                     r"truncated$", message), message  # fmt: skip


def test_cut_flac_is_refused_naming_the_cut(tmp_path):
    path = CORPUS["flac_cut"](tmp_path)
    with pytest.raises(AudioReadError) as info:
        checked_measure(path)
    message = str(info.value)
    assert re.fullmatch(
        re.escape(str(path)) + r": decoding failed at \d+\.\d\d s \(.+\); header: STREAMINFO "
        r"declares 144000 frames, the last frame header near the end of the file ends at "
        r"frame \d+: the file is truncated",
        message,
    ), message


def test_cut_ogg_is_measured_as_cut_and_fails(tmp_path):
    m = checked_measure(CORPUS["ogg_cut"](tmp_path))
    # libsndfile decodes nothing from a Vorbis file without its last pages (README notes).
    assert (m.frames, m.container_intact) == (0, False)
    assert any(re.fullmatch(r"the last \d+ bytes are not a complete Ogg page: the file is "
                            r"truncated", f) for f in m.findings), m.findings  # fmt: skip
    assert "the last Ogg page has no end-of-stream flag: the stream is cut short" in m.findings
    assert m.integrated_note == "no audio (0 frames)"
    flags = {f.rule for f in evaluate(m, load_profile("ebu-r128")).flags}
    assert "container_intact_required" in flags


def test_container_without_a_reader_uses_the_decoder_log(tmp_path):
    m = checked_measure(CORPUS["voc_cut"](tmp_path))
    assert m.container_intact is False
    assert "the decoder library reports: Seems to be a truncated file." in m.findings


def test_container_not_checked_is_none_with_a_note(tmp_path):
    p = tmp_path / "ok.nist"
    sf.write(str(p), np.zeros(RATE_HZ), RATE_HZ, format="NIST", subtype="PCM_16")
    m = checked_measure(p)
    assert m.container_intact is None
    assert m.container_intact_note == "the declared length of NIST files is not checked"
    assert not any(f.rule == "container_intact_required"
                   for f in evaluate(m, load_profile("ebu-r128")).flags)  # fmt: skip


@pytest.mark.parametrize("read_ahead", [False, True])
def test_flac_hiding_its_tail_is_decoded_in_full_and_fails(tmp_path, read_ahead):
    path = CORPUS["flac_half_length"](tmp_path)
    assert sf.info(str(path)).frames == RATE_HZ  # libsndfile believes STREAMINFO (reference)
    from checker.analysis.onepass import measure

    m = measure(str(path), read_ahead=read_ahead)
    # corpus.py: 2.000 s written, STREAMINFO patched to 48000 frames (1.000 s).
    assert (m.frames, m.frames_declared, m.undeclared_frames) == (96_000, 48_000, 48_000)
    assert m.container_intact is False
    assert (
        "STREAMINFO declares 48000 frames, 48000 more follow in the file and were decoded: "
        "players that trust the header stop early" in m.findings
    )
    # The hidden half is clipped at full scale: it is measured (0 dBFS sample peak, clips).
    assert_allclose(m.sample_peak_dbfs, 0.0, rtol=0, atol=0.001)  # 32767/32768 codes
    assert m.clipped_runs > 0
    assert m.sample_peak_time_s >= 1.0
    ref = tmp_path / "ref.flac"
    sf.write(str(ref), half_length_samples(), RATE_HZ, subtype="PCM_16", format="FLAC")
    assert comparable(m) == comparable(checked_measure(ref))
    flags = {f.rule for f in evaluate(m, load_profile("ebu-r128")).flags}
    assert "container_intact_required" in flags


@pytest.mark.parametrize("name", ["float_extreme", "float_extreme_f32_max"])
@pytest.mark.parametrize("block_frames", [48_000, 1_000])
def test_extreme_floats_are_counted_and_every_number_is_finite(tmp_path, name, block_frames):
    m = checked_measure(CORPUS[name](tmp_path), MeasureOptions(block_frames=block_frames))
    # corpus.py: 24000 samples of +-value from 0.500 s, the -20 dBFS sine before.
    assert m.nonfinite_samples == 24_000
    assert (
        "Out-of-range (beyond +-2**100, about +602 dBFS) samples: 24000, first at 0.500 s "
        "(treated as 0 by the sample-domain meters)" in m.findings
    )
    for key, value in m.values.items():
        assert not (isinstance(value, float) and (math.isnan(value) or value == math.inf)), key
    assert m.true_peak_dbtp >= m.sample_peak_dbfs
    assert_allclose(m.sample_peak_dbfs, -20.0, rtol=0, atol=0.01)  # the sine's 0.1 peak
    assert EXTREME_FIRST_FRAME / RATE_HZ == 0.5
    flags = {f.rule for f in evaluate(m, load_profile("ebu-r128")).flags}
    assert "nonfinite_samples_max" in flags


def test_large_but_measurable_floats_stay_measured(tmp_path):
    # 1e6 = +120 dBFS (20 log10): far over full scale, within the arithmetic's range.
    p = tmp_path / "loud.wav"
    x = np.full(RATE_HZ, 1e6)
    x[1::2] = -1e6
    p.write_bytes(wav_bytes(x.astype("<f8").tobytes(), bits=64, format_tag=3))
    m = checked_measure(p)
    assert m.nonfinite_samples == 0
    assert_allclose(m.sample_peak_dbfs, 120.0, rtol=0, atol=1e-9)
    assert m.true_peak_dbtp >= m.sample_peak_dbfs


def test_guard_keeps_true_peak_at_or_above_sample_peak():
    from checker.analysis.onepass import guard_values

    values = {"true_peak_dbtp": -20.0, "true_peak_time_s": 0.1, "sample_peak_dbfs": 4000.0,
              "sample_peak_time_s": 0.5, "rms_dbfs": math.inf, "x_db": math.nan}  # fmt: skip
    guard_values(values)
    assert values["true_peak_dbtp"] == 4000.0 and values["true_peak_time_s"] == 0.5
    assert values["rms_dbfs"] is None and values["rms_note"].startswith("not measurable")
    assert values["x_db"] is None and values["x_note"].startswith("not measurable")


def test_checksums_match_their_published_check_values():
    from checker.io.oggpages import ogg_crc as crc32_ogg
    from checker.io.streamlength import crc8

    # Check values over b"123456789" (the CRC catalogue's convention; from memory):
    # CRC-8 with polynomial 0x07, initial 0 (FLAC frame headers): 0xF4.
    assert crc8(b"123456789") == 0xF4
    # CRC-32 with polynomial 0x04C11DB7, initial 0, not reflected: POSIX cksum's register
    # before its final inversion, 0x765E7680 ^ 0xFFFFFFFF (Ogg pages, RFC 3533).
    assert crc32_ogg(b"123456789") == 0x765E7680 ^ 0xFFFFFFFF
    # The same by the textbook bitwise loop, over arbitrary bytes.
    data = bytes(range(256)) * 3
    crc = 0
    for byte in data:
        crc ^= byte << 24
        for _ in range(8):
            crc = ((crc << 1) ^ 0x04C11DB7) & 0xFFFFFFFF if crc & 0x80000000 else crc << 1
    assert crc32_ogg(data) == crc


def test_flac_unknown_length_view_zeroes_only_the_total(tmp_path):
    from checker.io.streamlength import FlacUnknownLength

    path = CORPUS["flac_half_length"](tmp_path)
    raw = path.read_bytes()
    view = FlacUnknownLength(str(path))
    try:
        seen = view.read()
        view.seek(20)
        assert view.read(7) == raw[20:21] + bytes([raw[21] & 0xF0]) + b"\0\0\0\0" + raw[26:27]
    finally:
        view.close()
    # FLAC format: the 36-bit total is the low nibble of byte 21 and bytes 22-25.
    assert len(seen) == len(raw) and seen[:21] == raw[:21] and seen[26:] == raw[26:]
    assert seen[21] == raw[21] & 0xF0 and seen[22:26] == b"\0\0\0\0"


def test_check_names_every_cut_or_lying_file_among_good_ones(tmp_path):
    import csv

    from corpus import good_wav
    from test_check_cli import cli

    from checker.model.errors import EXIT_UNCHECKED

    src = tmp_path / "in"
    src.mkdir()
    good = good_wav(src / "good.wav")
    names = ["aiff_cut", "au_cut", "w64_cut", "ogg_cut", "flac_half_length", "float_extreme",
             "caf_cut", "flac_cut"]  # fmt: skip
    paths = {name: CORPUS[name](src) for name in names}
    profile = tmp_path / "p.toml"
    profile.write_text(
        'name = "p"\n[format]\n'
        'truncation_max_frames = { value = 0, severity = "fail", source = "test input" }\n'
        'container_intact_required = { value = true, severity = "fail", source = "test input" }\n'
        '[peaks]\nnonfinite_samples_max = { value = 0, severity = "fail", source = "test input" }\n'
    )
    out = tmp_path / "out"
    code, text, err = cli("check", str(src), "--profile", str(profile), "--out", str(out))
    # errors.py: 3 (a file could not be checked: the cut CAF and FLAC) wins over 1 (failed).
    assert code == EXIT_UNCHECKED, err
    with open(out / "report.csv", newline="", encoding="utf-8") as fh:
        rows = {Path(r["path"]).name: r for r in csv.DictReader(fh) if r.get("path")}
    assert rows[good.name]["status"] == "pass"
    for name, path in paths.items():
        expected = "error" if name in ("caf_cut", "flac_cut") else "fail"
        assert rows[path.name]["status"] == expected, (name, rows[path.name])
    assert "Traceback" not in err and "internal error" not in err
