"""checker.meters.silence: head/tail silence and digital zero, dropouts, silent files."""

from __future__ import annotations

import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from meterkit import info_for, run_meter, to_codes
from numpy.testing import assert_allclose
from signals import write

from checker.audio import Block
from checker.layout import default_layout
from checker.measure import measure
from checker.meters.base import MeasureOptions
from checker.meters.silence import SilenceMeter


def run(info, x, raw=None, sizes=(10**9,), options=None):
    return run_meter(SilenceMeter, info, x, raw, sizes, options)


def padded_programme(rate: int, seed: int = 0) -> np.ndarray:
    """0.5 s digital zero | 2 s tone at -20 dBFS with a 50 ms digital-zero gap at 1.7 s
    (file time) and a 4 ms gap at 2.0 s | 0.3 s uniform noise peaking below -70 dBFS |
    0.2 s digital zero. Stereo, the tone in the left channel only."""
    rng = np.random.default_rng(seed)

    def frames(s):
        return int(round(s * rate))

    x = np.zeros((frames(3.0), 2))
    t = np.arange(frames(2.0)) / rate
    x[frames(0.5) : frames(2.5), 0] = 0.1 * np.sin(2 * np.pi * 1000 * t + 0.3)
    x[frames(1.7) : frames(1.75)] = 0.0
    x[frames(2.0) : frames(2.004)] = 0.0
    x[frames(2.5) : frames(2.8)] = rng.uniform(-1, 1, (frames(0.3), 2)) * 10 ** (-70 / 20)
    return x


def check_padded(r) -> None:
    # Expected positions are where padded_programme put them; 10 ms tolerance (issue 3).
    assert not r.is_silent
    assert_allclose(r.leading_silence_s, 0.5, rtol=0, atol=0.01)
    assert_allclose(r.leading_digital_zero_s, 0.5, rtol=0, atol=0.01)
    # -70 dBFS noise is below the -60 dBFS threshold (common practice) but not digital zero.
    assert_allclose(r.trailing_silence_s, 0.5, rtol=0, atol=0.01)
    assert_allclose(r.trailing_digital_zero_s, 0.2, rtol=0, atol=0.01)
    # The 4 ms gap is shorter than the 10 ms minimum (common practice default).
    assert r.dropouts == 1
    assert_allclose(r.dropout_times_s, [1.7], rtol=0, atol=0.01)
    assert_allclose(r.longest_dropout_s, 0.05, rtol=0, atol=0.01)


def test_padding_and_dropouts_float():
    x = padded_programme(48_000)
    check_padded(run(info_for("FLOAT", 2, 48_000), x, sizes=(4_800,)))


def test_padding_and_dropouts_pcm16_through_measure(tmp_path):
    x = padded_programme(44_100)
    path = write(tmp_path / "padded.wav", x, rate=44_100, subtype="PCM_16")
    m = measure(path, MeasureOptions(block_frames=3_000))
    check_padded(m)
    assert m.silence_note is None


def test_dropout_minimum_is_a_parameter():
    x = padded_programme(48_000)
    r = run(info_for("FLOAT", 2, 48_000), x, options=MeasureOptions(dropout_min_s=0.003))
    # Both gaps (50 ms at 1.7 s, 4 ms at 2.0 s) now count; tone zero crossings never give
    # exact zeros here (phase 0.3 rad), so nothing else does.
    assert r.dropouts == 2
    assert_allclose(r.dropout_times_s, [1.7, 2.0], rtol=0, atol=0.01)


def test_threshold_is_a_parameter():
    x = padded_programme(48_000)
    r = run(info_for("FLOAT", 2, 48_000), x, options=MeasureOptions(silence_threshold_dbfs=-80))
    # At -80 dBFS the -70 dBFS noise tail is no longer silence: only the 0.2 s zeros are.
    assert_allclose(r.trailing_silence_s, 0.2, rtol=0, atol=0.01)


def test_fully_silent_file():
    rng = np.random.default_rng(1)
    x = rng.uniform(-1, 1, (16_000, 2)) * 10 ** (-65 / 20)  # peaks below -60 dBFS
    x[4_000:8_000] = 0.0  # a digital-zero run inside: not a dropout in a silent file
    r = run(info_for("FLOAT", 2, 16_000), x, sizes=(999,))
    assert r.is_silent
    # Entirely below the threshold: leading = trailing = whole duration (1.0 s), said so.
    assert r.leading_silence_s == 1.0 and r.trailing_silence_s == 1.0
    assert r.leading_digital_zero_s == 0.0 and r.trailing_digital_zero_s == 0.0
    assert r.dropouts == 0 and r.dropout_times_s == [] and "whole duration" in r.silence_note

    zero = run(info_for("PCM_24", 1, 16_000), np.zeros((8_000, 1)), np.zeros((8_000, 1), "int32"))
    assert zero.is_silent and zero.leading_digital_zero_s == 0.5
    assert zero.trailing_digital_zero_s == 0.5 and zero.dropouts == 0


def test_nan_counts_as_zero():
    x = padded_programme(16_000)
    x[x[:, 0] == 0.0, 0] = np.nan  # every exact zero of the left channel becomes NaN
    x[-100:, 1] = np.inf  # Inf is not audio either
    check_padded(run(info_for("FLOAT", 2, 16_000), x, sizes=(1_000,)))


def test_empty_file():
    r = run(info_for("FLOAT", 1, 16_000), np.zeros((0, 1)))
    assert r.is_silent and r.leading_silence_s == 0.0 and r.silence_note == "no audio frames"


# ------------------------------------------------------------------ block-size invariance


def invariance_cases():
    # A low rate keeps the one-frame-block run short; the meter has no rate limit.
    x = padded_programme(4_000)
    raw = to_codes(x, 16)
    return [
        (info_for("FLOAT", 2, 4_000), x, None),
        (info_for("PCM_16", 2, 4_000), raw * 2.0**-31, raw),
    ]


CASES = invariance_cases()
REFS = [run(info, x, raw).to_dict() for info, x, raw in CASES]


def test_silence_block_size_invariance_fixed_sizes():
    for (info, x, raw), ref in zip(CASES, REFS, strict=True):
        assert ref["dropouts"] == 1
        for size in (1, 7, 4_800, 48_000):
            # Positions and counts are frame indices: exactly equal for every split.
            assert run(info, x, raw, sizes=(size,)).to_dict() == ref


@settings(max_examples=25, deadline=None)
@given(which=st.integers(0, 1), cuts=st.lists(st.integers(0, 12_000), max_size=30))
def test_silence_block_split_invariance_hypothesis(which, cuts):
    info, x, raw = CASES[which]
    meter = SilenceMeter(info, default_layout(2), MeasureOptions())
    bounds = [0, *sorted(cuts), x.shape[0]]
    for a, b in zip(bounds[:-1], bounds[1:], strict=True):  # zero-frame blocks included
        meter.feed(Block(x[a:b].copy(), None if raw is None else raw[a:b].copy(), a))
    got = meter.result().to_dict()
    assert got == REFS[which]
    assert not any(isinstance(v, float) and math.isnan(v) for v in got.values())
