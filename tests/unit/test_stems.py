"""Stem sets: consistency, the sum of the stems, and the null test against a reference mix.

Expected numbers come from arithmetic identities (named beside each check), from
EBU Tech 3341 where the sum's true peak and loudness are checked, and from a
direct (non-FFT) evaluation of the cross-correlation for the streaming null test.
"""

from __future__ import annotations

import gc
import math
import tracemalloc

import numpy as np
import pytest
import soundfile as sf
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from signals import noise, programme, write

from checker.meters.base import MeasureOptions
from checker.model.verdict import ERROR, PASS, Verdict
from checker.stems.null import FIT_FLOOR_DB, NullAccumulator
from checker.stems.sets import check_stem_set, set_file_result, stem_set_from_folder

RATE = 48_000


def _write_set(folder, stems: list[np.ndarray], mix: np.ndarray | None, subtype="FLOAT", rate=RATE):
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for i, x in enumerate(stems):
        paths.append(str(write(folder / f"stem{i}.wav", x, rate, subtype=subtype)))
    mix_path = None
    if mix is not None:
        mix_path = str(write(folder.parent / f"{folder.name}-mix.wav", mix, rate, subtype=subtype))
    return paths, mix_path


def _split(x: np.ndarray, weights) -> list[np.ndarray]:
    return [w * x for w in weights]


def _delay(x: np.ndarray, frames: int) -> np.ndarray:
    """Same length, content moved later by ``frames`` (earlier when negative)."""
    out = np.zeros_like(x)
    if frames >= 0:
        out[frames:] = x[: len(x) - frames]
    else:
        out[:frames] = x[-frames:]
    return out


# ------------------------------------------------------------------ null test


def test_stems_from_a_known_mix_null_below_minus_120_db(tmp_path):
    x = programme(8.0, RATE, channels=2, seed=11)
    stems = _split(x, (0.5, 0.25, 0.15, 0.1))
    mix = sum(stems)
    paths, mix_path = _write_set(tmp_path / "set", stems, mix)
    r = check_stem_set(paths, mix_path, MeasureOptions())
    # Arithmetic identity: the float32 stems sum to the float32 mix up to one rounding
    # per stem and one for the mix, each at most 2^-24 relative, so about -140 dB.
    assert r.values["null_residual_db"] < -120.0
    assert r.values["null_fit_offset_samples"] == 0  # identity: no offset
    assert_allclose(r.values["null_fit_gain_db"], 0.0, rtol=0, atol=1e-5)  # identity: unity gain
    assert r.values["null_fit_residual_db"] <= -120.0
    assert r.values["set_format_mismatch"] is False
    assert r.values["set_formats_match"] is True
    assert r.values["set_length_mismatch_frames"] == 0
    assert r.values["set_slipped_stems"] == []
    assert r.findings == () and r.errors == ()


def test_integer_stems_that_sum_exactly_null_to_digital_silence(tmp_path):
    rng = np.random.default_rng(5)
    # 24-bit codes chosen so the stems' codes add up exactly to the mix's codes.
    codes = rng.integers(-(2**21), 2**21, size=(3, RATE * 2, 2))
    stems = [c / 2**23 for c in codes]
    mix = codes.sum(axis=0) / 2**23
    paths, mix_path = _write_set(tmp_path / "set", stems, mix, subtype="PCM_24")
    r = check_stem_set(paths, mix_path, MeasureOptions())
    # Integer arithmetic identity: mix - sum is exactly zero, a level of digital silence.
    assert r.values["null_residual_db"] == -math.inf
    assert r.values["null_fit_residual_db"] == FIT_FLOOR_DB  # reported at the fit's floor
    assert "floor" in r.values["null_note"]


