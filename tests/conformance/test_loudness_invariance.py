"""Block-partition invariance of the loudness meter (house rule for every streaming meter).

Expected values here come from the meter itself fed the whole file in one block: the
property under test is that any split of the same samples gives the same results
(design notes: ~1e-9 for sums of power). Not a conformance check; see
test_loudness_conformance.py and test_loudness_crosscheck.py for those.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from signals import programme

from checker.io.audio import Block, StreamInfo
from checker.io.layout import default_layout
from checker.meters.base import MeasureOptions
from checker.meters.loudness import LoudnessMeter

TOL_LU = 1e-9  # design notes: results independent of the split to ~1e-9 for power sums

# Longer than 3 s so that short-term windows, their maximum and LRA all exist.
SIGNALS = {
    48_000: programme(4.5, 48_000, 2, seed=31, level_dbfs=-20.0),
    # 11.025 kHz: 1 ms and 100 ms steps are not whole numbers of frames.
    11_025: programme(4.5, 11_025, 2, seed=32, level_dbfs=-20.0),
    # 8 kHz, 3.25 s, 5.1: the one-frame-block run (one feed() per frame is slow).
    8_000: programme(3.25, 8_000, 6, seed=33, level_dbfs=-20.0),
}


def run(x: np.ndarray, rate: int, sizes) -> LoudnessMeter:
    """Feed ``x`` in blocks whose sizes cycle through ``sizes``, via one reused buffer."""
    frames, channels = x.shape
    info = StreamInfo("mem", "WAV", "DOUBLE", rate, channels, frames)
    meter = LoudnessMeter(info, default_layout(channels), MeasureOptions())
    buf = np.empty((max(sizes) if sizes else 1, channels))
    start, i = 0, 0
    while start < frames:
        n = min(sizes[i % len(sizes)], frames - start) if sizes else frames
        buf[:n] = x[start : start + n]
        meter.feed(Block(buf[:n], None, start))
        buf[:n] = np.nan  # blocks are views of a reused buffer: the meter must not keep them
        if i % 97 == 0:
            meter.feed(Block(buf[:0], None, start + n))  # empty blocks are allowed
        start += n
        i += 1
    return meter


def whole(rate: int) -> LoudnessMeter:
    x = SIGNALS[rate]
    return run(x, rate, [x.shape[0]])


REFERENCE = {rate: whole(rate) for rate in SIGNALS}


def assert_same(meter: LoudnessMeter, reference: LoudnessMeter) -> None:
    got, want = meter.result().to_dict(), reference.result().to_dict()
    assert got.keys() == want.keys()
    for key, value in want.items():
        if isinstance(value, float) and math.isfinite(value):
            assert_allclose(got[key], value, rtol=0, atol=TOL_LU, err_msg=key)
        else:
            assert got[key] == value, key
    for name, (hop, values) in reference.series().items():
        got_hop, got_values = meter.series()[name]
        assert got_hop == hop
        assert got_values.shape == values.shape
        finite = np.isfinite(values)
        assert np.array_equal(finite, np.isfinite(got_values)), name
        assert_allclose(got_values[finite], values[finite], rtol=0, atol=TOL_LU, err_msg=name)


def test_reference_is_defined():
    # Guard: the comparison below is only meaningful if the whole-file run defines every value.
    for meter in REFERENCE.values():
        r = meter.result()
        assert r.integrated_lufs is not None and r.loudness_range_lu is not None
        assert r.max_momentary_lufs is not None and r.max_short_term_lufs is not None


@pytest.mark.parametrize(
    ("rate", "size"),
    [
        (8_000, 1),
        (8_000, 4800),
        (11_025, 7),
        (11_025, 4800),
        (11_025, 48_000),
        (48_000, 4800),
        (48_000, 48_000),
        (48_000, 65_536),
    ],
)
def test_fixed_block_sizes(rate, size):
    assert_same(run(SIGNALS[rate], rate, [size]), REFERENCE[rate])


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    rate=st.sampled_from(sorted(SIGNALS)),
    sizes=st.lists(st.integers(min_value=1, max_value=30_000), min_size=1, max_size=12).filter(
        lambda s: sum(s) >= 200  # keep the number of feed() calls bounded
    ),
)
def test_hypothesis_splits(rate, sizes):
    assert_same(run(SIGNALS[rate], rate, sizes), REFERENCE[rate])
