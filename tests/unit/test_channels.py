"""checker.meters.channels: correlation, identical/inverted channels, silent channels."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from meterkit import info_for, no_nan, run_meter, to_codes
from numpy.testing import assert_allclose
from signals import noise, write

from checker.analysis.onepass import measure
from checker.io.audio import Block
from checker.io.layout import default_layout
from checker.meters.base import MeasureOptions
from checker.meters.channels import ChannelsMeter

RATE = 8_000


def run(x, subtype="DOUBLE", raw=None, sizes=(10**9,)):
    return run_meter(ChannelsMeter, info_for(subtype, x.shape[1]), x, raw, sizes)


def test_inverted_pair_correlates_minus_one():
    a = 0.3 * noise(1.0, RATE, 1, seed=1)
    r = run(np.hstack([a, -a]), sizes=(1_000,))
    # Pearson r(x, -x) = -1 by definition; polarity inversion is exact sample negation.
    assert_allclose(r.min_correlation, -1.0, rtol=0, atol=1e-12)
    assert r.inverted_channels == [[0, 1]] and r.identical_channels == []
    assert r.silent_channels == []


def test_identical_pair_is_dual_mono():
    a = 0.3 * noise(1.0, RATE, 1, seed=2)
    raw = to_codes(np.hstack([a, a]), 24)
    r = run(raw * 2.0**-31, "PCM_24", raw, sizes=(333,))
    # Pearson r(x, x) = 1 by definition.
    assert_allclose(r.channel_correlations[0][2], 1.0, rtol=0, atol=1e-12)
    assert r.identical_channels == [[0, 1]] and r.inverted_channels == []


def test_one_differing_sample_breaks_identity():
    a = 0.3 * noise(1.0, RATE, 1, seed=3)
    x = np.hstack([a, a, -a])
    x[7_999, 1] += 2.0**-20
    r = run(x, sizes=(4_000,))
    assert r.identical_channels == [] and r.inverted_channels == [[0, 2]]


def test_correlation_matches_numpy_corrcoef():
    rng = np.random.default_rng(4)
    s = rng.standard_normal(32_000)
    n = rng.standard_normal(32_000)
    x = np.stack([0.2 * s, 0.2 * (0.6 * s + 0.8 * n), 0.1 * n + 0.003], axis=1)
    r = run(x, sizes=(4_800,))
    ref = np.corrcoef(x.T)  # independent implementation: numpy.corrcoef on the whole file
    got = {(i, j): v for i, j, v in r.channel_correlations}
    assert sorted(got) == [(0, 1), (0, 2), (1, 2)]  # all pairs for <= 8 channels
    for (i, j), v in got.items():
        assert_allclose(v, ref[i, j], rtol=0, atol=1e-9)
    # Constructed: r(s, 0.6 s + 0.8 n) = 0.6 for independent unit-variance s, n; the
    # sampling error of r is about (1 - r^2) / sqrt(N) = 0.004 here (textbook).
    assert_allclose(got[(0, 1)], 0.6, rtol=0, atol=0.02)
    assert_allclose(r.min_correlation, min(got.values()), rtol=0, atol=0)


def test_independent_noise_is_uncorrelated():
    x = 0.2 * noise(6.0, RATE, 2, seed=5)
    r = run(x)
    # Independent channels: r ~ N(0, 1/N) (textbook), N = 48000: 4 sigma = 0.018.
    assert abs(r.min_correlation) < 0.018


def test_silent_channels_and_undefined_correlation():
    rng = np.random.default_rng(6)
    x = np.zeros((RATE, 4))
    x[:, 0] = 0.3 * rng.standard_normal(RATE)
    x[:, 2] = rng.integers(-2, 3, RATE) / 32768  # 16-bit dither only: peak 2 LSB = -84 dBFS
    x[:, 3] = 0.5 * x[:, 0]
    r = run(x)
    # Channel 1 is digital zero; channel 2 peaks below the -80 dBFS silent-channel limit
    # (project choice, see checker/meters/channels.py).
    assert r.silent_channels == [1, 2]
    corr = {(i, j): v for i, j, v in r.channel_correlations}
    assert corr[(0, 1)] is None and corr[(1, 2)] is None and corr[(2, 3)] is None
    assert_allclose(corr[(0, 3)], 1.0, rtol=0, atol=1e-12)  # r(x, 0.5 x) = 1 (definition)
    assert r.min_correlation == corr[(0, 3)]
    assert "silent" in r.correlation_note
    # A pair with a silent channel is never "identical", even two digital-zero channels.
    y = np.zeros((RATE, 2))
    r = run(y)
    assert r.silent_channels == [0, 1] and r.identical_channels == []
    assert r.min_correlation is None and r.correlation_note


def test_mono_has_no_pairs():
    r = run(0.1 * noise(0.5, RATE, 1, seed=7))
    assert r.min_correlation is None and r.channel_correlations == []
    assert "mono" in r.correlation_note


def test_more_than_eight_channels_compare_neighbours():
    x = 0.1 * noise(0.5, RATE, 10, seed=8)
    r = run(x)
    assert [(i, j) for i, j, _ in r.channel_correlations] == [(i, i + 1) for i in range(9)]
    assert "neighbouring" in r.correlation_note


def test_nan_is_ignored():
    a = 0.3 * noise(1.0, RATE, 1, seed=9)
    x = np.hstack([a, -a])
    x[100:110, 0] = np.nan
    x[100:110, 1] = np.inf
    r = run(x, "FLOAT", sizes=(777,))
    assert no_nan(r.to_dict())
    # NaN and Inf both read as 0, so the pair is still an exact inversion.
    assert r.inverted_channels == [[0, 1]]
    assert_allclose(r.min_correlation, -1.0, rtol=0, atol=1e-12)


def test_through_measure(tmp_path):
    a = to_codes(0.1 * noise(2.0, 48_000, 1, seed=10), 24)
    # Written as int32 codes (libsndfile keeps the top 24 bits): -code is exact. Writing
    # floats instead would let libsndfile's float -> PCM_24 truncation break the symmetry.
    path = write(tmp_path / "inv.wav", np.hstack([a, -a, np.zeros_like(a)]), subtype="PCM_24")
    m = measure(path)
    assert m.inverted_channels == [[0, 1]] and m.silent_channels == [2]
    assert_allclose(m.min_correlation, -1.0, rtol=0, atol=1e-12)  # r(x, -x) = -1


# ------------------------------------------------------------------ block-size invariance


def invariance_case():
    rng = np.random.default_rng(11)
    s = rng.standard_normal(RATE)
    x = 0.2 * np.stack([s, -s, s, 0.5 * s + 0.5 * rng.standard_normal(RATE)], axis=1)
    x[:, 2] = x[:, 0]
    x[5_000, 3] = np.nan
    return x


X = invariance_case()
REF = run(X, "FLOAT").to_dict()


def assert_same(ref: dict, got: dict) -> None:
    assert ref.keys() == got.keys()
    for key in ("silent_channels", "identical_channels", "inverted_channels", "correlation_note"):
        assert ref[key] == got[key], key  # exact
    assert_allclose(got["min_correlation"], ref["min_correlation"], rtol=0, atol=1e-9)
    a = np.array([c[2] for c in ref["channel_correlations"]], dtype=float)
    b = np.array([c[2] for c in got["channel_correlations"]], dtype=float)
    assert_allclose(b, a, rtol=0, atol=1e-9)


def test_channels_block_size_invariance_fixed_sizes():
    assert REF["identical_channels"] == [[0, 2]] and REF["inverted_channels"] == [[0, 1], [1, 2]]
    for size in (1, 7, 4_800, 48_000):
        assert_same(REF, run(X, "FLOAT", sizes=(size,)).to_dict())


@settings(max_examples=25, deadline=None)
@given(cuts=st.lists(st.integers(0, RATE), max_size=30))
def test_channels_block_split_invariance_hypothesis(cuts):
    meter = ChannelsMeter(info_for("FLOAT", 4), default_layout(4), MeasureOptions())
    bounds = [0, *sorted(cuts), X.shape[0]]
    for a, b in zip(bounds[:-1], bounds[1:], strict=True):  # zero-frame blocks included
        meter.feed(Block(X[a:b].copy(), None, a))
    assert_same(REF, meter.result().to_dict())
