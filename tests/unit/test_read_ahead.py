"""Read-ahead decoding (audio.read_blocks(read_ahead=True)) and measure(read_ahead=True), used
by `deliverycheck measure`: the same blocks in the same order, the same measurement,
errors where they were.

The reference is the plain single-threaded reader of the same file.
"""

from __future__ import annotations

import gc
import threading

import numpy as np
import pytest
from corpus import mp3_garbage_middle
from numpy.testing import assert_array_equal
from signals import programme, write

from checker.analysis.onepass import measure
from checker.io.audio import read_blocks
from checker.meters.base import MeasureOptions
from checker.model.errors import AudioReadError


def _blocks(path, read_ahead: bool, block_frames: int):
    _, blocks = read_blocks(str(path), block_frames, read_ahead=read_ahead)
    # Copies: the reader reuses its buffers (read-ahead alternates two sets).
    return [(b.start, b.x.copy(), None if b.raw is None else b.raw.copy()) for b in blocks]


@pytest.mark.parametrize("subtype", ["PCM_16", "PCM_24", "FLOAT"])
def test_same_blocks_in_the_same_order(tmp_path, subtype):
    path = write(tmp_path / "p.wav", programme(2.3, seed=3), subtype=subtype)
    plain = _blocks(path, False, 4_000)
    ahead = _blocks(path, True, 4_000)
    assert len(plain) == len(ahead) == 28  # 2.3 s = 110400 frames: 27 full blocks + 2_400
    for (s1, x1, r1), (s2, x2, r2) in zip(plain, ahead, strict=True):
        assert s1 == s2
        assert_array_equal(x1, x2)
        if r1 is None:
            assert r2 is None
        else:
            assert_array_equal(r1, r2)


def test_a_held_block_is_not_overwritten_before_the_next_is_asked_for(tmp_path):
    path = write(tmp_path / "p.wav", programme(1.0, seed=4), subtype="PCM_24")
    want = [x for _, x, _ in _blocks(path, False, 1_000)]
    _, blocks = read_blocks(str(path), 1_000, read_ahead=True)
    for k, block in enumerate(blocks):
        for _ in range(3):  # give the decoding thread time to run ahead if it would
            threading.Event().wait(0.002)
        assert_array_equal(block.x, want[k])


def test_same_measurement(tmp_path):
    path = write(tmp_path / "p.wav", programme(4.0, seed=5), subtype="PCM_24")
    options = MeasureOptions(block_frames=7_000)
    assert measure(str(path), options, read_ahead=True) == measure(str(path), options)


def test_decoding_error_is_raised_where_the_plain_reader_raises_it(tmp_path):
    path = mp3_garbage_middle(tmp_path)
    messages = []
    for read_ahead in (False, True):
        with pytest.raises(AudioReadError, match="decoding failed at") as info:
            measure(str(path), MeasureOptions(block_frames=1024), read_ahead=read_ahead)
        messages.append(str(info.value))
    assert messages[0] == messages[1]


def test_abandoned_iteration_stops_the_thread(tmp_path):
    path = write(tmp_path / "p.wav", programme(2.0, seed=6), subtype="PCM_24")
    before = threading.active_count()
    _, blocks = read_blocks(str(path), 1_000, read_ahead=True)
    next(blocks)
    next(blocks)
    blocks.close()  # the caller stops early (e.g. a meter raised)
    del blocks
    gc.collect()
    assert threading.active_count() == before
    assert not any(t.name == "deliverycheck-read-ahead" for t in threading.enumerate())


def test_same_measurement_with_nan_in_a_float_file(tmp_path):
    # NaN/Inf: the levels meter counts them on the untouched block, every other meter
    # gets them as 0, read ahead or not; both paths must agree, findings included.
    x = programme(3.0, seed=8)
    x[50_000:50_012, 0] = np.nan
    x[90_000:90_003, 1] = np.inf
    path = write(tmp_path / "nan.wav", x, subtype="FLOAT")
    options = MeasureOptions(block_frames=10_000)
    plain = measure(str(path), options)
    assert plain.values["nonfinite_samples"] == 15
    assert measure(str(path), options, read_ahead=True) == plain


@pytest.mark.parametrize("seconds", [0.01, 1.0])
def test_a_file_of_one_block_is_read_without_a_thread(tmp_path, monkeypatch, seconds):
    # A file that declares at most one block has nothing to read ahead: no thread starts
    # (it would only cost its start per short file), and the blocks are the plain reader's.
    path = write(tmp_path / "p.wav", programme(seconds, seed=7), subtype="PCM_24")
    plain = _blocks(path, False, 48_000)
    started = []
    original = threading.Thread.start

    def spy(self):
        started.append(self.name)
        original(self)

    monkeypatch.setattr(threading.Thread, "start", spy)
    ahead = _blocks(path, True, 48_000)
    longer = _blocks(path, True, 100)  # several blocks: read ahead as before
    assert started == ["deliverycheck-read-ahead"]  # the several-block read only
    assert len(ahead) == len(plain) == 1
    assert ahead[0][0] == plain[0][0]
    assert_array_equal(ahead[0][1], plain[0][1])
    assert len(longer) == -(-round(48_000 * seconds) // 100)
