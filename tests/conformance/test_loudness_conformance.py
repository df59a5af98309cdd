"""Loudness conformance: BS.1770-4 coefficients and calibration, EBU Tech 3341 and 3342 cases.

Signals are synthesised from the published test-signal descriptions (parameters as
collected in docs/standards.md: secondary copies of the test-case tables,
checked against several sources but not against the PDFs; the durations of Tech 3341 cases 9 and 12 are
derived from the expected result). Levels are the peak level of a 1 kHz sine in
dBFS, stereo, both channels in phase, as in EBU Tech 3341/3342.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from signals import sine, sine_segments, write

from checker.analysis.onepass import measure
from checker.dsp.kweighting import k_weighting_sos
from checker.io.audio import Block, StreamInfo
from checker.io.layout import default_layout
from checker.meters.base import MeasureOptions
from checker.meters.loudness import LoudnessMeter

RATE = 48_000
# EBU Tech 3341 (2023 V4): tolerance +-0.1 LU for M, S and I.
TECH3341_TOL_LU = 0.1
# Our own tighter aim (issue 2: "aim for +-0.025"); still far outside our numerical noise.
AIM_LU = 0.025
# EBU Tech 3342: tolerance +-1 LU for the LRA cases.
TECH3342_TOL_LU = 1.0
AIM_LRA_LU = 0.25


def run_meter(x: np.ndarray, rate: int = RATE, block: int = 48_000) -> LoudnessMeter:
    """Feed an in-memory signal to the meter through a reused buffer (as audio.py does)."""
    frames, channels = x.shape
    info = StreamInfo("mem", "WAV", "DOUBLE", rate, channels, frames)
    meter = LoudnessMeter(info, default_layout(channels), MeasureOptions())
    buf = np.empty((block, channels))
    for start in range(0, frames, block):
        n = min(block, frames - start)
        buf[:n] = x[start : start + n]
        meter.feed(Block(buf[:n], None, start))
    return meter


def measure_file(tmp_path, x: np.ndarray, rate: int = RATE, name: str = "x.wav"):
    path = write(tmp_path / name, x, rate, subtype="FLOAT")
    return measure(path)


# --- BS.1770-4 Annex 1 -------------------------------------------------------------------


def test_bs1770_annex1_tables_at_48k():
    # ITU-R BS.1770-4 Annex 1 Table 1 (stage 1, shelving) and Table 2 (stage 2, high-pass),
    # values as printed (checked, see docs/standards.md); required to 1e-8 by issue 2.
    table1 = [1.53512485958697, -2.69169618940638, 1.19839281085285]
    table1_a = [1.0, -1.69065929318241, 0.73248077421585]
    table2 = [1.0, -2.0, 1.0]
    table2_a = [1.0, -1.99004745483398, 0.99007225036621]
    sos = k_weighting_sos(48_000)
    assert sos.shape == (2, 6)
    assert_allclose(sos[0], table1 + table1_a, rtol=0, atol=1e-8)
    assert_allclose(sos[1], table2 + table2_a, rtol=0, atol=1e-8)


def test_bs1770_calibration_997hz_one_channel(tmp_path):
    # BS.1770-4 Annex 1 (checked): a 0 dBFS 997 Hz sine in one front channel reads -3.01 LUFS.
    x = sine(997.0, 0.0, 10.0, RATE, channels=1)
    stereo = np.hstack([x, np.zeros_like(x)])
    m = measure_file(tmp_path, stereo)
    assert_allclose(m.integrated_lufs, -3.01, rtol=0, atol=0.01)
    assert_allclose(m.max_momentary_lufs, -3.01, rtol=0, atol=0.01)
    assert m.integrated_dual_mono_lufs is None  # not a mono file


@pytest.mark.parametrize("rate", [8_000, 22_050, 44_100, 96_000, 192_000, 384_000])
def test_bs1770_calibration_at_other_rates(rate):
    # BS.1770-4 calibration (-3.01 LUFS for a 0 dBFS 997 Hz tone in one front channel) is
    # defined with the 48 kHz filter; other rates use the redesigned filter, whose gain at
    # 997 Hz drifts by at most 0.04 dB between 8 and 384 kHz (measured, documented in
    # checker/dsp/kweighting.py). 0.05 LU is that drift plus margin, not a standard's tolerance.
    x = sine(997.0, 0.0, 2.0, rate, channels=1)
    result = run_meter(np.hstack([x, np.zeros_like(x)]), rate=rate).result()
    assert_allclose(result.integrated_lufs, -3.01, rtol=0, atol=0.05)


def test_bs1770_mono_and_dual_mono(tmp_path):
    # BS.1770-4: a single channel has weight 1.0, so a -23 dBFS 1 kHz sine in a mono file reads
    # 10 log10(2) = 3.01 LU below the stereo Tech 3341 case 1 value (-23.0); the dual-mono
    # value puts it back at -23.0 (tolerance from EBU Tech 3341).
    m = measure_file(tmp_path, sine(1000.0, -23.0, 20.0, RATE, channels=1))
    assert_allclose(m.integrated_lufs, -23.0 - 3.0103, rtol=0, atol=AIM_LU)
    assert_allclose(m.integrated_dual_mono_lufs, -23.0, rtol=0, atol=AIM_LU)
    assert_allclose(m.integrated_dual_mono_lufs - m.integrated_lufs, 3.0103, rtol=0, atol=1e-4)


def test_bs1770_lfe_is_excluded(tmp_path):
    # BS.1770-4 Table 3 (checked): the LFE channel is not measured. 5.1 in WAV order,
    # signal only in channel 3 (LFE) -> nothing passes the -70 LUFS gate.
    x = np.zeros((RATE * 5, 6))
    x[:, 3] = sine(60.0, -10.0, 5.0, RATE)[:, 0]
    m = measure_file(tmp_path, x)
    assert m.integrated_lufs is None
    assert m.integrated_note == "below absolute gate"
    assert m.max_momentary_lufs == -math.inf


# --- EBU Tech 3341 -----------------------------------------------------------------------


@pytest.mark.parametrize(
    ("case", "segments"),
    [
        (1, [(-23.0, 20.0)]),  # Tech 3341 case 1: -23 dBFS, 20 s -> M, S, I = -23.0
        (2, [(-33.0, 20.0)]),  # Tech 3341 case 2: -33 dBFS, 20 s -> M, S, I = -33.0
    ],
)
def test_tech3341_cases_1_2_steady_tone(tmp_path, case, segments):
    expected = segments[0][0]  # EBU Tech 3341: expected M, S and I equal the tone level
    m = measure_file(tmp_path, sine_segments(segments, rate=RATE))
    assert_allclose(m.integrated_lufs, expected, rtol=0, atol=AIM_LU)
    assert_allclose(m.max_momentary_lufs, expected, rtol=0, atol=AIM_LU)
    assert_allclose(m.max_short_term_lufs, expected, rtol=0, atol=AIM_LU)
    # Every complete momentary / short-term value (not only the maxima) reads the level.
    series = m.timeline.to_dict()
    for key in ("momentary_lufs", "short_term_lufs"):
        values = np.array([v for v in series[key] if v is not None])
        assert values.size > 100
        assert_allclose(values, expected, rtol=0, atol=AIM_LU)


@pytest.mark.parametrize(
    ("case", "segments"),
    [
        # Tech 3341 case 3: -36 / -23 / -36 dBFS for 10 / 60 / 10 s -> I = -23.0
        (3, [(-36.0, 10.0), (-23.0, 60.0), (-36.0, 10.0)]),
        # Tech 3341 case 4: -72 / -36 / -23 / -36 / -72 for 10 / 10 / 60 / 10 / 10 s -> I = -23.0
        (4, [(-72.0, 10.0), (-36.0, 10.0), (-23.0, 60.0), (-36.0, 10.0), (-72.0, 10.0)]),
        # Tech 3341 case 5: -26 / -20 / -26 for 20 / 20.1 / 20 s -> I = -23.0
        (5, [(-26.0, 20.0), (-20.0, 20.1), (-26.0, 20.0)]),
    ],
)
def test_tech3341_cases_3_4_5_gating(case, segments):
    m = run_meter(sine_segments(segments, rate=RATE)).result()
    assert_allclose(m.integrated_lufs, -23.0, rtol=0, atol=TECH3341_TOL_LU)  # the document
    assert_allclose(m.integrated_lufs, -23.0, rtol=0, atol=AIM_LU)  # our aim


def test_tech3341_case_6_five_channels(tmp_path):
    # Tech 3341 case 6: L R C Ls Rs at -28, -28, -24, -30, -30 dBFS, 20 s -> I = -23.0
    # (surround weight 1.41 from BS.1770-4 Table 3).
    levels = [-28.0, -28.0, -24.0, -30.0, -30.0]
    x = np.hstack([sine(1000.0, level, 20.0, RATE) for level in levels])
    m = measure_file(tmp_path, x)
    assert m.channels == 5
    assert_allclose(m.integrated_lufs, -23.0, rtol=0, atol=AIM_LU)
    assert m.integrated_dual_mono_lufs is None


def test_tech3341_case_9_short_term_alternating():
    # Tech 3341 case 9: 1.34 s at -20 dBFS alternating with 1.66 s at -30 dBFS (durations
    # derived); S = -23.0 +-0.1 after the first 3 s. Any 3 s window holds one full period.
    segments = [(-20.0, 1.34), (-30.0, 1.66)] * 6
    meter = run_meter(sine_segments(segments, rate=RATE))
    hop_s, short = meter.series()["short_term_lufs"]
    assert hop_s == 0.1
    valid = short[29:]  # complete 3 s windows end at 3.0 s and later
    assert valid.size == 18 * 10 - 29
    assert np.all(np.isneginf(short[:29]))
    assert_allclose(valid, -23.0, rtol=0, atol=TECH3341_TOL_LU)
    # Closed form for this synthesis (1.34 s at 0.01 + 1.66 s at 0.001 in power, over 3 s):
    # -22.994 LUFS plus the K-weighting gain at 1 kHz above 997 Hz (+0.007 dB, Annex 1 filter).
    expected = 10 * math.log10((1.34 * 1e-2 + 1.66 * 1e-3) / 3.0) + 0.0067
    assert_allclose(valid, expected, rtol=0, atol=0.01)
    assert_allclose(meter.result().max_short_term_lufs, expected, rtol=0, atol=0.01)


def test_tech3341_case_12_momentary_alternating():
    # Tech 3341 case 12: 0.18 s at -20 dBFS alternating with 0.22 s at -30 dBFS (durations
    # derived); M = -23.0 +-0.1 after the first second. Every 400 ms window holds one period.
    segments = [(-20.0, 0.18), (-30.0, 0.22)] * 25
    meter = run_meter(sine_segments(segments, rate=RATE))
    _, momentary = meter.series()["momentary_lufs"]
    valid = momentary[9:]  # windows ending at 1.0 s and later
    assert_allclose(valid, -23.0, rtol=0, atol=TECH3341_TOL_LU)
    # Closed form for this synthesis: 10 log10((0.18 * 0.01 + 0.22 * 0.001) / 0.4) = -22.967,
    # plus +0.007 dB K-weighting gain at 1 kHz (Annex 1 filter).
    expected = 10 * math.log10((0.18e-2 + 0.22e-3) / 0.4) + 0.0067
    assert_allclose(valid, expected, rtol=0, atol=0.01)


@pytest.mark.parametrize("offset_ms", [*range(0, 400, 20), 3.7, 11.31, 17.99])
def test_tech3341_case_13_burst_offsets(offset_ms):
    # Tech 3341 case 13: a 400 ms tone burst at varying offsets (20 ms steps); max M = -23.0
    # +-0.1 in each. Extra offsets that are not a multiple of the 1 ms analysis step show the
    # maximum is found between 100 ms hops too. Burst: -23 dBFS 1 kHz, stereo (from memory:
    # burst level and surrounding silence chosen so the expected maximum is -23.0).
    start = int(round((1.0 + offset_ms / 1000.0) * RATE))
    x = np.zeros((3 * RATE, 2))
    x[start : start + int(0.4 * RATE)] = sine(1000.0, -23.0, 0.4, RATE, channels=2)
    result = run_meter(x, block=4_800).result()
    assert_allclose(result.max_momentary_lufs, -23.0, rtol=0, atol=TECH3341_TOL_LU)
    assert_allclose(result.max_momentary_lufs, -23.0, rtol=0, atol=AIM_LU)
    # The window holding the maximum ends where the burst ends (to within the 1 ms step).
    burst_end_s = (start + 0.4 * RATE) / RATE
    assert_allclose(result.max_momentary_time_s, burst_end_s, rtol=0, atol=0.0015)


# --- EBU Tech 3342 -----------------------------------------------------------------------


@pytest.mark.parametrize(
    ("case", "segments", "expected_lu"),
    [
        (1, [(-20.0, 20.0), (-30.0, 20.0)], 10.0),  # Tech 3342 case 1 -> LRA 10 LU
        (2, [(-20.0, 20.0), (-15.0, 20.0)], 5.0),  # Tech 3342 case 2 -> LRA 5 LU
        (3, [(-40.0, 20.0), (-20.0, 20.0)], 20.0),  # Tech 3342 case 3 -> LRA 20 LU
        # Tech 3342 case 4: -50, -35, -20, -35, -50 dBFS, 20 s each -> LRA 15 LU
        (4, [(-50.0, 20.0), (-35.0, 20.0), (-20.0, 20.0), (-35.0, 20.0), (-50.0, 20.0)], 15.0),
    ],
)
def test_tech3342_cases_1_to_4(tmp_path, case, segments, expected_lu):
    m = measure_file(tmp_path, sine_segments(segments, rate=RATE))
    assert_allclose(m.loudness_range_lu, expected_lu, rtol=0, atol=TECH3342_TOL_LU)
    assert_allclose(m.loudness_range_lu, expected_lu, rtol=0, atol=AIM_LRA_LU)
    assert m.loudness_range_note is None
    # Tech 3342: LRA is flagged unstable for programmes under 60 s.
    assert m.loudness_range_stable is (m.duration_s >= 60.0)


# --- Undefined values: None with a reason, never NaN ------------------------------------


def _assert_no_nan(values: dict):
    for key, value in values.items():
        assert not (isinstance(value, float) and math.isnan(value)), key


def test_digital_silence(tmp_path):
    # BS.1770-4 gating: silence has no block above -70 LUFS -> undefined integrated loudness.
    m = measure_file(tmp_path, np.zeros((5 * RATE, 2)))
    assert m.integrated_lufs is None and m.integrated_note == "below absolute gate"
    assert m.loudness_range_lu is None and m.loudness_range_note == "below absolute gate"
    assert m.loudness_range_stable is False
    assert m.max_momentary_lufs == -math.inf  # level of digital silence (house policy)
    assert m.max_short_term_lufs == -math.inf
    assert m.max_momentary_time_s is None
    _assert_no_nan(m.values)


def test_file_shorter_than_one_block(tmp_path):
    # BS.1770-4: only complete 400 ms gating blocks count; a 0.2 s file has none.
    m = measure_file(tmp_path, sine_segments([(-20.0, 0.2)], rate=RATE))
    assert m.integrated_lufs is None and m.integrated_note == "shorter than one 400 ms block"
    assert m.loudness_range_lu is None
    assert m.loudness_range_note == "shorter than one 3 s short-term window"
    assert m.max_momentary_lufs is None and m.max_short_term_lufs is None
    assert m.integrated_dual_mono_lufs is None
    _assert_no_nan(m.values)


def test_file_entirely_below_absolute_gate(tmp_path):
    # BS.1770-4 absolute gate -70 LUFS: a -80 dBFS tone (about -80 LUFS stereo) is gated out,
    # but its momentary maximum is still a real level.
    m = measure_file(tmp_path, sine_segments([(-80.0, 5.0)], rate=RATE))
    assert m.integrated_lufs is None and m.integrated_note == "below absolute gate"
    assert m.loudness_range_lu is None and m.loudness_range_note == "below absolute gate"
    # Tech 3341 scaling (a stereo 1 kHz sine at X dBFS reads X LUFS) applied at -80 dBFS.
    assert_allclose(m.max_momentary_lufs, -80.0, rtol=0, atol=AIM_LU)
    _assert_no_nan(m.values)


def test_mono_file_shorter_than_block_has_no_dual_mono(tmp_path):
    # Dual mono is derived from integrated loudness: undefined stays undefined (None).
    m = measure_file(tmp_path, sine(1000.0, -20.0, 0.3, RATE, channels=1))
    assert m.integrated_lufs is None and m.integrated_dual_mono_lufs is None
