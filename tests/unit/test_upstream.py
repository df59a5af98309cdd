"""checker.upstream: the private fast paths and their public fallbacks give the same numbers.

The public paths are soundfile's documented ``SoundFile.read(out=...)`` and scipy's documented
``scipy.signal.sosfilt``; forcing them (``DELIVERYCHECK_PUBLIC_UPSTREAM=1``) must change
nothing a user sees: every measured value is identical.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import numpy as np
import pytest
import soundfile as sf
from numpy.testing import assert_array_equal

from checker import upstream


def _noise_file(path, subtype: str, frames: int = 30_000, channels: int = 2):
    x = 0.4 * np.random.default_rng(5).standard_normal((frames, channels))
    sf.write(str(path), np.clip(x, -1, 1), 48_000, subtype=subtype)
    return path


@pytest.mark.parametrize("subtype,dtype", [("PCM_24", np.int32), ("FLOAT", np.float64)])
def test_private_and_public_readers_fill_the_same_frames(tmp_path, monkeypatch, subtype, dtype):
    path = _noise_file(tmp_path / "n.wav", subtype, frames=10_007)
    got = {}
    for public in ("0", "1"):
        monkeypatch.setenv(upstream.PUBLIC_ONLY_ENV, public)
        with sf.SoundFile(str(path)) as handle:
            buf = np.empty((4_096, 2), dtype=dtype)
            read, kind = upstream.frame_reader(handle, buf)
            chunks = []
            while (n := read()) > 0:
                chunks.append(buf[:n].copy())
        got[kind] = np.concatenate(chunks)
    assert set(got) == {"private", "public"}  # both paths really ran
    assert len(got["public"]) == 10_007
    assert_array_equal(got["private"], got["public"])


def test_public_reader_reports_a_decoding_error_as_upstream_error():
    # soundfile's public read raises its LibsndfileError (a RuntimeError) on a libsndfile error;
    # the adapter turns it into UpstreamReadError with libsndfile's words.
    class Failing:
        def read(self, *args, **kwargs):
            raise RuntimeError("Error : unexpected end of stream")

    read = upstream._public_reader(Failing(), np.empty((8, 1)))
    with pytest.raises(upstream.UpstreamReadError, match="unexpected end"):
        read()


def test_sos_kernel_paths_agree_bit_for_bit(monkeypatch):
    from checker.dsp.kweighting import k_weighting_sos

    sos = k_weighting_sos(48_000)
    x = 0.3 * np.random.default_rng(1).standard_normal((2, 5_000))
    out = {}
    for public in ("0", "1"):
        monkeypatch.setenv(upstream.PUBLIC_ONLY_ENV, public)
        kernel, kind = upstream.sos_kernel()
        y, zi = x.copy(), np.zeros((2, sos.shape[0], 2))
        kernel(sos, y, zi)
        out[kind] = (y, zi)
    assert set(out) == {"private", "public"}
    assert_array_equal(out["private"][0], out["public"][0])
    assert_array_equal(out["private"][1], out["public"][1])


def test_a_whole_measurement_is_identical_on_the_public_paths(tmp_path):
    # End to end in fresh processes (the kernel choice is made once per process).
    path = _noise_file(tmp_path / "m.wav", "PCM_24", frames=96_000)
    code = (
        "import json, sys; from checker import measure; "
        f"m = measure({str(path)!r}); print(json.dumps(m.to_dict(), sort_keys=True))"
    )
    runs = {}
    for public in ("0", "1"):
        env = {**os.environ, upstream.PUBLIC_ONLY_ENV: public}
        done = subprocess.run(
            [sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120
        )
        assert done.returncode == 0, done.stderr
        runs[public] = json.loads(done.stdout)
    assert runs["0"]["integrated_lufs"] is not None
    assert runs["0"] == runs["1"]
