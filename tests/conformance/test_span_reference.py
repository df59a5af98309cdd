"""Programme span and parts against pyebur128 on the programme (or part) alone.

The span's values come from per-100 ms records kept during the one pass
(checker/analysis/span.py); pyebur128 (libebur128, an independent BS.1770
implementation) measures the same samples cut out by the test.
"""

from __future__ import annotations

import numpy as np
import pyebur128
import pytest
import scipy.signal
import soundfile as sf
from numpy.testing import assert_allclose

from checker.analysis.onepass import measure
from checker.meters.base import MeasureOptions

FS = 48000


def ebur128(x: np.ndarray) -> tuple[float, float]:
    """(integrated LUFS, true peak dBTP over channels) by pyebur128."""
    mode = pyebur128.MeasurementMode.MODE_I | pyebur128.MeasurementMode.MODE_TRUE_PEAK
    state = pyebur128.R128State(x.shape[1], FS, mode)
    state.add_frames(np.ascontiguousarray(x, dtype=np.float64).reshape(-1), x.shape[0])
    tp = max(pyebur128.get_true_peak(state, c) for c in range(x.shape[1]))
    return pyebur128.get_loudness_global(state), 20 * np.log10(tp)


def noise(seconds: float, lufs: float, seed: int) -> np.ndarray:
    """Stereo noise low-passed at 10 kHz (band-limited, so true-peak readers agree), scaled
    to about ``lufs`` (pyebur128 is the reference for the exact value)."""
    rng = np.random.default_rng(seed)
    sos = scipy.signal.butter(8, 10000, fs=FS, output="sos")
    x = scipy.signal.sosfilt(sos, rng.standard_normal((int(seconds * FS), 2)), axis=0)
    x *= 10 ** ((lufs - ebur128(x)[0]) / 20)
    return x


def tone(seconds: float, hz: float, dbfs: float) -> np.ndarray:
    t = np.arange(int(seconds * FS)) / FS
    s = 10 ** (dbfs / 20) * np.sin(2 * np.pi * hz * t)
    return np.stack([s, s], axis=1)


def silence(seconds: float) -> np.ndarray:
    return np.zeros((int(seconds * FS), 2))


@pytest.fixture(scope="module")
def lineup_file(tmp_path_factory):
    programme = noise(12.0, -23.0, 1)
    x = np.concatenate([tone(3.0, 1000.0, -18.0), silence(1.0), programme, silence(1.0),
                        tone(2.0, 1000.0, -18.0)])  # fmt: skip
    path = tmp_path_factory.mktemp("span") / "lineup.wav"
    sf.write(path, x, FS, subtype="FLOAT")
    return str(path), programme, x


def test_detected_span_matches_programme_alone(lineup_file):
    path, programme, _ = lineup_file
    v = measure(path, MeasureOptions(span="auto")).values
    ref_i, ref_tp = ebur128(programme)
    assert_allclose(v["integrated_lufs"], ref_i, rtol=0, atol=0.05)  # pyebur128, programme
    # True peak: ours and libebur128's oversampling filters differ; on noise band-limited
    # to 10 kHz both read within ~0.1 dB of the true inter-sample peak (our accuracy table
    # in checker/meters/truepeak.py; libebur128 uses a 4x polyphase FIR), so 0.2 dB.
    assert_allclose(v["true_peak_dbtp"], ref_tp, rtol=0, atol=0.2)
    assert_allclose(v["programme_start_s"], 4.0, rtol=0, atol=1e-9)  # generated layout
    assert_allclose(v["programme_end_s"], 16.0, rtol=0, atol=1e-9)
    # the whole file stays available: tone included it reads louder than the programme
    assert v["file_integrated_lufs"] > v["integrated_lufs"] + 0.5


def test_tone_frequency_and_level_detected(lineup_file):
    path, _, _ = lineup_file
    v = measure(path, MeasureOptions(span="auto")).values
    # generated: 1000 Hz at -18 dBFS (sine peak level, AES17 convention) for 3 s
    assert_allclose(v["lineup_tone_hz"], 1000.0, rtol=0, atol=1.0)
    assert_allclose(v["lineup_tone_dbfs"], -18.0, rtol=0, atol=0.05)
    assert_allclose(v["lineup_tone_s"], 3.0, rtol=0, atol=0.1)
    assert_allclose(v["tail_tone_s"], 2.0, rtol=0, atol=0.1)


