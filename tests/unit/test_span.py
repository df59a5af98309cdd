"""Programme span and parts: block-size invariance, bext timecode points, per-part limits.

Expected values come from the generated signals (their layout in seconds) and from the
meters' own whole-programme results; pyebur128 comparisons are in
tests/conformance/test_span.py.
"""

from __future__ import annotations

import struct

import numpy as np
import pytest
import soundfile as sf
from numpy.testing import assert_allclose

from checker.analysis.onepass import measure
from checker.analysis.span import point_seconds
from checker.judge.rules import evaluate
from checker.meters.base import MeasureOptions
from checker.profile.load import validate_profile_file

FS = 48000


def _signal() -> np.ndarray:
    rng = np.random.default_rng(5)
    t = np.arange(2 * FS) / FS
    tone = 10 ** (-20 / 20) * np.sin(2 * np.pi * 1000 * t)
    parts = [rng.standard_normal(4 * FS) * g for g in (0.1, 0.02)]
    x = np.concatenate([tone, np.zeros(FS), parts[0], np.zeros(3 * FS), parts[1]])
    return np.stack([x, 0.5 * x], axis=1)


@pytest.fixture(scope="module")
def wav(tmp_path_factory):
    path = tmp_path_factory.mktemp("span") / "prog.wav"
    sf.write(path, _signal(), FS, subtype="PCM_24")
    return str(path)


KEYS = ("integrated_lufs", "true_peak_dbtp", "sample_peak_dbfs", "max_short_term_lufs",
        "programme_start_s", "programme_end_s", "lineup_tone_hz", "lineup_tone_dbfs")  # fmt: skip


def test_span_and_parts_do_not_depend_on_block_size(wav):
    opts = {"span": "auto", "break_min_s": 2.0}
    runs = [
        measure(wav, MeasureOptions(block_frames=b, **opts)).values
        for b in (None, 777, 4800, 65536)
    ]
    for v in runs[1:]:
        for key in KEYS:  # house rule: exact for peaks, ~1e-9 for sums
            assert_allclose(v[key], runs[0][key], rtol=0, atol=1e-9, err_msg=key)
        assert len(v["parts"]) == len(runs[0]["parts"]) == 2
        for a, b in zip(v["parts"], runs[0]["parts"], strict=True):
            for key in ("start_s", "end_s", "integrated_lufs", "true_peak_dbtp"):
                assert_allclose(a[key], b[key], rtol=0, atol=1e-9, err_msg=key)


def test_whole_file_values_unchanged_by_records(wav):
    plain = measure(wav, MeasureOptions()).values
    span = measure(wav, MeasureOptions(span="auto")).values
    # the whole file's values, kept as file_*, equal a measurement without a span
    assert_allclose(span["file_integrated_lufs"], plain["integrated_lufs"], rtol=0, atol=1e-12)
    assert_allclose(span["file_true_peak_dbtp"], plain["true_peak_dbtp"], rtol=0, atol=1e-9)
    assert_allclose(span["file_sample_peak_dbfs"], plain["sample_peak_dbfs"], rtol=0, atol=0)
    assert "programme_start_s" not in plain  # no span asked for: no new keys
    assert_allclose(span["programme_start_s"], 3.0, rtol=0, atol=1e-9)  # 2 s tone + 1 s silence


def _with_bext(path, time_reference: int) -> None:
    """Insert a version-1 bext chunk (EBU Tech 3285: TimeReference low/high at 338/342)."""
    data = path.read_bytes()
    body = bytearray(602)
    struct.pack_into("<Q", body, 338, time_reference)
    struct.pack_into("<H", body, 346, 1)
    chunk = b"bext" + struct.pack("<I", len(body)) + bytes(body)
    out = data[:12] + chunk + data[12:]
    out = out[:4] + struct.pack("<I", len(out) - 8) + out[8:]
    path.write_bytes(out)


def test_timecode_points_relative_to_bext(tmp_path, wav):
    path = tmp_path / "bwf.wav"
    sf.write(path, _signal(), FS, subtype="PCM_24")
    # file starts at 09:59:57:00 at 25 fps: 10:00:00:00 is 3.0 s into the file
    _with_bext(path, (10 * 3600 - 3) * FS)
    opts = MeasureOptions(span_in="10:00:00:00", span_out="10:00:04:00", timecode_fps=25)
    v = measure(str(path), opts).values
    assert v["bext_time_reference_frames"] == (10 * 3600 - 3) * FS
    assert_allclose(v["programme_start_s"], 3.0, rtol=0, atol=1e-9)
    assert_allclose(v["programme_end_s"], 7.0, rtol=0, atol=1e-9)
    # the same span in seconds gives the same values
    ref = measure(str(path), MeasureOptions(span_in="3", span_out="7")).values
    assert_allclose(v["integrated_lufs"], ref["integrated_lufs"], rtol=0, atol=1e-12)


