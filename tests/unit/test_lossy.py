"""checker.io.lossy: codec, bit rate, encoder delay and padding, gapless length.

Files written by libsndfile (soundfile 0.14 / libsndfile 1.2.2 with LAME 3.100, libvorbis,
libopus) are read back: their delay and padding must give the length libsndfile decodes,
which is the length written. Hand-built MP3 frames follow ISO/IEC 11172-3 2.4.1.3 (frame
header: sync, version, layer, protection, bit rate index, sampling frequency, padding,
mode) and the Xing/Info + LAME tag layout (from memory: "Info" at 4 + side info bytes,
flags, frames, bytes, TOC, quality, then the 9-byte encoder string, method byte, and the
12-bit delay / 12-bit padding at offset 21 of the extension).
"""

from __future__ import annotations

import struct

import numpy as np
import pytest
import soundfile as sf
from numpy.testing import assert_allclose
from test_rules import one_limit_profile

from checker.analysis.onepass import measure
from checker.io.lossy import LOSSY_KEYS, read_lossy
from checker.judge.rules import evaluate

NOISE = 0.3 * np.random.default_rng(3).standard_normal((50_000, 2))


def write_lossy(path, rate, channels, subtype, fmt, **kw):
    with sf.SoundFile(path, "w", rate, channels, subtype, format=fmt, **kw) as f:
        f.write(NOISE[:, :channels])
    return str(path)


# libsndfile maps compression level c to a constant bit rate of 320 - 288 c kbit/s for
# MPEG-1 (its mpeg_l3_encode.c): c = (320 - 128 - 0.5) / 288 asks for 128 kbit/s.
C128 = (320 - 128 - 0.5) / 288


@pytest.mark.parametrize(
    "rate, channels, mode, kw",
    [
        (44100, 2, "constant", {"compression_level": C128, "bitrate_mode": "CONSTANT"}),
        (48000, 2, "variable", {"compression_level": 0.3, "bitrate_mode": "VARIABLE"}),
        (22050, 1, "constant", {"compression_level": 0.5, "bitrate_mode": "CONSTANT"}),
    ],
    ids=["cbr-44k1", "vbr-48k", "mpeg2-mono"],
)
def test_mp3_delay_and_padding_give_the_decoded_length(tmp_path, rate, channels, mode, kw):
    path = write_lossy(tmp_path / "x.mp3", rate, channels, "MPEG_LAYER_III", "MP3", **kw)
    m = measure(path)
    assert m.codec == "mp3"
    assert m.bit_rate_mode == mode
    assert m.encoder == "LAME3.100"
    assert m.encoder_delay_frames == 576  # LAME's encoder delay (measured; 576 from memory)
    assert 0 <= m.encoder_padding_frames < 1152 + 576
    # gapless = frames x samples per frame - delay - padding = what was written
    assert m.gapless_frames == 50_000
    assert m.frames == 50_000  # libsndfile decodes the gapless programme
    assert m.gapless_mismatch_frames == 0
    assert_allclose(m.gapless_duration_s, 50_000 / rate, rtol=0, atol=1e-12)
    assert m.channel_mode == ("mono" if channels == 1 else "joint stereo")
    if mode == "constant" and rate == 44100:
        assert m.bit_rate_kbps == 128.0  # the bit rate asked for
    assert m.findings == ()


def test_ogg_vorbis_and_opus_gapless_lengths(tmp_path):
    vorbis = measure(write_lossy(tmp_path / "v.ogg", 44100, 2, "VORBIS", "OGG"))
    assert vorbis.codec == "vorbis"
    assert vorbis.gapless_frames == 50_000 == vorbis.frames  # last granule position
    assert vorbis.bit_rate_kbps is not None and vorbis.bit_rate_kbps > 0  # nominal
    opus = measure(write_lossy(tmp_path / "o.opus", 48000, 2, "OPUS", "OGG"))
    assert opus.codec == "opus"
    assert opus.encoder_delay_frames == 312  # libopus's pre-skip (measured)
    assert opus.gapless_frames == 50_000 == opus.frames  # granule - pre-skip (RFC 7845 4)
    assert opus.encoder.startswith("libopus")


def test_truncated_opus_is_a_finding(tmp_path):
    write_lossy(tmp_path / "o.opus", 48000, 2, "OPUS", "OGG")
    data = (tmp_path / "o.opus").read_bytes()
    cut = tmp_path / "cut.opus"
    cut.write_bytes(data[:-100])
    v = read_lossy(str(cut), "OPUS", "OGG", 48000, 2, None)
    assert any("truncated" in f for f in v["lossy_findings"]), v["lossy_findings"]