def test_other_tone_frequency(tmp_path):
    programme = noise(5.0, -20.0, 2)
    x = np.concatenate([tone(2.0, 440.0, -20.0), silence(0.5), programme])
    path = tmp_path / "a440.wav"
    sf.write(path, x, FS, subtype="FLOAT")
    v = measure(str(path), MeasureOptions(span="auto")).values
    assert_allclose(v["lineup_tone_hz"], 440.0, rtol=0, atol=1.0)  # generated value
    assert_allclose(v["lineup_tone_dbfs"], -20.0, rtol=0, atol=0.05)
    assert_allclose(v["integrated_lufs"], ebur128(programme)[0], rtol=0, atol=0.05)


def test_explicit_points_in_seconds(lineup_file):
    path, programme, _ = lineup_file
    v = measure(path, MeasureOptions(span_in="4.0", span_out="16.0")).values
    assert_allclose(v["integrated_lufs"], ebur128(programme)[0], rtol=0, atol=0.05)
    assert v["lineup_tone_hz"] is None  # no detection asked for


def test_parts_each_match_pyebur128(tmp_path):
    levels = (-20.0, -23.0, -26.0)
    parts = [noise(6.0, lufs, seed) for seed, lufs in enumerate(levels, start=10)]
    x = np.concatenate([parts[0], silence(3.0), parts[1], silence(3.0), parts[2]])
    path = tmp_path / "parts.wav"
    sf.write(path, x, FS, subtype="FLOAT")
    v = measure(str(path), MeasureOptions(break_min_s=2.0)).values
    assert v["parts_count"] == 3
    for part, samples, start in zip(v["parts"], parts, (0.0, 9.0, 18.0), strict=True):
        ref_i, ref_tp = ebur128(samples)
        assert_allclose(part["integrated_lufs"], ref_i, rtol=0, atol=0.1)  # pyebur128, part
        assert_allclose(part["true_peak_dbtp"], ref_tp, rtol=0, atol=0.2)  # as above
        assert_allclose(part["start_s"], start, rtol=0, atol=1e-9)  # generated layout
        assert_allclose(part["end_s"], start + 6.0, rtol=0, atol=1e-9)


def test_downmix_values_describe_the_span(tmp_path):
    """A 5.1 file with line-up tone on every channel: the fold-down's integrated loudness
    is pyebur128's on the BS.775 fold-down of the programme alone (fold-down written out
    here: Lo = L + 0.7071 C + 0.7071 Ls, Ro likewise; BS.775, from memory)."""
    prog = np.concatenate(
        [noise(8.0, -26.0, 21), noise(8.0, -26.0, 22), noise(8.0, -30.0, 23)], axis=1
    )  # fmt: skip  (L R, C LFE, Ls Rs)
    prog[:, 3] = 0.0  # LFE
    head = np.concatenate([tone(2.0, 1000.0, -20.0)] * 3, axis=1)
    head[:, 3] = 0.0
    x = np.concatenate([head, np.zeros((FS, 6)), prog])
    path = tmp_path / "five1.wav"
    sf.write(path, x, FS, subtype="FLOAT")
    v = measure(str(path), MeasureOptions(span="auto")).values
    c = 0.7071
    fold = np.stack([prog[:, 0] + c * prog[:, 2] + c * prog[:, 4],
                     prog[:, 1] + c * prog[:, 2] + c * prog[:, 5]], axis=1)  # fmt: skip
    ref_i, ref_tp = ebur128(fold)
    assert_allclose(v["programme_start_s"], 3.0, rtol=0, atol=1e-9)  # generated layout
    assert_allclose(v["downmix_integrated_lufs"], ref_i, rtol=0, atol=0.05)  # pyebur128
    assert_allclose(v["downmix_true_peak_dbtp"], ref_tp, rtol=0, atol=0.2)  # as above
