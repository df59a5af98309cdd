"""checker.meters.roundtrip: the encode round trip a profile asks for.

The reference is the same library used directly: the test encodes the same signal with
soundfile 0.14 / libsndfile 1.2.2 (LAME 3.100, libvorbis, libopus) at the same setting,
decodes it with soundfile.read, and computes the true peak by FFT interpolation
(scipy.signal.resample, x8: exact for band-limited periodic signals; the file edges cost a
little, hence the 0.15 dB tolerance) and the integrated loudness with pyloudnorm (DeMan
filter, the BS.1770 design).
"""

from __future__ import annotations

import math
import tempfile

import numpy as np
import pyloudnorm
import pytest
import soundfile as sf
from numpy.testing import assert_allclose
from scipy import signal
from test_rules import write_profile

from checker.analysis.onepass import measure
from checker.judge.rules import evaluate
from checker.meters.base import MeasureOptions
from checker.meters.roundtrip import CODECS, ROUNDTRIP_KEYS, compression_level
from checker.model.errors import ProfileError
from checker.profile.load import load_profile
from checker.run.batch import measure_options, options_key


def master(rate: int, seconds: float = 3.0, seed: int = 5) -> np.ndarray:
    """A dense, brick-wall limited stereo master (clipped noise and bass, low-passed)."""
    n = int(rate * seconds)
    t = np.arange(n) / rate
    rng = np.random.default_rng(seed)
    x = 0.5 * rng.standard_normal(n) + 0.8 * np.sin(2 * np.pi * 55 * t)
    x = np.clip(1.5 * (x + 0.5 * np.sin(2 * np.pi * 220 * t)), -1, 1)
    x = signal.sosfilt(signal.butter(8, 16000, fs=rate, output="sos"), x)
    x = np.c_[x, 0.9 * x + 0.1 * np.roll(x, 7)]
    return x * (10 ** (-1.5 / 20) / np.abs(x).max())


def reference_true_peak_dbtp(x: np.ndarray) -> float:
    up = signal.resample(x, 8 * x.shape[0], axis=0)
    return 20 * math.log10(np.abs(up).max())


def same_library_encode(tmp_path, x, rate, codec, kbps):
    fmt, subtype, suffix, _ = CODECS[codec]
    path = tmp_path / f"ref{suffix}"
    level = compression_level(codec, kbps, rate, x.shape[1])
    mode = "CONSTANT" if codec == "mp3" else None
    with sf.SoundFile(path, "w", rate, x.shape[1], subtype, format=fmt,
                      compression_level=level, bitrate_mode=mode) as f:  # fmt: skip
        f.write(x)
    return sf.read(path)[0]


@pytest.mark.parametrize(
    "codec, rate", [("mp3", 44100), ("vorbis", 44100), ("opus", 48000)], ids=str
)
def test_encoded_values_match_the_same_library_used_directly(tmp_path, codec, rate):
    x = master(rate)
    src = tmp_path / "m.wav"
    sf.write(src, x, rate, subtype="FLOAT")
    m = measure(str(src), MeasureOptions(encode=(codec, 128.0)))
    decoded = same_library_encode(tmp_path, x, rate, codec, 128.0)
    assert m.encoded_codec == codec and m.encoded_note is None
    assert_allclose(m.encoded_true_peak_dbtp, reference_true_peak_dbtp(decoded), rtol=0, atol=0.15)
    ref_lufs = pyloudnorm.Meter(rate, filter_class="DeMan").integrated_loudness(decoded)
    assert_allclose(m.encoded_integrated_lufs, ref_lufs, rtol=0, atol=0.05)
    # the shifts are encoded minus source
    assert_allclose(
        m.encoded_true_peak_shift_db, m.encoded_true_peak_dbtp - m.true_peak_dbtp, atol=1e-3
    )
    assert_allclose(
        m.encoded_loudness_shift_lu, m.encoded_integrated_lufs - m.integrated_lufs, atol=1e-3
    )


def test_round_trip_does_not_depend_on_block_size(tmp_path):
    src = tmp_path / "m.wav"
    sf.write(src, master(44100, 2.0), 44100, subtype="FLOAT")
    a = measure(str(src), MeasureOptions(block_frames=4096, encode=("vorbis", 128.0)))
    b = measure(str(src), MeasureOptions(block_frames=None, encode=("vorbis", 128.0)))
    # libvorbis's output depends very slightly on how the input is handed to it (measured:
    # 2.4e-5 LU between 4096-frame and automatic blocks); the project's meters do not
    assert_allclose(a.encoded_true_peak_dbtp, b.encoded_true_peak_dbtp, rtol=0, atol=1e-3)
    assert_allclose(a.encoded_integrated_lufs, b.encoded_integrated_lufs, rtol=0, atol=1e-3)


