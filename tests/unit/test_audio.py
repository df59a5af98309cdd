"""checker.io.audio: the read loop, stream facts and read errors."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from numpy.testing import assert_allclose
from signals import programme, write

from checker.io.audio import open_info, read_blocks
from checker.model.errors import AudioReadError, UnsupportedAudioError


@pytest.mark.parametrize("subtype", ["PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE"])
def test_blocks_reassemble_the_file(tmp_path, subtype):
    x = programme(1.3, 48_000, 2, seed=1, level_dbfs=-18)
    path = write(tmp_path / "a.wav", x, subtype=subtype)
    expected = sf.read(str(path), dtype="float64")[0]
    info, blocks = read_blocks(str(path), block_frames=7_001)
    # Blocks are views of a reused buffer: copy before keeping them.
    got = np.concatenate([b.x.copy() for b in blocks])
    # Integer PCM is read as int32 and scaled by 2**-31: identical to libsndfile's own float read.
    assert_allclose(got, expected, rtol=0, atol=0)
    assert info.subtype == subtype
    assert info.frames_declared == x.shape[0]


def test_integer_pcm_exposes_codes(tmp_path):
    x = np.array([[0.5], [-0.25], [1 / 32768]])
    path = write(tmp_path / "a.wav", x, subtype="PCM_16")
    _, blocks = read_blocks(str(path))
    raw = next(blocks).raw
    # PCM_16 codes are left-justified in int32: code << 16.
    assert raw[:, 0].tolist() == [16384 << 16, -8192 << 16, 1 << 16]


def test_low_rate_rejected(tmp_path):
    path = write(tmp_path / "low.wav", np.zeros((100, 1)), rate=4000, subtype="PCM_16")
    with pytest.raises(UnsupportedAudioError, match="sample_rate_hz = 4000"):
        open_info(str(path))


def test_not_audio(tmp_path):
    path = tmp_path / "notes.wav"
    path.write_text("this is not audio\n")
    with pytest.raises(AudioReadError, match="notes.wav: cannot open as audio"):
        read_blocks(str(path))


def test_directory_is_an_error(tmp_path):
    d = tmp_path / "x.wav"
    d.mkdir()
    with pytest.raises(AudioReadError, match="is a directory"):
        read_blocks(str(d))