def test_timecode_without_bext_is_a_finding(wav):
    m = measure(wav, MeasureOptions(span_in="10:00:00:00", timecode_fps=25))
    assert any("bext time reference" in f for f in m.findings)
    assert m.values["programme_start_s"] == 0.0


def test_point_parsing():
    assert point_seconds("12.5", None, None, FS) == 12.5
    # 29.97 fps: timecode frames at the nominal 30, each lasting 1001/30000 s
    assert_allclose(point_seconds("00:00:01:00", 30000 / 1001, 0, FS), 1.001, rtol=0, atol=1e-12)
    with pytest.raises(ValueError, match="frame rate"):
        point_seconds("00:00:01:00", None, 0, FS)


def test_part_limits_flag_the_part_that_is_off(tmp_path, wav):
    prof = tmp_path / "parts.toml"
    prof.write_text(
        'name = "parts-test"\n'
        "[loudness]\n"
        'integrated_target_lufs = { value = -20.0, tolerance_lu = 30.0, severity = "fail", '
        'source = "test" }\n'
        "[programme]\n"
        'span = "auto"\nbreak_min_s = 2.0\n'
        'part_integrated_tolerance_lu = { value = 1.0, severity = "fail", source = "test" }\n'
    )
    profile = validate_profile_file(prof)
    v = measure(wav, MeasureOptions(span="auto", break_min_s=2.0)).values
    first = v["parts"][0]["integrated_lufs"]
    # a target 0.5 LU from part 1: part 2 (14 dB quieter) is off, part 1 is not
    profile = validate_profile_file(prof)
    from dataclasses import replace

    from checker.profile.load import Limit

    limits = tuple(
        Limit(lim.key, first + 0.5, lim.severity, lim.source, lim.tolerance_lu)
        if lim.key == "integrated_target_lufs" else lim
        for lim in profile.limits
    )  # fmt: skip
    verdict = evaluate(v, replace(profile, limits=limits))
    flags = [f for f in verdict.flags if f.rule == "part_integrated_tolerance_lu"]
    assert len(flags) == 1
    assert "part 2 (" in flags[0].message and "part 1 (" not in flags[0].message


def test_profile_programme_section_becomes_measure_options(tmp_path):
    from checker.run.batch import measure_options, options_key

    prof = tmp_path / "prog.toml"
    prof.write_text(
        'name = "prog-test"\n[programme]\nspan = "auto"\nbreak_min_s = 2.5\n'
        'in_point = "10:00:00:00"\ntimecode_fps = 25\n'
    )
    opts = measure_options(validate_profile_file(prof))
    assert (opts.span, opts.break_min_s, opts.span_in, opts.timecode_fps) == (
        "auto",
        2.5,
        "10:00:00:00",
        25,
    )
    # a span changes values, so it is in the cache key; no span keeps the earlier key
    assert options_key(opts) != options_key(MeasureOptions())
    assert "span" not in options_key(MeasureOptions())


def test_profile_programme_section_is_validated(tmp_path):
    from checker.model.errors import ProfileError

    prof = tmp_path / "bad.toml"
    prof.write_text('name = "bad"\n[programme]\nspan = "maybe"\n')
    with pytest.raises(ProfileError, match="programme.span"):
        validate_profile_file(prof)
    prof.write_text('name = "bad"\n[programme]\nbreak_min_s = 0\n')
    with pytest.raises(ProfileError, match="programme.break_min_s"):
        validate_profile_file(prof)


def test_findings_name_the_excluded_head_and_tail(wav, tmp_path):
    m = measure(wav, MeasureOptions(span="auto"))
    notes = [f for f in m.findings if f.startswith("programme span")]
    assert len(notes) == 1
    assert "head 0.0-3.0 s (2.0 s of 1000 Hz line-up tone at -20.0 dBFS" in notes[0]
    assert m.values["programme_span_note"] == notes[0]
    # only tone and silence: nothing is left out, and the finding says why
    t = np.arange(3 * FS) / FS
    only = np.concatenate([0.1 * np.sin(2 * np.pi * 1000 * t), np.zeros(FS)])
    path = tmp_path / "tone.wav"
    sf.write(path, only, FS, subtype="PCM_24")
    m = measure(str(path), MeasureOptions(span="auto"))
    assert any("whole file looks like line-up tone" in f for f in m.findings)
    assert m.values["programme_start_s"] == 0.0


def test_no_tone_leaves_leading_silence_out_and_says_no_tone(tmp_path):
    rng = np.random.default_rng(3)
    x = np.concatenate([np.zeros(FS), 0.1 * rng.standard_normal(4 * FS)])
    path = tmp_path / "silence_head.wav"
    sf.write(path, x, FS, subtype="PCM_24")
    v = measure(str(path), MeasureOptions(span="auto")).values
    assert v["lineup_tone_hz"] is None
    assert v["lineup_tone_note"] == "no line-up tone found in the head"
    assert_allclose(v["programme_start_s"], 1.0, rtol=0, atol=1e-9)  # generated: 1 s silence