ENCODE_PROFILE = """
[peaks]
true_peak_max_dbtp = {{ value = -1.0, severity = "fail", source = "test value" }}

[encode]
codec = "{codec}"
bit_rate_kbps = 128
encoded_true_peak_max_dbtp = {{ value = -1.0, severity = "fail", source = "test value" }}
"""


def test_post_codec_overshoot_is_flagged_with_gain_advice(tmp_path):
    src = tmp_path / "m.wav"
    rate = 44100
    x = master(rate)
    x *= 10 ** ((-1.2 - reference_true_peak_dbtp(x)) / 20)  # the master meets -1 dBTP
    sf.write(src, x, rate, subtype="FLOAT")
    profile = load_profile(str(write_profile(tmp_path, ENCODE_PROFILE.format(codec="vorbis"))))
    m = measure(str(src), measure_options(profile))
    assert m.true_peak_dbtp <= -1.0  # the master passes
    # libvorbis at 128 kbit/s overshoots this master (measured: -0.66 dBTP)
    assert m.encoded_true_peak_dbtp > -1.0
    (flag,) = evaluate(m, profile).flags
    assert flag.rule == "encoded_true_peak_max_dbtp"
    excess = math.ceil((m.encoded_true_peak_dbtp + 1.0) * 10) / 10  # round up to 0.1 dB
    assert f"lower the master by {excess:.1f} dB" in flag.message
    assert "to keep -1.0 dBTP after 128 kbit/s Ogg Vorbis" in flag.message
    assert "one encoder's behaviour, an estimate for others" in flag.message


def test_unsupported_encode_is_a_note_and_an_unmeasured_flag(tmp_path):
    src = tmp_path / "m.wav"
    sf.write(src, master(44100, 1.0), 44100, subtype="FLOAT")
    profile = load_profile(str(write_profile(tmp_path, ENCODE_PROFILE.format(codec="opus"))))
    m = measure(str(src), measure_options(profile))
    assert m.encoded_true_peak_dbtp is None
    assert "Opus encoding needs" in m.encoded_note
    (flag,) = evaluate(m, profile).flags
    assert "could not be measured (Opus encoding needs" in flag.message


def test_no_round_trip_unless_asked_and_the_cache_key(tmp_path):
    src = tmp_path / "m.wav"
    sf.write(src, master(44100, 1.0), 44100, subtype="FLOAT")
    m = measure(str(src))
    assert not any(k in m.values for k in ROUNDTRIP_KEYS)
    plain = load_profile("ebu-r128")
    assert measure_options(plain).encode is None
    assert "encode" not in options_key(measure_options(plain))  # earlier keys unchanged
    asks = load_profile(str(write_profile(tmp_path, ENCODE_PROFILE.format(codec="mp3"))))
    assert measure_options(asks).encode == ("mp3", 128.0)
    assert options_key(measure_options(asks)) != options_key(measure_options(plain))


def test_temporary_files_are_removed(tmp_path, monkeypatch):
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    src = tmp_path / "m.wav"
    sf.write(src, master(44100, 1.0), 44100, subtype="FLOAT")
    measure(str(src), MeasureOptions(encode=("mp3", 128.0)))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["m.wav"]


@pytest.mark.parametrize(
    "body, expected",
    [
        ('[encode]\ncodec = "mp3"\n', "expected both or neither"),
        ('[encode]\ncodec = "aac"\nbit_rate_kbps = 128\n', '"mp3" or "vorbis" or "opus"'),
        ('[encode]\ncodec = "mp3"\nbit_rate_kbps = 100\n', "128"),
        (
            '[encode]\nencoded_true_peak_max_dbtp = { value = -1.0, severity = "fail", '
            'source = "x" }\n',
            "without a round trip",
        ),
    ],
    ids=["no-rate", "codec", "rate", "limit-alone"],
)
def test_encode_section_is_validated(tmp_path, body, expected):
    with pytest.raises(ProfileError) as info:
        load_profile(str(write_profile(tmp_path, body)))
    assert expected in str(info.value)


def test_readme_encode_example_validates(tmp_path):
    """The README's round-trip profile example loads and asks for 128 kbit/s MP3."""
    import re
    from pathlib import Path

    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text()
    block = next(b for b in re.findall(r"```toml\n(.*?)```", readme, re.S) if "[encode]" in b)
    path = tmp_path / "podcast-mp3-check.toml"
    path.write_text(block)
    assert load_profile(str(path)).encode == ("mp3", 128.0)