@pytest.mark.parametrize("shift", [10, -7])
def test_mix_offset_against_the_stems_is_found_by_the_fit(tmp_path, shift):
    x = noise(5.0, RATE, channels=2, seed=3) * 0.1
    stems = _split(x, (0.6, 0.4))
    mix = _delay(sum(stems), shift)
    paths, mix_path = _write_set(tmp_path / "set", stems, mix, subtype="DOUBLE")
    r = check_stem_set(paths, mix_path, MeasureOptions(), max_lag_samples=4800)
    v = r.values
    # White noise: x[n - d] and x[n] are uncorrelated, so |m - s|^2 = |m|^2 + |s|^2 = 2 |m|^2
    # (up to the |d| edge frames): +3.01 dB = 10 log10(2); estimate spread ~0.02 dB at 480k samples.
    assert_allclose(v["null_residual_db"], 10 * math.log10(2), rtol=0, atol=0.05)
    assert v["null_fit_offset_samples"] == shift  # the mix is late by `shift`: m[n] = s[n - shift]
    assert_allclose(v["null_fit_gain_db"], 0.0, rtol=0, atol=1e-6)  # identity: unity gain
    assert v["null_fit_inverted"] is False
    # the edge frames dropped by the shift are outside the fit window: a perfect fit
    assert v["null_fit_residual_db"] <= -120.0
    assert any("do not rebuild the mix" in f and f"offset {shift} samples" in f for f in r.findings)


def test_inverted_and_attenuated_mix_fits_with_negative_gain(tmp_path):
    x = noise(3.0, RATE, channels=1, seed=8) * 0.1
    stems = _split(x, (0.7, 0.3))
    mix = -0.5 * sum(stems)
    paths, mix_path = _write_set(tmp_path / "set", stems, mix, subtype="DOUBLE")
    v = check_stem_set(paths, mix_path, MeasureOptions()).values
    # identity: m = -0.5 s, so m - s = -1.5 s: residual 20 log10(1.5 / 0.5) = +9.54 dB
    assert_allclose(v["null_residual_db"], 20 * math.log10(3.0), rtol=0, atol=1e-9)
    assert_allclose(v["null_fit_gain_db"], 20 * math.log10(0.5), rtol=0, atol=1e-9)
    assert v["null_fit_inverted"] is True and v["null_fit_offset_samples"] == 0


# ------------------------------------------------------------ start and slip


def test_a_stem_shifted_by_10_samples_is_found_and_flagged(tmp_path):
    n = RATE * 4
    lead = RATE // 2  # 0.5 s of digital silence before the content, as printed from a session
    body = noise(3.5, RATE, channels=2, seed=21) * 0.1
    x = np.zeros((n, 2))
    x[lead:] = body
    weights = (0.9, 0.05, 0.05)
    stems = _split(x, weights)
    mix = sum(stems)
    stems[0] = _delay(stems[0], 10)  # the loud stem slipped 10 samples late
    paths, mix_path = _write_set(tmp_path / "set", stems, mix, subtype="DOUBLE")
    r = check_stem_set(paths, mix_path, MeasureOptions())
    v = r.values
    # arithmetic: content begins at frame `lead` in every stem and at lead + 10 in the slipped one
    assert_allclose(v["set_start_times_s"], [(lead + 10) / RATE, lead / RATE, lead / RATE], atol=0)
    assert_allclose(v["set_start_offset_max_s"], 10 / RATE, rtol=0, atol=1e-12)
    assert v["set_slipped_stems"] == ["stem0.wav"]
    # the cross-correlation against the mix finds the known shift exactly (arithmetic: 10 samples
    # = 10 / 48000 s = 0.208 ms)
    assert v["set_alignment_reference"] == "reference mix"
    assert v["set_stem_offsets_samples"] == [10, 0, 0]
    assert_allclose(v["set_stem_offsets_ms"], [10_000 / RATE, 0.0, 0.0], rtol=0, atol=1e-12)
    assert any("stem0.wav is 10 samples (0.21 ms) late" in f for f in r.findings)
    # The best fit follows the dominant stem: the sum is 10 samples late, so
    # m[n] ~ g s[n - d] with d = -10 (a negative offset: the mix is early).
    assert v["null_fit_offset_samples"] == -10
    # Arithmetic (least squares, white noise x and its 10-sample shift y uncorrelated, equal
    # energy): m = x, aligned sum = 0.9 x + 0.1 y, residual = 1 - 0.9^2 / (0.9^2 + 0.1^2)
    # of the mix energy = -19.14 dB. Spread of the cross terms at 336k samples: about 0.1 dB.
    expected = 10 * math.log10(1 - 0.9**2 / (0.9**2 + 0.1**2))
    assert_allclose(v["null_fit_residual_db"], expected, rtol=0, atol=0.3)