def test_pcm_and_flac_codec_and_bit_rate(tmp_path):
    wav = tmp_path / "x.wav"
    sf.write(wav, NOISE[:4800], 48000, subtype="PCM_24")
    v = read_lossy(str(wav), "PCM_24", "WAV", 48000, 2, 24)
    assert v["codec"] == "pcm"
    assert v["bit_rate_kbps"] == 2304.0  # 48000 x 2 x 24 bits
    v = read_lossy(str(wav), "PCM_16", "FLAC", 48000, 2, 16)
    assert v["codec"] == "flac" and v["bit_rate_kbps"] is None


def test_bit_rate_and_codec_limits_on_a_real_mp3(tmp_path):
    kw = {"compression_level": C128, "bitrate_mode": "CONSTANT"}
    m = measure(write_lossy(tmp_path / "x.mp3", 44100, 2, "MPEG_LAYER_III", "MP3", **kw))
    low = one_limit_profile(tmp_path, "bit_rate_min_kbps", 192.0)
    (flag,) = evaluate(m, low).flags
    assert "Bit rate is 128.00 kbit/s, below the limit of 192.00 kbit/s" in flag.message
    assert evaluate(m, one_limit_profile(tmp_path, "codecs", ["mp3"])).flags == ()


# ---------------------------------------------------------------- hand-built MP3 frames

# ISO/IEC 11172-3: 0xFFFB = sync, MPEG-1, layer III, no CRC; 0x90 = 128 kbit/s, 44.1 kHz,
# no padding; 0x44 = joint stereo. Frame length = 144 x 128000 / 44100 = 417 bytes.
HEADER = bytes([0xFF, 0xFB, 0x90, 0x44])
FRAME_BYTES = 417


def info_frame(frames: int, delay: int, padding: int, tag=b"Info", encoder=b"LAME3.100"):
    body = bytearray(FRAME_BYTES)
    body[:4] = HEADER
    x = 4 + 32  # MPEG-1 stereo side information is 32 bytes
    body[x : x + 4] = tag
    struct.pack_into(">II", body, x + 4, 0x1, frames)  # flags: frame count only
    ext = x + 12
    body[ext : ext + 9] = encoder
    body[ext + 9] = 0x01  # method 1 = constant bit rate
    body[ext + 21 : ext + 24] = bytes(
        [delay >> 4, ((delay & 0x0F) << 4) | (padding >> 8), padding & 0xFF]
    )
    return bytes(body)


def plain_frame():
    return HEADER + bytes(FRAME_BYTES - 4)


def id3v2(size_bytes: bytes, body_len: int) -> bytes:
    """ID3v2.4 header: 'ID3', version 4.0, flags 0, 4-byte syncsafe size."""
    return b"ID3\x04\x00\x00" + size_bytes + bytes(body_len)


def lossy_of(tmp_path, data: bytes):
    p = tmp_path / "h.mp3"
    p.write_bytes(data)
    return read_lossy(str(p), "MPEG_LAYER_III", "MP3", 44100, 2, None)


def test_hand_built_info_tag(tmp_path):
    data = id3v2(bytes([0, 0, 0, 20]), 20) + info_frame(10, 576, 1000) + plain_frame() * 10
    v = lossy_of(tmp_path, data)
    assert v["encoder_delay_frames"] == 576 and v["encoder_padding_frames"] == 1000
    assert v["gapless_frames"] == 10 * 1152 - 576 - 1000
    assert v["bit_rate_kbps"] == 128.0 and v["bit_rate_mode"] == "constant"
    assert v["channel_mode"] == "joint stereo"
    assert v["lossy_findings"] == []
    assert set(v) == set(LOSSY_KEYS)


@pytest.mark.parametrize(
    "data, finding",
    [
        (plain_frame() * 4, "no encoder information tag"),
        (b"junk" * 10 + info_frame(3, 576, 100) + plain_frame() * 3, "40 bytes before the first"),
        (id3v2(bytes([0, 0, 0x80, 0]), 4) + plain_frame() * 2, "not syncsafe"),
        (id3v2(bytes([0, 0, 0x7F, 0]), 4), "more than the file holds"),
        (info_frame(1, 4000, 4000) + plain_frame(), "exceed the 1 frames' samples"),
        (bytes(5000), "no MPEG audio frame header"),
        (info_frame(3, 0, 0, encoder=b"\0" * 9) + plain_frame() * 3, "no encoder extension"),
    ],
    ids=[
        "no-tag",
        "junk",
        "id3-not-syncsafe",
        "id3-too-big",
        "delay-too-big",
        "no-frame",
        "no-extension",
    ],  # fmt: skip
)
def test_malformed_mp3_is_a_finding(tmp_path, data, finding):
    v = lossy_of(tmp_path, data)
    assert any(finding in f for f in v["lossy_findings"]), v["lossy_findings"]