@pytest.mark.parametrize("tone", [True, False])
def test_step_records_do_not_depend_on_the_split(tone):
    from checker.meters.steprecords import StepRecorder

    rng = np.random.default_rng(9)
    x = rng.standard_normal((2, 44100 + 1234))  # 44.1 kHz: steps of 4410 frames
    whole = StepRecorder(44100, 2, tone=tone)
    whole.feed(x)
    split = StepRecorder(44100, 2, tone=tone)
    cuts = np.sort(rng.choice(np.arange(1, x.shape[1]), 40, replace=False))
    for piece in np.split(x, cuts, axis=1):
        split.feed(np.ascontiguousarray(piece))
    a, b = whole.records(), split.records()
    assert a.steps == b.steps == 11  # 10 full steps and the 1234-frame rest
    assert np.array_equal(a.peak, b.peak) and np.array_equal(a.peak_frame, b.peak_frame)
    assert np.array_equal(a.crossings, b.crossings) and np.array_equal(a.frames, b.frames)
    assert_allclose(a.sumsq, b.sumsq, rtol=1e-12, atol=0)  # sums: rounding only
    # the records are the samples' own: step 3's peak and its frame (numpy on the slice)
    seg = np.abs(x[:, 3 * 4410 : 4 * 4410])
    assert a.peak[3].tolist() == seg.max(axis=1).tolist()
    assert a.peak_frame[3] == 3 * 4410 + int(np.argmax(seg.max(axis=0)))


def test_span_values_equal_the_programme_measured_alone(tmp_path):
    """Head on the 100 ms grid (3.0 s) and digital silence before the programme: the span's
    values equal a plain measurement of the programme cut out as its own file (the
    K-weighting state has decayed to zero in the silence), including a 400 ms burst off the
    100 ms grid that only the 1 ms momentary hop catches in full."""
    rng = np.random.default_rng(11)
    prog = 0.02 * rng.standard_normal((8 * FS, 2))
    burst = slice(int(2.437 * FS), int(2.837 * FS))
    prog[burst] *= 8.0
    t = np.arange(2 * FS) / FS
    head = np.stack([0.1 * np.sin(2 * np.pi * 1000 * t)] * 2, axis=1)
    full, alone = tmp_path / "full.wav", tmp_path / "alone.wav"
    sf.write(full, np.concatenate([head, np.zeros((FS, 2)), prog]), FS, subtype="FLOAT")
    sf.write(alone, prog, FS, subtype="FLOAT")
    v = measure(str(full), MeasureOptions(span="auto")).values
    ref = measure(str(alone), MeasureOptions()).values
    for key in ("integrated_lufs", "loudness_range_lu", "max_momentary_lufs",
                "max_short_term_lufs", "sample_peak_dbfs"):  # fmt: skip
        assert_allclose(v[key], ref[key], rtol=0, atol=1e-6, err_msg=key)  # same samples
    for key in ("max_momentary_time_s", "max_short_term_time_s", "sample_peak_time_s"):
        assert_allclose(v[key] - 3.0, ref[key], rtol=0, atol=1e-9, err_msg=key)  # 3 s head
    # true peak: the programme's own file starts mid-waveform (edge rule: samples only in
    # its first 32 frames); inside the span those frames are interpolated
    assert_allclose(v["true_peak_dbtp"], ref["true_peak_dbtp"], rtol=0, atol=0.05)


def test_points_past_the_end_are_findings(wav):
    m = measure(wav, MeasureOptions(span_in="3", span_out="99"))
    assert any("out point 99 lies 99.000 s into a 14.000 s file" in f for f in m.findings)
    assert_allclose(m.values["programme_end_s"], 14.0, rtol=0, atol=1e-9)  # generated: 14 s
    m = measure(wav, MeasureOptions(span_in="20"))
    assert any("in point 20 lies" in f and "measured without it" in f for f in m.findings)
    assert m.values["programme_start_s"] == 0.0


def test_a_lineup_limit_turns_detection_on_and_part_limits_need_parts(tmp_path, wav):
    from checker.run.batch import measure_options

    prof = tmp_path / "tone.toml"
    prof.write_text(
        'name = "tone-test"\n[programme]\n'
        'lineup_tone_max_dbfs = { value = -18.0, severity = "fail", source = "test" }\n'
        'part_true_peak_max_dbtp = { value = -1.0, severity = "warn", source = "test" }\n'
    )
    profile = validate_profile_file(prof)
    opts = measure_options(profile)
    assert opts.span == "auto" and opts.break_min_s is None
    verdict = evaluate(measure(wav, opts).values, profile)
    flags = {f.rule: f for f in verdict.flags}
    # the generated tone is -20 dBFS: below the -18 dBFS ceiling, no flag
    assert "lineup_tone_max_dbfs" not in flags
    assert "not split into parts" in flags["part_true_peak_max_dbtp"].message
