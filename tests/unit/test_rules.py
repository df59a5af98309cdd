"""evaluate(): one table case per limit, unmeasured values, scope, gain advice, mono convention.

Measurements are built from dicts (no audio is read). Limits in the table are
test values chosen around each limit; the published values of the shipped
profiles are checked in test_profiles.py.
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from checker.judge.rules import evaluate
from checker.model.measurement import Measurement
from checker.model.verdict import ERROR, FAIL, PASS, WARN
from checker.profile.catalogue import CATALOGUE, DECLARED_KEYS, MAX, MIN, REQUIRED
from checker.profile.load import load_profile

SET_BASE = {"set_stem_count": 3}  # any set_* key marks set-level values
STEREO = {"channels": 2}


def write_profile(tmp_path: Path, body: str, name: str = "t") -> Path:
    path = tmp_path / f"{name}.toml"
    path.write_text(f'name = "{name}"\ntitle = "test"\n{body}\n', encoding="utf-8")
    return path


def toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return f'"{v}"'
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    return repr(v)


def one_limit_profile(tmp_path, key, value, severity="fail", **extra):
    section = next(d.section for d in CATALOGUE if d.key == key)
    fields = {"value": value, **extra, "severity": severity, "source": "test value"}
    inline = ", ".join(f"{k} = {toml_value(v)}" for k, v in fields.items())
    # an encode limit needs the round trip it judges ([encode] codec and bit rate)
    asks = 'codec = "mp3"\nbit_rate_kbps = 128\n' if section == "encode" else ""
    body = f"[{section}]\n{asks}{key} = {{ {inline} }}"
    return load_profile(str(write_profile(tmp_path, body)))


def m(values: dict) -> Measurement:
    return Measurement("t.wav", dict(values))


# (key, limit value, extra limit fields, base values, values at the limit (pass),
#  values just past it (fail), expected message fragment, expected position_s)
CASES = [
    ("sample_rates_hz", [44100, 48000], {}, {}, {"sample_rate_hz": 48000},
     {"sample_rate_hz": 96000}, "Sample rate is 96000 Hz, not one of the allowed 44100, 48000 Hz",
     None),
    ("bit_depths", [24], {}, {}, {"format_bits": 24}, {"format_bits": 16},
     "Bit depth is 16 bits, not one of the allowed 24 bits", None),
    ("subtypes", ["PCM_24", "FLOAT"], {}, {}, {"subtype": "FLOAT"}, {"subtype": "PCM_16"},
     "Sample format is PCM_16, not one of the allowed PCM_24, FLOAT", None),
    ("channel_counts", [2], {}, {}, {"channels": 2}, {"channels": 6},
     "Channel count is 6, not one of the allowed 2", None),
    ("containers", ["WAV"], {}, {}, {"container": "WAV"}, {"container": "FLAC"},
     "File type is FLAC, not one of the allowed WAV", None),
    ("codecs", ["mp3", "opus"], {}, {}, {"codec": "opus"}, {"codec": "vorbis"},
     "Codec is vorbis, not one of the allowed mp3, opus: encode again", None),
    ("bit_rate_min_kbps", 128.0, {}, {}, {"bit_rate_kbps": 128.0}, {"bit_rate_kbps": 127.9},
     "Bit rate is 127.90 kbit/s, below the limit of 128.00 kbit/s", None),
    ("duration_min_s", 10.0, {}, {}, {"duration_s": 10.0}, {"duration_s": 9.99},
     "Duration is 9.99 s, below the limit of 10.00 s", None),
    ("duration_max_s", 3600.0, {}, {}, {"duration_s": 3600.0}, {"duration_s": 3600.01},
     "Duration is 3600.01 s, above the limit of 3600.00 s", None),
    ("integrated_target_lufs", -23.0, {"tolerance_lu": 0.5}, STEREO,
     {"integrated_lufs": -22.5}, {"integrated_lufs": -22.49},
     "Integrated loudness is -22.49 LUFS, 0.51 LU above the target of -23.00 LUFS "
     "(tolerance +- 0.50 LU): apply -0.51 dB of gain", None),
    ("truncation_max_frames", 0, {}, {"frames_declared": 480000}, {"frames": 480000},
     {"frames": 47999}, "Number of frames the header promises but the file lacks is 432001, "
     "above the limit of 0: the file was cut off", None),
    ("container_intact_required", True, {}, {"frames_declared": 48000, "frames": 48000},
     {"container_intact": True}, {"container_intact": False}, "File complete by its container (no chunk or page cut off, "
     "no audio past the declared length): no: the file was cut off, or its header misstates "
     "its length", None),
    ("unused_low_bits_max", 0, {}, {"subtype": "PCM_24", "format_bits": 24},
     {"effective_bits": 24}, {"effective_bits": 16}, "Number of unused low bits (file bit depth "
     "minus effective bits) is 8 bits, above the limit of 0 bits", None),
    ("loudness_range_min_lu", 4.0, {}, {}, {"loudness_range_lu": 4.0},
     {"loudness_range_lu": 3.99}, "Loudness range is 3.99 LU, below the limit of 4.00 LU", None),
    ("loudness_range_max_lu", 20.0, {}, {}, {"loudness_range_lu": 20.0},
     {"loudness_range_lu": 20.01}, "Loudness range is 20.01 LU, above the limit of 20.00 LU",
     None),
    ("momentary_max_lufs", -15.0, {}, {"max_momentary_time_s": 3.2},
     {"max_momentary_lufs": -15.0}, {"max_momentary_lufs": -14.99},
     "Maximum momentary loudness is -14.99 LUFS at 3.20 s, above the limit of -15.00 LUFS", 3.2),
    ("short_term_max_lufs", -18.0, {}, {"max_short_term_time_s": 61.5},
     {"max_short_term_lufs": -18.0}, {"max_short_term_lufs": -17.99},
     "Maximum short-term loudness is -17.99 LUFS at 61.50 s, above the limit of -18.00 LUFS",
     61.5),
    ("true_peak_max_dbtp", -1.0, {}, {"true_peak_time_s": 12.5}, {"true_peak_dbtp": -1.0},
     {"true_peak_dbtp": -0.99},
     "True peak is -0.99 dBTP at 12.50 s, above the limit of -1.00 dBTP: lower the level", 12.5),
    ("sample_peak_max_dbfs", -3.0, {}, {"sample_peak_time_s": 0.25}, {"sample_peak_dbfs": -3.0},
     {"sample_peak_dbfs": -2.99}, "Sample peak is -2.99 dBFS at 0.25 s, above the limit of "
     "-3.00 dBFS", 0.25),
    # fold-down limits apply only where a fold-down exists (downmix_method present)
    ("downmix_true_peak_max_dbtp", -1.0, {},
     {"downmix_method": "BS.775", "downmix_true_peak_time_s": 4.5},
     {"downmix_true_peak_dbtp": -1.0}, {"downmix_true_peak_dbtp": -0.99},
     "True peak of the stereo fold-down is -0.99 dBTP at 4.50 s, above the limit of -1.00 dBTP",
     4.5),
    ("downmix_sample_peak_max_dbfs", -1.0, {},
     {"downmix_method": "BS.775", "downmix_sample_peak_time_s": 2.0},
     {"downmix_sample_peak_dbfs": -1.0}, {"downmix_sample_peak_dbfs": 0.5},
     "Sample peak of the stereo fold-down is 0.50 dBFS at 2.00 s, above the limit of "
     "-1.00 dBFS", 2.0),
    ("downmix_short_term_max_lufs", -18.0, {}, {"downmix_method": "BS.775"},
     {"downmix_max_short_term_lufs": -18.0}, {"downmix_max_short_term_lufs": -17.5},
     "Maximum short-term loudness of the stereo fold-down is -17.50 LUFS, above the limit of "
     "-18.00 LUFS", None),
    ("sample_peak_min_dbfs", -6.0, {}, {}, {"sample_peak_dbfs": -6.0},
     {"sample_peak_dbfs": -6.01}, "Sample peak is -6.01 dBFS, below the limit of -6.00 dBFS",
     None),
    ("clipped_runs_max", 0, {}, {"clipped_run_times_s": [1.25, 7.0]}, {"clipped_runs": 0},
     {"clipped_runs": 2}, "Number of clipped runs is 2 (first at 1.25 s), above the limit of 0",
     1.25),
    ("over_full_scale_samples_max", 0, {}, {}, {"over_full_scale_samples": 0},
     {"over_full_scale_samples": 5}, "Number of samples beyond full scale is 5, above the "
     "limit of 0", None),
    ("nonfinite_samples_max", 0, {}, {}, {"nonfinite_samples": 0}, {"nonfinite_samples": 1},
     "Number of NaN, Inf or out-of-range samples is 1, above the limit of 0", None),
    ("dc_offset_max_dbfs", -40.0, {}, {}, {"dc_offset_dbfs": -40.0}, {"dc_offset_dbfs": -39.99},
     "DC offset is -39.99 dBFS, above the limit of -40.00 dBFS", None),
    ("effective_bits_min", 20, {}, {}, {"effective_bits": 20}, {"effective_bits": 19},
     "Effective bit depth is 19 bits, below the limit of 20 bits", None),
    ("rms_min_dbfs", -23.0, {}, {}, {"rms_dbfs": -23.0}, {"rms_dbfs": -23.01},
     "RMS level is -23.01 dBFS, below the limit of -23.00 dBFS", None),
    ("rms_max_dbfs", -18.0, {}, {}, {"rms_dbfs": -18.0}, {"rms_dbfs": -17.99},
     "RMS level is -17.99 dBFS, above the limit of -18.00 dBFS", None),
    ("noise_floor_max_dbfs", -60.0, {}, {}, {"noise_floor_dbfs": -60.0},
     {"noise_floor_dbfs": -59.99}, "Noise floor is -59.99 dBFS, above the limit of -60.00 dBFS",
     None),
    ("footroom_min_db", 10.0, {}, {}, {"footroom_db": 10.0}, {"footroom_db": 9.99},
     "Footroom is 9.99 dB, below the limit of 10.00 dB", None),
    ("leading_silence_min_s", 0.5, {}, {}, {"leading_silence_s": 0.5},
     {"leading_silence_s": 0.49}, "Leading silence is 0.49 s, below the limit of 0.50 s", None),
    ("leading_silence_max_s", 1.0, {}, {}, {"leading_silence_s": 1.0},
     {"leading_silence_s": 1.01}, "Leading silence is 1.01 s, above the limit of 1.00 s", None),
    ("trailing_silence_min_s", 1.0, {}, {}, {"trailing_silence_s": 1.0},
     {"trailing_silence_s": 0.99}, "Trailing silence is 0.99 s, below the limit of 1.00 s", None),
    ("trailing_silence_max_s", 5.0, {}, {}, {"trailing_silence_s": 5.0},
     {"trailing_silence_s": 5.01}, "Trailing silence is 5.01 s, above the limit of 5.00 s", None),
    ("dropouts_max", 0, {}, {"dropout_times_s": [4.5]}, {"dropouts": 0}, {"dropouts": 1},
     "Number of dropouts is 1 (first at 4.50 s), above the limit of 0", 4.5),
    ("correlation_min", 0.0, {}, STEREO, {"min_correlation": 0.0}, {"min_correlation": -0.01},
     "Lowest inter-channel correlation is -0.01, below the limit of 0.00", None),
    ("silent_channels_allowed", False, {}, STEREO, {"silent_channels": []},
     {"silent_channels": [1]}, "Silent channels found (channel 2, counting from 1)", None),
    ("identical_channels_allowed", False, {}, STEREO, {"identical_channels": []},
     {"identical_channels": [[0, 1]]}, "Identical channels found (channels 1 and 2, counting "
     "from 1)", None),
    ("inverted_channels_allowed", False, {}, STEREO, {"inverted_channels": []},
     {"inverted_channels": [[0, 1]]}, "Polarity-inverted channel pairs found (channels 1 and 2",
     None),
    ("bandwidth_fraction_min", 0.8, {}, {}, {"bandwidth_fraction": 0.8},
     {"bandwidth_fraction": 0.79}, "The effective bandwidth (fraction of the Nyquist "
     "frequency) is 0.79, below the limit of 0.80", None),
    ("steep_cutoff_min_hz", 15000.0, {}, {}, {"steep_cutoff_hz": 15000.0},
     {"steep_cutoff_hz": 14999.0}, "The steep cutoff at 15.0 kHz is below the limit of 15 kHz",
     None),
    ("declared_integrated_tolerance_lu", 1.0, {}, {"integrated_lufs": -23.0},
     {"declared_integrated_lufs": -24.0}, {"declared_integrated_lufs": -24.01},
     "Declared integrated loudness (bext) is -24.01 LUFS but -23.00 LUFS was measured "
     "(1.01 LU apart, tolerance 1.00 LU)", None),
    ("declared_loudness_range_tolerance_lu", 1.0, {}, {"loudness_range_lu": 8.0},
     {"declared_loudness_range_lu": 9.0}, {"declared_loudness_range_lu": 9.01},
     "Declared loudness range (bext) is 9.01 LU but 8.00 LU was measured", None),
    ("declared_true_peak_tolerance_db", 0.5, {}, {"true_peak_dbtp": -1.5},
     {"declared_true_peak_dbtp": -1.0}, {"declared_true_peak_dbtp": -0.99},
     "Declared true peak (bext) is -0.99 dBTP but -1.50 dBTP was measured (0.51 dB apart, "
     "tolerance 0.50 dB)", None),
    ("declared_momentary_tolerance_lu", 1.0, {}, {"max_momentary_lufs": -15.0},
     {"declared_max_momentary_lufs": -16.0}, {"declared_max_momentary_lufs": -16.01},
     "Declared maximum momentary loudness (bext) is -16.01 LUFS but -15.00 LUFS was measured", None),
    ("declared_short_term_tolerance_lu", 1.0, {}, {"max_short_term_lufs": -18.0},
     {"declared_max_short_term_lufs": -17.0}, {"declared_max_short_term_lufs": -16.99},
     "Declared maximum short-term loudness (bext) is -16.99 LUFS but -18.00 LUFS was measured", None),
    ("gain_tag_tolerance_lu", 1.0, {}, {"integrated_lufs": -16.0},
     {"declared_gain_tag_integrated_lufs": -17.0}, {"declared_gain_tag_integrated_lufs": -17.01},
     "Integrated loudness implied by the track gain tag (gain tag) is -17.01 LUFS but -16.00 "
     "LUFS was measured (1.01 LU apart", None),
    ("declared_loudness_required", True, {}, {k: -20.0 for k in DECLARED_KEYS}, {},
     {"declared_loudness_range_lu": None},
     "Bext loudness fields missing: declared_loudness_range_lu", None),
    ("encoded_true_peak_max_dbtp", -1.0, {},
     {"encoded_codec": "mp3", "encoded_bit_rate_kbps": 128.0, "encoded_encoder": "LAME3.100"},
     {"encoded_true_peak_dbtp": -1.0}, {"encoded_true_peak_dbtp": -0.2},
     "True peak after the encode round trip is -0.20 dBTP, above the limit of -1.00 dBTP "
     "(lower the master by 0.8 dB, or limit its true peak that much lower, to keep -1.0 dBTP "
     "after 128 kbit/s MP3; measured with LAME3.100 through libsndfile: one encoder's "
     "behaviour, an estimate for others): leave more headroom", None),
    ("formats_must_match", True, {}, SET_BASE, {"set_formats_match": True},
     {"set_formats_match": False}, "Stem formats match: no: re-export every stem", None),
    ("length_mismatch_max_frames", 0, {}, SET_BASE, {"set_length_mismatch_frames": 0},
     {"set_length_mismatch_frames": 1}, "Stem length mismatch is 1 frames, above the limit of "
     "0 frames", None),
    ("start_offset_max_s", 0.0, {}, SET_BASE, {"set_start_offset_max_s": 0.0},
     {"set_start_offset_max_s": 12.0}, "Spread of the stems' content starts is 12.00 s, above "
     "the limit of 0.00 s", None),
    ("slip_max_s", 0.0, {}, {**SET_BASE, "set_slipped_stems": ["bass.wav"],
                          "set_slip_details": ["bass.wav 10 samples (0.21 ms) late"]},
     {"set_slip_max_s": 0.0}, {"set_slip_max_s": 10 / 48000},
     "Largest stem slip is 0.000208 s, above the limit of 0.00 s (slipped: bass.wav 10 samples "
     "(0.21 ms) late)", None),
    ("sum_clipped_samples_max", 0, {}, {**SET_BASE, "sum_first_clip_s": 1.5},
     {"sum_clipped_samples": 0}, {"sum_clipped_samples": 3}, "Number of summed samples at or "
     "above full scale is 3 at 1.50 s, above the limit of 0", 1.5),
    ("sum_true_peak_max_dbtp", 0.0, {}, {**SET_BASE, "sum_true_peak_time_s": 30.0},
     {"sum_true_peak_dbtp": 0.0}, {"sum_true_peak_dbtp": 0.01},
     "True peak of the stem sum is 0.01 dBTP at 30.00 s, above the limit of 0.00 dBTP", 30.0),
    ("sum_sample_peak_max_dbfs", 0.0, {}, {**SET_BASE, "sum_sample_peak_time_s": 2.0},
     {"sum_sample_peak_dbfs": 0.0}, {"sum_sample_peak_dbfs": 0.01},
     "Sample peak of the stem sum is 0.01 dBFS at 2.00 s, above the limit of 0.00 dBFS", 2.0),
    ("null_residual_max_db", -60.0, {}, {**SET_BASE, "set_mix_length_frames": 480000},
     {"null_residual_db": -60.0},
     {"null_residual_db": -59.99}, "Null-test residual (mix minus stem sum, relative to the mix) "
     "is -59.99 dB, above the limit of -60.00 dB", None),
    # speech (issue 19): values of the speech gate; speech_detector says it ran
    ("speech_target_lufs", -18.0, {"tolerance_lu": 2.0}, {"speech_detector": "d"},
     {"speech_lufs": -20.0}, {"speech_lufs": -20.01},
     "Speech loudness is -20.01 LUFS, 2.01 LU below the target of -18.00 LUFS "
     "(tolerance +- 2.00 LU): apply +2.01 dB of gain", None),
    ("anchor_target_lufs", -24.0, {"tolerance_lu": 2.0}, {"speech_detector": "d"},
     {"speech_lufs": -26.0, "integrated_lufs": -30.0}, {"speech_lufs": -26.01},
     "Anchor loudness (speech, or the whole programme where too little speech was found) is "
     "-26.01 LUFS, 2.01 LU below the target of -24.00 LUFS", None),
    ("speech_share_min", 0.5, {}, {}, {"speech_share": 0.5}, {"speech_share": 0.49},
     "The share of speech in the programme is 0.49, below the limit of 0.50", None),
    ("speech_to_programme_min_lu", -4.0, {}, {"speech_detector": "d"},
     {"speech_to_programme_lu": -4.0}, {"speech_to_programme_lu": -4.01},
     "Speech loudness relative to the programme is -4.01 LU, below the limit of -4.00 LU", None),
    ("speech_to_programme_max_lu", 3.0, {}, {"speech_detector": "d"},
     {"speech_to_programme_lu": 3.0}, {"speech_to_programme_lu": 3.01},
     "Speech loudness relative to the programme is 3.01 LU, above the limit of 3.00 LU", None),
    # programme structure (checker/analysis/span.py)
    ("lineup_tone_min_dbfs", -18.0, {}, {}, {"lineup_tone_dbfs": -18.0},
     {"lineup_tone_dbfs": -18.01}, "Line-up tone level is -18.01 dBFS, below the limit", None),
    ("lineup_tone_max_dbfs", -18.0, {}, {}, {"lineup_tone_dbfs": -18.0},
     {"lineup_tone_dbfs": -17.99}, "Line-up tone level is -17.99 dBFS, above the limit", None),
    ("lineup_tone_min_hz", 999.0, {}, {}, {"lineup_tone_hz": 999.0},
     {"lineup_tone_hz": 998.0}, "Line-up tone frequency is 998", None),
    ("lineup_tone_max_hz", 1001.0, {}, {}, {"lineup_tone_hz": 1001.0},
     {"lineup_tone_hz": 1002.0}, "Line-up tone frequency is 1002", None),
    ("head_min_s", 10.0, {}, {}, {"programme_start_s": 10.0}, {"programme_start_s": 9.9},
     "Head length (line-up tone and silence before the programme) is 9.90 s, below", None),
    ("head_max_s", 60.0, {}, {}, {"programme_start_s": 60.0}, {"programme_start_s": 60.1},
     "Head length (line-up tone and silence before the programme) is 60.10 s, above", None),
    ("part_integrated_tolerance_lu", 1.0, {}, {"integrated_lufs": -23.0},
     {"parts": [{"part": 1, "start_s": 0.0, "end_s": 9.0, "integrated_lufs": -24.0},
                {"part": 2, "start_s": 12.0, "end_s": 20.0, "integrated_lufs": -22.0}]},
     {"parts": [{"part": 1, "start_s": 0.0, "end_s": 9.0, "integrated_lufs": -23.5},
                {"part": 2, "start_s": 12.0, "end_s": 20.0, "integrated_lufs": -21.9}]},
     "Integrated loudness of each part must be within +- 1.00 LU of the programme's integrated "
     "loudness (-23.00 LUFS); off: part 2 (12.00-20.00 s) -21.90 LUFS", 12.0),
    ("part_true_peak_max_dbtp", -1.0, {}, {},
     {"parts": [{"part": 1, "start_s": 5.0, "end_s": 9.0, "true_peak_dbtp": -1.0}]},
     {"parts": [{"part": 1, "start_s": 5.0, "end_s": 9.0, "true_peak_dbtp": -0.5}]},
     "True peak of each part must be at most -1.00 dBTP; off: part 1 (5.00-9.00 s) -0.50 dBTP",
     5.0),
    ("part_short_term_max_lufs", -18.0, {}, {},
     {"parts": [{"part": 1, "start_s": 0.0, "end_s": 9.0, "max_short_term_lufs": -18.0}]},
     {"parts": [{"part": 1, "start_s": 0.0, "end_s": 9.0, "max_short_term_lufs": -17.0}]},
     "Maximum short-term loudness of each part must be at most -18.00 LUFS; off: part 1", 0.0),
]  # fmt: skip


def test_every_catalogue_limit_has_a_table_case():
    assert sorted(c[0] for c in CASES) == sorted(d.key for d in CATALOGUE)


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
@pytest.mark.parametrize("severity", [FAIL, WARN])
def test_rule_at_limit_passes_just_past_fails(tmp_path, case, severity):
    key, value, extra, base, at_limit, past, message, position = case
    profile = one_limit_profile(tmp_path, key, value, severity, **extra)

    ok = evaluate(m({**base, **at_limit}), profile)
    assert ok.status == PASS, ok.flags
    assert ok.flags == ()

    bad = evaluate(m({**base, **at_limit, **past}), profile)
    assert bad.status == severity
    assert len(bad.flags) == 1
    flag = bad.flags[0]
    assert flag.rule == key
    assert flag.severity == severity
    assert flag.source == "test value"
    assert message in flag.message
    if position is None:
        assert flag.position_s is None
    else:
        assert_allclose(flag.position_s, position, rtol=0, atol=1e-12)  # the position given


MEASURED_CASES = [c for c in CASES if next(d for d in CATALOGUE if d.key == c[0]).kind != REQUIRED]


@pytest.mark.parametrize("case", MEASURED_CASES, ids=[c[0] for c in MEASURED_CASES])
def test_unmeasured_value_is_flagged_never_passed(tmp_path, case):
    key, value, extra, base, at_limit, past, message, position = case
    profile = one_limit_profile(tmp_path, key, value, "warn", **extra)
    d = next(d for d in CATALOGUE if d.key == key)
    if d.kind == "declared":  # a declared value with nothing measured to compare it to
        values = {**base, **at_limit}
        values[d.measure[-1]] = None
    elif d.none_means_ok:  # None means "no steep cutoff found"; a missing key is unmeasured
        values = dict(base)
    else:
        values = {**base, **{k: None for k in at_limit}}
    verdict = evaluate(m(values), profile)
    assert verdict.status == WARN  # the limit's own severity
    (flag,) = verdict.flags
    assert flag.measured is None
    assert "could not be measured" in flag.message


def test_channel_lists_and_silence_read_plainly(tmp_path):
    profile = one_limit_profile(tmp_path, "silent_channels_allowed", False)
    (flag,) = evaluate(m({"channels": 3, "silent_channels": [0, 2]}), profile).flags
    assert "(channels 1, 3, counting from 1)" in flag.message
    profile = one_limit_profile(tmp_path, "rms_min_dbfs", -23.0)
    (flag,) = evaluate(m({"rms_dbfs": -math.inf}), profile).flags
    assert flag.message.startswith("RMS level is -inf dBFS (digital silence), below the limit")


def test_derived_limits_do_not_apply_where_they_mean_nothing(tmp_path):
    bits = one_limit_profile(tmp_path, "unused_low_bits_max", 0)
    # a float file on a 24-bit grid is normal (levels meter: float effective bits <= 24)
    floaty = {"subtype": "FLOAT", "format_bits": 32, "effective_bits": 24}
    assert evaluate(m(floaty), bits).status == PASS
    cut = one_limit_profile(tmp_path, "truncation_max_frames", 0)
    # no length in the header (e.g. a streamed FLAC): nothing to compare
    assert evaluate(m({"frames_declared": None, "frames": 1000}), cut).status == PASS


def test_no_steep_cutoff_found_passes(tmp_path):
    profile = one_limit_profile(tmp_path, "steep_cutoff_min_hz", 15000.0)
    assert evaluate(m({"steep_cutoff_hz": None}), profile).status == PASS


def test_bandwidth_flags_lead_with_the_meters_words_and_cannot_judge_is_not_flagged(tmp_path):
    note = "content ends near 11.0 kHz in a 48 kHz file: probably upsampled from 22.05 kHz"
    profile = one_limit_profile(tmp_path, "bandwidth_fraction_min", 0.8)
    values = {"bandwidth_fraction": 11000 / 24000, "bandwidth_note": note}
    (flag,) = evaluate(m(values), profile).flags
    assert flag.message == (
        "Content ends near 11.0 kHz in a 48 kHz file: probably upsampled from 22.05 kHz; "
        "effective bandwidth (fraction of the Nyquist frequency) is 0.46, below the limit of "
        "0.80: the content stops well below the Nyquist frequency."
    )
    # issue 10: files without enough broadband content say so (the note) rather than flag
    tone = {"bandwidth_fraction": None, "bandwidth_note": "cannot judge: tonal content"}
    assert evaluate(m(tone), profile).status == PASS


def test_silent_file_loudness_says_why(tmp_path):
    profile = load_profile("ebu-r128")
    values = {
        "channels": 2,
        "is_silent": True,
        "integrated_lufs": None,
        "integrated_note": "every block is below the -70 LUFS absolute gate",
        "true_peak_dbtp": -math.inf,
    }
    verdict = evaluate(m(values), profile)
    assert verdict.status == FAIL
    flag = next(f for f in verdict.flags if f.rule == "integrated_target_lufs")
    assert flag.message == (
        "Integrated loudness could not be measured (every block is below the -70 LUFS absolute "
        "gate); the limit (target -23.0 LUFS +- 0.5 LU) was not checked."
    )
    assert flag.severity == FAIL
    # -inf (digital silence) is below any maximum: the true-peak limit itself is met
    assert not any(f.rule == "true_peak_max_dbtp" for f in verdict.flags)
    assert verdict.gain.gain_to_target_db is None
    assert "could not be measured" in verdict.gain.advice


@pytest.mark.parametrize(
    "dc, status, limit",
    [(-60.0, PASS, None), (-59.99, WARN, -60.0), (-40.0, WARN, -60.0), (-39.99, FAIL, -40.0)],
)
def test_warn_value_gives_a_warning_band(tmp_path, dc, status, limit):
    # common practice (docs/standards.md): warn above 0.1 % FS (-60 dBFS), fail above 1 % (-40)
    profile = one_limit_profile(tmp_path, "dc_offset_max_dbfs", -40.0, warn_value=-60.0)
    verdict = evaluate(m({"dc_offset_dbfs": dc}), profile)
    assert verdict.status == status
    assert [f.limit for f in verdict.flags] == ([] if limit is None else [limit])


def test_status_is_the_worst_flag_and_every_violation_is_flagged():
    profile = load_profile("ebu-r128")
    values = {
        "channels": 2,
        "sample_rate_hz": 44100,  # warn in ebu-r128
        "frames": 441000,
        "frames_declared": 441000,
        "container_intact": True,
        "integrated_lufs": -23.0,
        "true_peak_dbtp": -0.5,  # fail
        "clipped_runs": 0,
        "nonfinite_samples": 0,
        "dc_offset_dbfs": -80.0,
        "silent_channels": [],
    }
    verdict = evaluate(m(values), profile)
    assert verdict.status == FAIL
    assert sorted(f.rule for f in verdict.flags) == ["sample_rates_hz", "true_peak_max_dbtp"]
    assert evaluate(None, profile).status == ERROR


def test_loudness_range_of_a_short_file_is_at_most_a_warning(tmp_path):
    # EBU Tech 3342: the loudness range is not stable for programmes under 60 s
    profile = one_limit_profile(tmp_path, "loudness_range_max_lu", 12.0)
    short = {"loudness_range_lu": 15.0, "loudness_range_stable": False}
    (flag,) = evaluate(m(short), profile).flags
    assert flag.severity == WARN
    assert "(loudness range is not stable under 60 s (EBU Tech 3342): at most a warning)" in (
        flag.message
    )
    assert evaluate(m({**short, "loudness_range_stable": True}), profile).status == FAIL


def test_channel_rules_skip_mono_files(tmp_path):
    profile = one_limit_profile(tmp_path, "correlation_min", 0.0)
    assert evaluate(m({"channels": 1, "min_correlation": None}), profile).status == PASS


def test_set_limits_and_file_limits_do_not_mix():
    profile = load_profile("mastering-stems")
    stem = {
        "channels": 2,
        "subtype": "PCM_24",
        "format_bits": 24,
        "effective_bits": 24,
        "frames": 480000,
        "frames_declared": 480000,
        "container_intact": True,
        "sample_peak_dbfs": -6.0,
        "clipped_runs": 0,
        "over_full_scale_samples": 0,
        "nonfinite_samples": 0,
        "dc_offset_dbfs": -90.0,
    }
    assert evaluate(m(stem), profile).status == PASS  # no set_* limit reported unmeasured
    the_set = {
        "set_formats_match": True,
        "set_length_mismatch_frames": 0,
        "set_start_offset_max_s": 20.0,  # arrangement: not limited by mastering-stems
        "set_slip_max_s": 0.0,
        "sum_clipped_samples": 4,
        "sum_first_clip_s": 7.25,
        "sum_sample_peak_dbfs": 0.5,
        "sum_sample_peak_time_s": 12.0,
        "sum_true_peak_dbtp": -0.2,
        "set_mix_length_frames": None,  # no reference mix given: no null test
        "null_residual_db": None,
        "null_note": "no reference mix given",
    }
    verdict = evaluate(the_set, profile)  # a plain mapping works too
    assert verdict.status == FAIL
    assert [(f.rule, f.severity, f.position_s) for f in verdict.flags] == [
        ("sum_clipped_samples_max", FAIL, 7.25),
        ("sum_sample_peak_max_dbfs", FAIL, 12.0),
    ]
    assert verdict.gain is None
    # with a mix given, a null test that could not run is flagged, not passed
    with_mix = {**the_set, "set_mix_length_frames": 480000, "null_note": "the mix and the stems "
                "differ in sample rate: no null test"}  # fmt: skip
    flag = next(f for f in evaluate(with_mix, profile).flags if f.rule == "null_residual_max_db")
    assert flag.measured is None and "differ in sample rate" in flag.message


# ---------------------------------------------------------------- gain advice


def test_gain_advice_3_lu_above_target_plain_gain_enough():
    # the case: 3 LU above target, true peak -0.5 dBTP on a -1 dBTP spec
    # (EBU R 128: -23 LUFS, -1 dBTP) -> -3 dB, predicted -3.5 dBTP, plain gain enough
    gain = evaluate(
        m({"channels": 2, "integrated_lufs": -20.0, "true_peak_dbtp": -0.5}),
        load_profile("ebu-r128"),
    ).gain
    assert_allclose(gain.gain_to_target_db, -3.0, rtol=0, atol=1e-12)
    assert_allclose(gain.predicted_true_peak_dbtp, -3.5, rtol=0, atol=1e-12)
    assert gain.plain_gain_enough is True
    assert gain.advice == (
        "Apply -3.00 dB to reach -23.0 LUFS. Plain gain is enough (true peak becomes -3.50 dBTP)."
    )


def test_gain_advice_6_lu_below_target_needs_limiting():
    # the case: 6 LU below target, true peak -3 dBTP -> +6 dB, predicted +3 dBTP
    gain = evaluate(
        m({"channels": 2, "integrated_lufs": -29.0, "true_peak_dbtp": -3.0}),
        load_profile("ebu-r128"),
    ).gain
    assert_allclose(gain.gain_to_target_db, 6.0, rtol=0, atol=1e-12)
    assert_allclose(gain.predicted_true_peak_dbtp, 3.0, rtol=0, atol=1e-12)
    assert gain.plain_gain_enough is False
    assert "needs about 4.0 dB of true-peak limiting" in gain.advice  # +3 dBTP vs -1 dBTP
    assert "Caution" not in gain.advice


def test_gain_advice_reports_noise_floor_pushed_over_its_limit(tmp_path):
    path = write_profile(
        tmp_path,
        'extends = "podcast-stereo"\n[levels]\n'
        'noise_floor_max_dbfs = { value = -60.0, severity = "fail", source = "test value" }',
    )
    values = {
        "channels": 2,
        "integrated_lufs": -22.0,  # 6 LU below -16
        "true_peak_dbtp": -10.0,
        "noise_floor_dbfs": -64.0,  # the file itself meets -60 dBFS
    }
    verdict = evaluate(m(values), load_profile(str(path)))
    assert not any(f.rule == "noise_floor_max_dbfs" for f in verdict.flags)
    gain = verdict.gain
    assert_allclose(gain.predicted_noise_floor_dbfs, -58.0, rtol=0, atol=1e-12)  # -64 + 6
    assert gain.plain_gain_enough is False
    assert "noise floor would rise to -58.0 dBFS, above the limit of -60.0 dBFS" in gain.advice


def test_gain_advice_counts_the_encoded_true_peak():
    # podcast-stereo-mp3: -16 LUFS +- 1 LU, -1 dBTP before and after a 128 kbit/s MP3 round trip.
    # A file 3 LU quiet whose own peak has room but whose encoded peak does not: plain gain moves
    # both peaks by the gain (arithmetic: -3.5 + 3 = -0.5 dBTP after encoding, 0.5 dB over).
    values = {
        "channels": 2,
        "integrated_lufs": -19.0,
        "true_peak_dbtp": -5.0,
        "encoded_true_peak_dbtp": -3.5,
    }
    gain = evaluate(m(values), load_profile("podcast-stereo-mp3")).gain
    assert_allclose(gain.gain_to_target_db, 3.0, rtol=0, atol=1e-12)
    assert gain.plain_gain_enough is False
    assert "after the MP3 round trip at 128 kbit/s the true peak would reach about -0.50 dBTP" in (
        gain.advice
    )
    assert "needs about 0.5 dB more headroom" in gain.advice
    # 2 dB lower encoded peak: the same gain is enough
    fine = evaluate(
        m({**values, "encoded_true_peak_dbtp": -5.5}), load_profile("podcast-stereo-mp3")
    )
    assert fine.gain.plain_gain_enough is True


def test_large_positive_gain_carries_a_listening_level_caution():
    values = {"channels": 2, "integrated_lufs": -30.0, "true_peak_dbtp": -20.0}
    gain = evaluate(m(values), load_profile("podcast-stereo")).gain
    assert_allclose(gain.gain_to_target_db, 14.0, rtol=0, atol=1e-12)  # -16 - (-30)
    assert gain.plain_gain_enough is True
    assert "Caution: this raises the level by 14.0 dB; turn the monitoring down" in gain.advice


def test_gain_advice_aims_at_the_middle_of_an_rms_window():
    # audiobook-chapter (common practice, from memory): RMS -23 to -18 dBFS -> aim at -20.5;
    # sample peak <= -3 dBFS; noise floor <= -60 dBFS
    profile = load_profile("audiobook-chapter")
    values = {"channels": 1, "rms_dbfs": -26.0, "sample_peak_dbfs": -9.0, "noise_floor_dbfs": -64.0}
    gain = evaluate(m(values), profile).gain
    assert_allclose(gain.gain_to_target_db, 5.5, rtol=0, atol=1e-12)  # -20.5 - (-26)
    assert_allclose(gain.predicted_noise_floor_dbfs, -58.5, rtol=0, atol=1e-12)
    assert gain.plain_gain_enough is False
    assert gain.advice.startswith("Apply +5.50 dB to reach an RMS level of -20.5 dBFS")
    assert "noise floor would rise to -58.5 dBFS" in gain.advice
    assert "sample peak" not in gain.advice  # -9 + 5.5 = -3.5 dBFS stays under -3
    silent = evaluate(m({"channels": 1, "rms_dbfs": -math.inf}), profile).gain
    assert silent.gain_to_target_db is None and "could not be measured" in silent.advice


def test_gain_advice_within_tolerance_and_without_target():
    values = {"channels": 2, "integrated_lufs": -23.3, "true_peak_dbtp": -6.0}
    gain = evaluate(m(values), load_profile("ebu-r128")).gain
    assert gain.advice.startswith("Loudness is within tolerance; +0.30 dB would reach")
    assert evaluate(m(values), load_profile("measure-only")).gain is None


# ---------------------------------------------------------------- mono convention


# BS.1770 weights one channel 1.0, so the same audio on two identical channels
# reads 10 log10(2) = 3.01 LU higher (docs/standards.md, "Mono", checked).
MONO_19 = {"channels": 1, "integrated_lufs": -19.0, "integrated_dual_mono_lufs": -15.99}


def test_mono_file_passes_dual_mono_profile_and_fails_single_channel_one(tmp_path):
    dual = load_profile("podcast-stereo")  # -16 LUFS +- 1, mono judged as dual mono
    assert dual.mono_loudness == "dual_mono"
    single = load_profile(
        str(
            write_profile(
                tmp_path, 'extends = "podcast-stereo"\n[loudness]\nmono_loudness = "single_channel"'
            )
        )
    )
    flags = lambda v: [f for f in v.flags if f.rule == "integrated_target_lufs"]  # noqa: E731
    assert flags(evaluate(m(MONO_19), dual)) == []
    (flag,) = flags(evaluate(m(MONO_19), single))
    assert flag.measured == -19.0
    assert "3.00 LU below the target of -16.00 LUFS" in flag.message
    assert "(mono file, one channel)" in flag.message
    # and the shipped mono profile (-19 LUFS, one channel) accepts the same file
    assert flags(evaluate(m(MONO_19), load_profile("podcast-mono"))) == []


def test_dual_mono_falls_back_to_plus_3_01_lu_when_not_measured():
    values = {"channels": 1, "integrated_lufs": -20.0, "true_peak_dbtp": -6.0}
    gain = evaluate(m(values), load_profile("podcast-stereo")).gain
    # -16 - (-20 + 10 log10 2): BS.1770 power sum of two identical channels
    assert_allclose(gain.gain_to_target_db, 4.0 - 10 * math.log10(2), rtol=0, atol=1e-12)


def test_limit_key_names_say_their_direction_and_unit():
    # house style: a max limit's key says _max, a min limit's _min, and units sit in the name
    for d in CATALOGUE:
        if d.kind in (MAX, MIN):
            assert ("_max" in d.key) == (d.kind == MAX), d.key
            assert ("_min" in d.key) == (d.kind == MIN), d.key
        if d.unit in ("LUFS", "LU", "dBTP", "dBFS", "dB", "s", "Hz", "frames"):
            assert d.key.endswith("_" + d.unit.lower()), d.key


def test_a_gain_that_rounds_to_nothing_has_no_minus_sign():
    # podcast-stereo aims at -16 LUFS; a file at -15.999 LUFS needs -0.001 dB, which reads +0.00.
    from checker.judge.gain import advise

    values = {"integrated_lufs": -15.999, "true_peak_dbtp": -3.0, "sample_peak_dbfs": -3.5,
              "channels": 2}  # fmt: skip
    advice = advise(values, load_profile("podcast-stereo"))
    assert advice is not None and "+0.00 dB would reach" in advice.advice
    assert "-0.00" not in advice.advice