def _band(seconds: float, seed: int) -> dict[str, np.ndarray]:
    """An invented four-stem band: drum hits, a held bass note, keys, a vocal with room tone.

    The vocal's room tone starts at frame 0, so its first sample is non-zero (the case that
    made a first-sample start detector name a stem that did not move).
    """
    n = int(seconds * RATE)
    t = np.arange(n) / RATE
    drums = np.zeros((n, 2))
    for a in range(0, n, RATE // 2):
        seg = np.arange(min(n - a, RATE // 2)) / RATE
        hit = np.sin(2 * np.pi * (55 + 90 * np.exp(-seg * 35)) * seg) * np.exp(-seg * 14)
        drums[a : a + seg.size] += 0.3 * hit[:, None]
    bass = 0.25 * np.sin(2 * np.pi * 55 * t)[:, None] * (0.6 + 0.4 * np.sin(np.pi * t))[:, None]
    keys = programme(seconds, RATE, channels=2, seed=seed) * 0.5
    voice = noise(seconds, RATE, channels=1, seed=seed + 1)[:, 0] * np.sin(2 * np.pi * 4 * t) ** 2
    room = noise(seconds, RATE, channels=1, seed=seed + 2)[:, 0] * 1e-3
    vocal = np.repeat((0.1 * voice + room)[:, None], 2, axis=1)
    return {"bass": np.repeat(bass, 2, axis=1), "drums": drums, "keys": keys, "vocal": vocal}


def test_only_the_late_stem_is_named_and_the_null_hint_names_it(tmp_path):
    band = _band(4.0, seed=71)
    mix = sum(band.values())
    folder = tmp_path / "stems"
    folder.mkdir()
    shift = 480  # 10 ms at 48 kHz, the known slip
    for name, x in band.items():
        write(folder / f"{name}.wav", _delay(x, shift) if name == "keys" else x, RATE, "FLOAT")
    mix_path = str(write(tmp_path / "mix.wav", mix, RATE, subtype="FLOAT"))
    paths = sorted(str(p) for p in folder.iterdir())
    r = check_stem_set(paths, mix_path, MeasureOptions())
    v = r.values
    # the first non-zero sample says otherwise (vocal at 0, the others later): kept for information
    assert v["set_start_times_s"][3] == 0.0
    # cross-correlation against the mix: the known shift, nothing else moved
    assert v["set_stem_offsets_samples"] == [0, 0, shift, 0]
    assert_allclose(v["set_stem_offsets_ms"], [0.0, 0.0, 10.0, 0.0], rtol=0, atol=1e-12)
    assert v["set_slipped_stems"] == ["keys.wav"]
    assert v["set_mix_offset_samples"] == 0
    hint = [f for f in r.findings if "do not rebuild the mix" in f]
    assert len(hint) == 1
    assert "keys.wav is 480 samples (10.00 ms) late against the reference mix" in hint[0]
    assert "move keys.wav 480 samples earlier" in hint[0]
    assert "polarity" not in hint[0] and "vocal" not in hint[0]


def test_stems_with_nothing_in_common_and_no_mix_are_not_named(tmp_path):
    band = _band(3.0, seed=81)
    folder = tmp_path / "stems"
    folder.mkdir()
    for name in ("keys", "vocal"):
        write(folder / f"{name}.wav", band[name], RATE, "FLOAT")
    v = check_stem_set(sorted(str(p) for p in folder.iterdir()), None, MeasureOptions()).values
    # independent noise: a correlation peak of ~1/sqrt(N), below the 0.02 floor (a heuristic)
    assert v["set_stem_offsets_samples"] == [None, None]
    assert v["set_slipped_stems"] == [] and v["set_slip_max_s"] is None
    assert "--mix" in v["set_slip_max_note"]  # the note says how to get a measurement
    assert (
        "not measurable" in v["set_stem_offset_notes"][0]
        or "no other stem" in (v["set_stem_offset_notes"][0])
    )


def test_start_threshold_and_content_start(tmp_path):
    x = np.zeros((RATE, 1))
    x[100] = 1e-4  # -80 dBFS: non-zero, below -60 dBFS
    x[200:] = 0.5
    y = np.zeros((RATE, 1))
    y[200:] = 0.5
    paths, _ = _write_set(tmp_path / "set", [x, y], None, subtype="DOUBLE")
    v = check_stem_set(paths, None, MeasureOptions()).values
    # arithmetic: first non-zero frame 100 vs 200; first at or above -60 dBFS: 200 in both
    assert v["set_start_times_s"] == [100 / RATE, 200 / RATE]
    assert v["set_content_start_times_s"] == [200 / RATE, 200 / RATE]
    # A stray first sample does not make a slip: the signals sit at the same place.
    assert v["set_stem_offsets_samples"] == [0, 0]
    assert v["set_slipped_stems"] == []
    v = check_stem_set(paths, None, MeasureOptions(), start_threshold_dbfs=-60.0).values
    assert v["set_start_times_s"] == [200 / RATE, 200 / RATE]
    assert v["set_slipped_stems"] == []
    assert v["null_residual_db"] is None and v["null_note"] == "no reference mix given"


def test_slip_max_ignores_a_later_entry_but_start_offset_counts_it(tmp_path):
    n = RATE * 3
    material = noise(3.0, RATE, channels=1, seed=41) * 0.2
    base = material.copy()
    base[:1000] = 0.0
    late_entry = material.copy()
    late_entry[: RATE * 2] = 0.0  # the same part muted until 2 s: arrangement, not a slip
    slipped = _delay(base, 48)  # 48 frames = 1 ms late
    assert late_entry.shape[0] == n
    paths, _ = _write_set(tmp_path / "set", [base, base, late_entry, slipped], None, "DOUBLE")
    v = check_stem_set(paths, None, MeasureOptions()).values
    # Pairwise, without a mix: stem3 is 48 samples late against each of the others (median 48);
    # every other stem is late against none but stem3 (median 0).
    assert v["set_alignment_reference"] == "other stems"
    assert v["set_stem_offsets_samples"] == [0, 0, 0, 48]
    assert v["set_slipped_stems"] == ["stem3.wav"]
    assert v["set_slip_max_samples"] == 48
    assert_allclose(v["set_slip_max_s"], 48 / RATE, rtol=0, atol=1e-12)
    # arithmetic: first non-zero frames 1000, 1000, 96000, 1048
    assert_allclose(v["set_start_offset_max_s"], (RATE * 2 - 1000) / RATE, rtol=0, atol=1e-12)


def test_an_empty_set_is_an_error(tmp_path):
    r = check_stem_set([], None, MeasureOptions(), folder=str(tmp_path))
    assert len(r.errors) == 1 and "stems = 0" in r.errors[0]
    assert r.values["sum_sample_peak_dbfs"] is None and r.values["sum_note"]


# ------------------------------------------------------------ length, format


def test_a_stem_one_frame_short_is_flagged(tmp_path):
    x = noise(2.0, RATE, channels=2, seed=4) * 0.1
    stems = _split(x, (0.5, 0.5))
    stems[1] = stems[1][:-1]
    paths, mix_path = _write_set(tmp_path / "set", stems, x, subtype="DOUBLE")
    r = check_stem_set(paths, mix_path, MeasureOptions(block_frames=RATE))
    v = r.values
    # arithmetic: 2.0 s at 48 kHz = 96000 frames, one fewer in stem1
    assert v["set_length_frames"] == [96_000, 95_999]
    assert v["set_mix_length_frames"] == 96_000
    assert v["set_length_mismatch_frames"] == 1
    assert any("lengths differ by 1 frames: stem1.wav has 95999" in f for f in r.findings)
    # the null test still runs; only the missing frame of stem1 remains:
    # residual = (0.5 x[-1])^2 / |x|^2, computed here from the same samples
    expected = 10 * math.log10(np.sum((0.5 * x[-1]) ** 2) / np.sum(x**2))
    assert_allclose(v["null_residual_db"], expected, rtol=0, atol=1e-6)


def test_a_stem_in_another_sample_rate_is_a_format_mismatch(tmp_path):
    folder = tmp_path / "set"
    folder.mkdir()
    write(folder / "a.wav", noise(1.0, 48_000, 2, seed=1) * 0.1, 48_000, subtype="PCM_24")
    write(folder / "b.wav", noise(1.0, 44_100, 2, seed=2) * 0.1, 44_100, subtype="PCM_24")
    mix = write(tmp_path / "mix.wav", noise(1.0, 48_000, 2, seed=3) * 0.1, 48_000)
    r = check_stem_set([str(folder / "a.wav"), str(folder / "b.wav")], str(mix), MeasureOptions())
    v = r.values
    assert v["set_sample_rates_hz"] == [48_000, 44_100]
    assert v["set_format_mismatch"] is True and v["set_formats_match"] is False
    assert any("differs in sample rate" in f and "b.wav 44100" in f for f in r.findings)
    # no sum and no null test across rates: explicit None with a reason, never NaN
    assert v["sum_sample_peak_dbfs"] is None and "sample rate" in v["sum_note"]
    assert v["null_residual_db"] is None and "sample rate" in v["null_note"]


def test_a_stem_in_another_subtype_is_a_format_mismatch_but_still_sums(tmp_path):
    x = noise(1.0, RATE, 1, seed=9) * 0.1
    folder = tmp_path / "set"
    folder.mkdir()
    write(folder / "a.wav", x, RATE, subtype="PCM_24")
    write(folder / "b.wav", x, RATE, subtype="FLOAT")
    v = check_stem_set([str(folder / "a.wav"), str(folder / "b.wav")], None, None).values
    assert v["set_subtypes"] == ["PCM_24", "FLOAT"] and v["set_format_mismatch"] is True
    assert v["sum_sample_peak_dbfs"] is not None


def test_an_unreadable_stem_is_an_error_not_a_crash(tmp_path):
    folder = tmp_path / "set"
    folder.mkdir()
    write(folder / "a.wav", noise(1.0, RATE, 1, seed=1) * 0.1, RATE)
    (folder / "b.wav").write_bytes(b"this is not audio")
    r = check_stem_set([str(folder / "a.wav"), str(folder / "b.wav")], None, MeasureOptions())
    assert len(r.errors) == 1 and "b.wav" in r.errors[0]
    assert r.values["set_unreadable_stems"] == ["b.wav"]
    assert r.values["set_sample_rates_hz"] == [RATE, None]
    row = set_file_result(r, Verdict(status=PASS))
    # checker.model.verdict.STATUS_ORDER: an error outranks a pass
    assert row.status == ERROR and row.kind == "set" and row.group == "set"
    assert row.path == str(folder) and "b.wav" in row.error


def test_a_stem_that_fails_mid_decode_is_an_error_and_the_rest_is_checked(tmp_path):
    folder = tmp_path / "set"
    folder.mkdir()
    x = noise(3.0, RATE, 2, seed=6) * 0.1
    write(folder / "a.wav", x, RATE, subtype="PCM_24")
    sf.write(str(folder / "b.flac"), x, RATE)
    data = (folder / "b.flac").read_bytes()
    half = len(data) // 2  # overwrite the middle: the FLAC decoder loses sync part-way
    (folder / "b.flac").write_bytes(data[:half] + b"\x00" * 5000 + data[half + 5000 :])
    paths = [str(folder / "a.wav"), str(folder / "b.flac")]
    r = check_stem_set(paths, None, MeasureOptions(block_frames=10_000))
    assert len(r.errors) == 1 and "b.flac" in r.errors[0] and "decoding failed" in r.errors[0]
    a_frames, b_frames = r.values["set_length_frames"]
    assert a_frames == 3 * RATE and 0 < b_frames < 3 * RATE  # what was decoded before the failure
    assert r.values["set_length_mismatch_frames"] == a_frames - b_frames
    assert r.values["sum_sample_peak_dbfs"] is not None


# -------------------------------------------------------------------- the sum


def test_stems_whose_sum_clips_are_flagged_with_the_first_position(tmp_path):
    lead = RATE  # one second of silence, then two in-phase 1 kHz sines of amplitude 0.6
    t = np.arange(RATE) / RATE
    tone = 0.6 * np.sin(2 * np.pi * 1000.0 * t)
    x = np.concatenate([np.zeros(lead), tone])[:, None]
    paths, _ = _write_set(tmp_path / "set", [x, x], None, subtype="PCM_24")
    r = check_stem_set(paths, None, MeasureOptions(block_frames=5000))
    v = r.values
    # arithmetic: 1.2 sin(2 pi n / 48) >= 1 first at n = ceil(48 asin(1/1.2) / (2 pi)) = 8
    first = math.ceil(48 * math.asin(1 / 1.2) / (2 * math.pi))
    assert first == 8
    assert_allclose(v["sum_first_clip_s"], (lead + first) / RATE, rtol=0, atol=0)
    # arithmetic: the crest 1.2 is sampled at n = 12 of each 48-sample period: 20 log10(1.2)
    assert_allclose(v["sum_sample_peak_dbfs"], 20 * math.log10(1.2), rtol=0, atol=1e-6)
    # arithmetic: per period, samples with 1.2 |sin(2 pi n / 48)| >= 1 are n = 8..16 and 32..40
    assert v["sum_clipped_samples"] == 18 * 1000
    assert any(f"first at {(lead + 8) / RATE:.6f} s" in f for f in r.findings)
    # each stem on its own is fine: 20 log10(0.6) = -4.44 dBFS
    assert_allclose(v["set_max_stem_sample_peak_dbfs"], 20 * math.log10(0.6), rtol=0, atol=1e-6)


def test_sum_true_peak_reuses_the_true_peak_meter(tmp_path):
    # EBU Tech 3341 case 16: fs/4 sine, amplitude 0.50, 45 deg -> -6.0 dBTP (sample peak
    # -9.03 dBFS). Two such stems in phase sum to amplitude 1.0: 0.0 dBTP, sample peak -3.01.
    n = RATE * 2
    x = 0.5 * np.sin(2 * np.pi * np.arange(n) / 4 + np.pi / 4)
    x = np.repeat(x[:, None], 2, axis=1)
    paths, _ = _write_set(tmp_path / "set", [x, x], None, subtype="FLOAT")
    v = check_stem_set(paths, None, MeasureOptions()).values
    assert_allclose(v["sum_sample_peak_dbfs"], -3.0103, rtol=0, atol=1e-3)
    # Tech 3341 true-peak tolerance +0.2 / -0.4 dB
    assert -0.4 <= v["sum_true_peak_dbtp"] <= 0.2
    assert v["sum_clipped_samples"] == 0


def test_sum_integrated_loudness_reuses_the_loudness_meter(tmp_path):
    # EBU Tech 3341 case 1: a stereo 1 kHz sine at -23 dBFS reads -23.0 LUFS (+-0.1 LU).
    # Two in-phase stems of half that amplitude sum to it.
    t = np.arange(RATE * 20) / RATE
    half = 0.5 * 10 ** (-23 / 20) * np.sin(2 * np.pi * 1000 * t)
    x = np.repeat(half[:, None], 2, axis=1)
    paths, _ = _write_set(tmp_path / "set", [x, x], None, subtype="FLOAT")
    v = check_stem_set(paths, None, MeasureOptions()).values
    assert_allclose(v["sum_integrated_lufs"], -23.0, rtol=0, atol=0.1)


# ------------------------------------------------------- streaming invariance


def test_set_values_do_not_depend_on_the_block_size(tmp_path):
    x = programme(3.0, RATE, channels=2, seed=2)
    stems = _split(x, (0.7, 0.2, 0.1))
    stems[2] = _delay(stems[2], 37)
    mix = _delay(sum(_split(x, (0.7, 0.2, 0.1))), 3)
    paths, mix_path = _write_set(tmp_path / "set", stems, mix, subtype="FLOAT")
    results = [
        check_stem_set(paths, mix_path, MeasureOptions(block_frames=b), max_lag_samples=600).values
        for b in (48_000, 4096, 777)
    ]
    ref = results[0]
    for v in results[1:]:
        for key in ("set_start_times_s", "set_length_frames", "sum_clipped_samples"):
            assert v[key] == ref[key]  # exact for positions and counts
        assert v["sum_sample_peak_dbfs"] == ref["sum_sample_peak_dbfs"]
        assert v["null_fit_offset_samples"] == ref["null_fit_offset_samples"]
        for key in ("null_residual_db", "null_fit_gain_db", "null_fit_residual_db"):
            assert_allclose(v[key], ref[key], rtol=0, atol=1e-7)  # sums of power: round-off only


def _direct_fit(m: np.ndarray, s: np.ndarray, lag: int):
    """Independent reference: the least-squares fit evaluated directly for every offset."""
    n = min(len(m), len(s))
    m, s = m[:n], s[:n]
    best = None
    for d in range(-lag, lag + 1):
        sd = np.zeros_like(s)
        if d >= 0:
            sd[d:] = s[: n - d]
        else:
            sd[:d] = s[-d:]
        c = float(np.sum(m * sd))
        e = float(np.sum(sd * sd))
        if e <= 0:
            continue
        explained = c * c / e
        if best is None or explained > best[0]:
            best = (explained, d, c / e)
    return best


@settings(max_examples=25, deadline=None)
@given(
    cuts=st.lists(st.integers(min_value=0, max_value=700), min_size=0, max_size=6),
    lag=st.integers(min_value=0, max_value=40),
    shift=st.integers(min_value=-30, max_value=30),
)
def test_null_accumulator_matches_a_direct_evaluation_for_any_split(cuts, lag, shift):
    rng = np.random.default_rng(abs(shift) + 7 * lag)
    n = 700
    s = rng.standard_normal((n, 2))
    m = 0.8 * _delay(s, shift) + 0.05 * rng.standard_normal((n, 2))
    acc = NullAccumulator(2, lag)
    bounds = [0, *sorted(cuts), n]
    for a, b in zip(bounds[:-1], bounds[1:], strict=True):
        acc.feed(m[a:b], s[a:b])
    r = acc.result()
    # reference: direct sums (numpy, no FFT, no streaming)
    plain = 10 * math.log10(np.sum((m - s) ** 2) / np.sum(m**2))
    assert_allclose(r.null_residual_db, plain, rtol=0, atol=1e-9)
    explained, d, g = _direct_fit(m, s, lag)
    assert r.null_fit_offset_samples == d
    assert_allclose(r.null_fit_gain_db, 20 * math.log10(abs(g)), rtol=0, atol=1e-9)
    resid = 10 * math.log10((np.sum(m**2) - explained) / np.sum(m**2))
    assert_allclose(r.null_fit_residual_db, resid, rtol=0, atol=1e-9)


# ----------------------------------------------------------------- the folder


def test_a_set_is_the_audio_files_of_one_folder_without_the_mix(tmp_path):
    folder = tmp_path / "song"
    folder.mkdir()
    for name in ("b_bass.wav", "a_drums.flac", "c_vox.aiff"):
        sf.write(str(folder / name), np.zeros((100, 1)), RATE)
    sf.write(str(folder / "mix.wav"), np.zeros((100, 1)), RATE)
    (folder / "notes.txt").write_text("x")
    # macOS copies leave '._' resource forks (AppleDouble magic 00 05 16 07) and .DS_Store
    # beside the stems: checker.io.intake.classify says they are not audio.
    (folder / "._b_bass.wav").write_bytes(b"\x00\x05\x16\x07" + bytes(60))
    (folder / ".DS_Store").write_bytes(b"\x00\x00\x00\x01Bud1" + bytes(60))
    (folder / "sub").mkdir()
    s = stem_set_from_folder(str(folder), str(folder / "mix.wav"))
    assert s.name == "song" and s.mix_path == str(folder / "mix.wav")
    assert [p.rsplit("/", 1)[-1] for p in s.stem_paths] == [
        "a_drums.flac",
        "b_bass.wav",
        "c_vox.aiff",
    ]


# ------------------------------------------------------------ constant memory


def _write_long(path, minutes: float, rate: int, seed: int, gain: float) -> None:
    rng = np.random.default_rng(seed)
    chunk = rate * 60
    with sf.SoundFile(str(path), "w", rate, 1, subtype="PCM_16") as f:
        for _ in range(int(minutes)):
            f.write(gain * 0.1 * rng.standard_normal((chunk, 1)).clip(-5, 5))


def _peak_bytes(folder, minutes: float) -> tuple[int, dict]:
    folder.mkdir()
    rate = 8_000
    for i in range(3):
        _write_long(folder / f"s{i}.wav", minutes, rate, seed=i, gain=1.0)
    _write_long(folder.parent / f"{folder.name}-mix.wav", minutes, rate, seed=0, gain=1.0)
    s = stem_set_from_folder(str(folder), str(folder.parent / f"{folder.name}-mix.wav"))
    gc.collect()
    tracemalloc.start()
    try:
        r = check_stem_set(list(s.stem_paths), s.mix_path, MeasureOptions())
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return peak, r.values


def test_a_long_set_is_checked_in_constant_memory(tmp_path):
    short_peak, short = _peak_bytes(tmp_path / "short", 1)
    long_peak, long = _peak_bytes(tmp_path / "long", 10)
    # arithmetic: 10 min at 8 kHz = 4,800,000 frames per file
    assert long["set_length_frames"] == [4_800_000] * 3
    assert short["set_length_frames"] == [480_000] * 3
    # The per-100 ms records the loudness meter keeps (one float per step: 6000 for 10 min,
    # ~48 kB as float64) are the only growth allowed; 1 MB bounds it with margin while a
    # whole 10-minute file would be 38.4 MB as float64 (arithmetic: 4.8e6 * 8 bytes).
    assert long_peak - short_peak < 1_000_000, (short_peak, long_peak)


# ------------------------------------------------------------ profile limits


def test_the_set_row_is_judged_by_the_profiles_set_limits(tmp_path):
    from checker.profile import load as profiles
    from checker.stems.sets import evaluate_set

    t = np.arange(RATE) / RATE
    x = (0.6 * np.sin(2 * np.pi * 1000.0 * t))[:, None]
    paths, mix_path = _write_set(tmp_path / "set", [x, x], 0.5 * x, subtype="FLOAT")
    r = check_stem_set(paths, mix_path, MeasureOptions())
    row = evaluate_set(r, profiles.load_profile("mastering-stems"))
    assert row.kind == "set" and row.group == "set" and row.status == "fail"
    flags = {f.rule: f for f in row.verdict.flags}
    # shipped mastering-stems profile: sum sample peak at most 0 dBFS (common practice);
    # arithmetic: the sum's crest is 1.2 = +1.58 dBFS, first reached at frame 12
    measured = flags["sum_sample_peak_max_dbfs"].measured
    assert_allclose(measured, 20 * math.log10(1.2), rtol=0, atol=1e-6)
    assert flags["sum_sample_peak_max_dbfs"].position_s == 12 / RATE
    # null residual at most -60 dB; arithmetic: m = 0.5 x, s = 2 x, |m - s| / |m| = 1.5 / 0.5 = 3
    assert_allclose(flags["null_residual_max_db"].measured, 20 * math.log10(3), rtol=0, atol=1e-6)
    assert "formats_must_match" not in flags and "length_mismatch_max_frames" not in flags


# ------------------------------------------------------------ stored set values


def _check_set(folder, mix, out, *extra) -> tuple[int, str]:
    import io

    from checker.cli.main import main

    stdout, stderr = io.StringIO(), io.StringIO()
    argv = ["check", str(folder), "--mix", mix, "--profile", "ebu-r128", "--out", str(out)]
    code = main([*argv, "--quiet", *extra], out=stdout, err=stderr)
    return code, stderr.getvalue()


def test_set_values_are_stored_and_reused_until_a_file_changes(tmp_path, monkeypatch):
    # A second check of an unchanged set (e.g. against another profile) reads its values
    # from results.sqlite instead of the stems; a changed stem, or --fresh, reads them again.
    import os

    import checker.stems.sets as stems_module

    x = programme(4.0, RATE, channels=2, seed=21)
    paths, mix = _write_set(tmp_path / "set", _split(x, (0.5, 0.3, 0.2)), x)
    out = tmp_path / "out"
    passes = []
    real = stems_module.check_stem_set
    monkeypatch.setattr(
        stems_module, "check_stem_set", lambda *a, **k: passes.append(1) or real(*a, **k)
    )
    code, err = _check_set(tmp_path / "set", mix, out)
    assert code in (0, 1), err
    first = (out / "report.csv").read_text()
    assert len(passes) == 1
    _check_set(tmp_path / "set", mix, out)
    assert len(passes) == 1  # unchanged: stored values
    assert (out / "report.csv").read_text().splitlines()[1] == first.splitlines()[1]  # set row
    _check_set(tmp_path / "set", mix, out, "--fresh")
    assert len(passes) == 2
    st = os.stat(paths[1])
    os.utime(paths[1], ns=(st.st_atime_ns, st.st_mtime_ns + 1_000_000))
    _check_set(tmp_path / "set", mix, out)
    assert len(passes) == 3  # a stem's identity changed
