"""Generators of a corpus of broken, hostile and odd audio inputs (made by tests, nothing stored).

Every maker takes a directory, writes one small item into it and returns its
path. ``CORPUS`` maps an item name to its maker; ``NAMED_FILES`` lists hostile
file names that hold a perfectly good WAV. WAV headers are crafted with
``struct`` (RIFF/WAVE layout: "RIFF" size "WAVE", then chunks of 4-byte id,
little-endian uint32 size, body; ``fmt `` body = format tag, channels, sample
rate, byte rate, block align, bits per sample: Microsoft RIFF/WAVE spec).

Common facts for the crafted files: 48 kHz, 16-bit PCM unless a name says
otherwise; the sine is 1 kHz at -20 dBFS so any measured level is ordinary.
"""

from __future__ import annotations

import os
import struct
import zlib
from collections.abc import Callable
from pathlib import Path

import numpy as np
import soundfile as sf

RATE_HZ = 48_000
FORMAT_PCM = 0x0001
FORMAT_FLOAT = 0x0003
FORMAT_MPEG_LAYER3 = 0x0055  # WAVE_FORMAT_MPEGLAYER3 (mmreg.h)
FORMAT_UNKNOWN = 0x7A7A  # not a registered WAVE format tag

#: NaN/Inf placement in the float item (frames at 48 kHz): 12 NaN from 1.200 s, 3 Inf from 1.500 s.
NAN_FIRST_FRAME = 57_600
NAN_COUNT = 12
INF_FIRST_FRAME = 72_000
INF_COUNT = 3


def sine_pcm16(duration_s: float, channels: int = 1, rate: int = RATE_HZ) -> bytes:
    """Interleaved little-endian int16 samples of a 1 kHz sine at -20 dBFS."""
    n = int(round(duration_s * rate))
    t = np.arange(n) / rate
    x = 0.1 * np.sin(2 * np.pi * 1000.0 * t)
    codes = np.round(x * 32767).astype("<i2")
    return np.repeat(codes[:, None], channels, axis=1).tobytes()


def wav_bytes(
    data: bytes,
    *,
    channels: int = 1,
    rate: int = RATE_HZ,
    bits: int = 16,
    format_tag: int = FORMAT_PCM,
    data_size: int | None = None,
    riff_size: int | None = None,
    extra_fmt: bytes = b"",
) -> bytes:
    """A RIFF/WAVE file: ``fmt `` then ``data``; sizes default to the truth."""
    align = channels * bits // 8
    fmt = struct.pack("<HHIIHH", format_tag, channels, rate, rate * align, align, bits) + extra_fmt
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt
    body += b"data" + struct.pack("<I", len(data) if data_size is None else data_size) + data
    if len(data) % 2:
        body += b"\0"
    return b"RIFF" + struct.pack("<I", len(body) if riff_size is None else riff_size) + body


def good_wav(path: Path, duration_s: float = 1.0) -> Path:
    path.write_bytes(wav_bytes(sine_pcm16(duration_s)))
    return path


# --- The items ---------------------------------------------------------------------------


def zero_byte(d: Path) -> Path:
    p = d / "zero-byte.wav"
    p.write_bytes(b"")
    return p


def header_only(d: Path) -> Path:
    """A 44-byte header that promises 1 s of audio; the file ends there."""
    p = d / "header-only.wav"
    p.write_bytes(wav_bytes(b"", data_size=2 * RATE_HZ, riff_size=36 + 2 * RATE_HZ))
    return p


def data_claims_more(d: Path) -> Path:
    """Header declares 3.000 s (144000 frames); 2.400 s (115200 frames) present: truncated."""
    p = d / "truncated.wav"
    full = wav_bytes(sine_pcm16(3.0))
    p.write_bytes(full[: 44 + 2 * 115_200])
    return p


def data_claims_less(d: Path) -> Path:
    """Data chunk claims 1.000 s (48000 frames); 2.000 s of samples follow it."""
    p = d / "data-claims-less.wav"
    samples = sine_pcm16(2.0)
    p.write_bytes(wav_bytes(samples, data_size=2 * RATE_HZ, riff_size=36 + len(samples)))
    return p


def riff_size_zero(d: Path) -> Path:
    """RIFF size 0 and data size 0, 2.000 s of samples follow: a recorder that never closed it."""
    p = d / "never-closed.wav"
    p.write_bytes(wav_bytes(sine_pcm16(2.0), data_size=0, riff_size=0))
    return p


def riff_size_zero_data_ok(d: Path) -> Path:
    """RIFF size 0 only (data size right): 1.000 s."""
    p = d / "riff-size-zero.wav"
    p.write_bytes(wav_bytes(sine_pcm16(1.0), riff_size=0))
    return p


def text_as_wav(d: Path) -> Path:
    p = d / "notes.wav"
    p.write_text("Session notes: take 3 is the keeper.\n" * 20)
    return p


def png_bytes() -> bytes:
    """A valid 1 x 1 grey PNG (PNG spec: signature, IHDR, IDAT, IEND; CRC-32 over type+data)."""

    def chunk(kind: bytes, data: bytes) -> bytes:
        crc = zlib.crc32(kind + data) & 0xFFFFFFFF
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", crc)

    ihdr = struct.pack(">IIBBBBB", 1, 1, 8, 0, 0, 0, 0)  # 1x1, 8-bit greyscale
    idat = zlib.compress(b"\x00\x80")  # filter byte 0, one grey pixel
    return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", idat) + chunk(b"IEND", b"")


def image_as_wav(d: Path) -> Path:
    p = d / "cover.wav"
    p.write_bytes(png_bytes())
    return p


def channels_0(d: Path) -> Path:
    p = d / "channels-0.wav"
    p.write_bytes(wav_bytes(b"\0" * 400, channels=0))
    return p


def channels_1000(d: Path) -> Path:
    """1000 channels x 48 frames of silence (96 kB)."""
    p = d / "channels-1000.wav"
    p.write_bytes(wav_bytes(b"\0" * (2 * 1000 * 48), channels=1000))
    return p


def rate_1_hz(d: Path) -> Path:
    p = d / "rate-1hz.wav"
    p.write_bytes(wav_bytes(sine_pcm16(0.01), rate=1))
    return p


def rate_10_mhz(d: Path) -> Path:
    p = d / "rate-10mhz.wav"
    p.write_bytes(wav_bytes(sine_pcm16(0.01), rate=10_000_000))
    return p


def float_nan_inf(d: Path) -> Path:
    """32-bit float WAV, 2.000 s mono sine at -20 dBFS with 12 NaN from 1.200 s and 3 +Inf
    from 1.500 s (both positions stated at 48 kHz)."""
    p = d / "nan-inf.wav"
    n = 2 * RATE_HZ
    x = 0.1 * np.sin(2 * np.pi * 1000.0 * np.arange(n) / RATE_HZ)
    x = x.astype("<f4")
    x[NAN_FIRST_FRAME : NAN_FIRST_FRAME + NAN_COUNT] = np.nan
    x[INF_FIRST_FRAME : INF_FIRST_FRAME + INF_COUNT] = np.inf
    p.write_bytes(wav_bytes(x.tobytes(), bits=32, format_tag=FORMAT_FLOAT))
    return p


def zero_frames(d: Path) -> Path:
    p = d / "zero-frames.wav"
    p.write_bytes(wav_bytes(b""))
    return p


def zero_frames_then_chunk(d: Path) -> Path:
    """0 frames, then a LIST chunk: a legitimately empty file, not an unfinished header."""
    p = d / "zero-frames-list.wav"
    lst = b"LIST" + struct.pack("<I", 12) + b"INFOISFT" + b"\0" * 4
    raw = bytearray(wav_bytes(b"") + lst)
    struct.pack_into("<I", raw, 4, len(raw) - 8)
    p.write_bytes(bytes(raw))
    return p


def codec_mp3_in_wav(d: Path) -> Path:
    """Format tag 0x0055 (MPEG layer 3 in WAV, which libsndfile decodes) with a complete
    MPEGLAYER3WAVEFORMAT extension (cbSize 12: wID 1, flags 0, block size 384, 1 frame per
    block, codec delay 1393; mmreg.h layout) but 10 kB of bytes that are not MPEG frames."""
    p = d / "codec-0055-garbage.wav"
    ext = struct.pack("<HHIHHH", 12, 1, 0, 384, 1, 1393)
    raw = bytearray(wav_bytes(bytes(range(256)) * 40, format_tag=FORMAT_MPEG_LAYER3, extra_fmt=ext))
    struct.pack_into("<IHH", raw, 28, 16_000, 1, 0)  # byte rate 128 kbit/s, block align 1, bits 0
    p.write_bytes(bytes(raw))
    return p


def codec_unknown(d: Path) -> Path:
    p = d / "codec-unknown.wav"
    p.write_bytes(wav_bytes(sine_pcm16(0.5), format_tag=FORMAT_UNKNOWN))
    return p


def flac_no_length(d: Path) -> Path:
    """A 1.000 s FLAC whose STREAMINFO total-samples field is zeroed ("unknown").

    FLAC format: "fLaC", a 4-byte metadata block header, then STREAMINFO: 10 bytes of
    block/frame sizes, then 20 bits rate, 3 bits channels-1, 5 bits bps-1 and 36 bits
    total samples: the low nibble of STREAMINFO byte 13 and bytes 14-17 (file bytes 21-25).
    """
    p = d / "no-length.flac"
    x = 0.1 * np.sin(2 * np.pi * 1000.0 * np.arange(RATE_HZ) / RATE_HZ)
    sf.write(str(p), x, RATE_HZ, subtype="PCM_16", format="FLAC")
    raw = bytearray(p.read_bytes())
    assert raw[:4] == b"fLaC" and raw[4] & 0x7F == 0  # first block is STREAMINFO
    raw[21] &= 0xF0
    raw[22:26] = b"\0\0\0\0"
    p.write_bytes(bytes(raw))
    return p


def mp3_available() -> bool:
    return "MP3" in sf.available_formats()


def mp3_garbage_middle(d: Path) -> Path:
    """A 3.000 s MP3 (libsndfile >= 1.1 writes MPEG layer III) with its middle third
    overwritten by seeded random bytes."""
    p = d / "garbage-middle.mp3"
    x = 0.1 * np.sin(2 * np.pi * 1000.0 * np.arange(3 * RATE_HZ) / RATE_HZ)
    sf.write(str(p), x, RATE_HZ, format="MP3", subtype="MPEG_LAYER_III")
    raw = bytearray(p.read_bytes())
    lo, hi = len(raw) // 3, 2 * len(raw) // 3
    raw[lo:hi] = np.random.default_rng(12).integers(0, 256, hi - lo, dtype=np.uint8).tobytes()
    p.write_bytes(bytes(raw))
    return p


def unreadable(d: Path) -> Path:
    """A good WAV with mode 000 (root reads it anyway; see the test)."""
    p = good_wav(d / "unreadable.wav")
    os.chmod(p, 0)
    return p


def dangling_symlink(d: Path) -> Path:
    p = d / "dangling.wav"
    os.symlink(d / "gone-away.wav", p)
    return p


def directory_named_wav(d: Path) -> Path:
    p = d / "x.wav"
    p.mkdir()
    return p


# --- Containers other than WAV (length lies and cut files) ---------------------------------
# Each holds the -20 dBFS 1 kHz sine; "cut" items keep 2/3 of a 3.000 s file's audio bytes.

CUT_FRAMES = 96_000  # 2.000 s at 48 kHz of the 3.000 s (144000-frame) sine


def extended_80(value: int) -> bytes:
    """An integer as the 80-bit IEEE 754 extended float of AIFF's COMM sample rate
    (sign + 15-bit exponent biased by 16383, 64-bit mantissa with an explicit integer bit)."""
    exponent = value.bit_length() - 1
    return struct.pack(">HQ", 16383 + exponent, value << (63 - exponent))


def aiff_bytes(pcm_be: bytes, frames: int, channels: int = 1, rate: int = RATE_HZ) -> bytes:
    """AIFF: "FORM" size "AIFF", COMM (channels, frames, 16 bits, rate), SSND (offset 0,
    block size 0, samples); big-endian; sizes true for ``pcm_be`` (Apple AIFF 1.3)."""
    comm = struct.pack(">hIh", channels, frames, 16) + extended_80(rate)
    ssnd = struct.pack(">II", 0, 0) + pcm_be
    body = b"AIFF" + b"COMM" + struct.pack(">I", len(comm)) + comm
    body += b"SSND" + struct.pack(">I", len(ssnd)) + ssnd
    return b"FORM" + struct.pack(">I", len(body)) + body


def sine_pcm16_be(duration_s: float) -> bytes:
    return np.frombuffer(sine_pcm16(duration_s), "<i2").astype(">i2").tobytes()


def aiff_cut(d: Path) -> Path:
    """AIFF whose COMM and SSND declare 3.000 s; the file ends after 2.000 s of samples."""
    p = d / "cut.aiff"
    p.write_bytes(aiff_bytes(sine_pcm16_be(3.0), 3 * RATE_HZ)[: 54 + 2 * CUT_FRAMES])
    return p


def au_bytes(pcm_be: bytes, data_size: int | None = None) -> bytes:
    """Sun AU: ".snd", data offset 24, data size, encoding 3 (16-bit linear), rate, 1 channel."""
    size = len(pcm_be) if data_size is None else data_size
    return b".snd" + struct.pack(">5I", 24, size, 3, RATE_HZ, 1) + pcm_be


def au_cut(d: Path) -> Path:
    """AU declaring 3.000 s of data; 2.000 s present."""
    p = d / "cut.au"
    p.write_bytes(au_bytes(sine_pcm16_be(2.0), data_size=2 * 3 * RATE_HZ))
    return p


def _written_then_cut(d: Path, name: str, fmt: str, subtype: str) -> Path:
    """A 3.000 s file written by libsndfile, then cut to the first 2/3 of its bytes."""
    p = d / name
    x = 0.1 * np.sin(2 * np.pi * 1000.0 * np.arange(3 * RATE_HZ) / RATE_HZ)
    sf.write(str(p), x, RATE_HZ, format=fmt, subtype=subtype)
    raw = p.read_bytes()
    p.write_bytes(raw[: len(raw) * 2 // 3])
    return p


def w64_cut(d: Path) -> Path:
    return _written_then_cut(d, "cut.w64", "W64", "PCM_16")


def caf_cut(d: Path) -> Path:
    return _written_then_cut(d, "cut.caf", "CAF", "PCM_16")


def flac_cut(d: Path) -> Path:
    return _written_then_cut(d, "cut.flac", "FLAC", "PCM_16")


def ogg_cut(d: Path) -> Path:
    return _written_then_cut(d, "cut.ogg", "OGG", "VORBIS")


def voc_cut(d: Path) -> Path:
    """Creative VOC (no reader of ours: libsndfile's own log is the evidence)."""
    return _written_then_cut(d, "cut.voc", "VOC", "PCM_16")


def half_length_samples() -> np.ndarray:
    """2.000 s: the -20 dBFS sine, then a second half driven 20x into full scale (clipped)."""
    x = 0.1 * np.sin(2 * np.pi * 1000.0 * np.arange(2 * RATE_HZ) / RATE_HZ)
    x[RATE_HZ:] = np.clip(20 * x[RATE_HZ:], -1.0, 1.0)
    return x


def flac_half_length(d: Path) -> Path:
    """A 2.000 s FLAC whose STREAMINFO total samples is patched to 48000 (half): the clipped
    second half lies past the declared length (byte layout: see flac_no_length)."""
    p = d / "half-length.flac"
    sf.write(str(p), half_length_samples(), RATE_HZ, subtype="PCM_16", format="FLAC")
    raw = bytearray(p.read_bytes())
    assert raw[:4] == b"fLaC" and raw[4] & 0x7F == 0  # first block is STREAMINFO
    half = RATE_HZ
    raw[21] = (raw[21] & 0xF0) | (half >> 32)
    raw[22:26] = (half & 0xFFFFFFFF).to_bytes(4, "big")
    p.write_bytes(bytes(raw))
    return p


#: Out-of-range float items: 64-bit float WAV, 1.000 s mono: the -20 dBFS sine for the first
#: 0.500 s, then alternating +-EXTREME for the rest (24000 samples from 0.500 s).
EXTREME_FIRST_FRAME = 24_000


def float_extreme(d: Path, value: float = 1e200, name: str = "extreme-1e200.wav") -> Path:
    p = d / name
    x = 0.1 * np.sin(2 * np.pi * 1000.0 * np.arange(RATE_HZ) / RATE_HZ)
    x[EXTREME_FIRST_FRAME::2] = value
    x[EXTREME_FIRST_FRAME + 1 :: 2] = -value
    p.write_bytes(wav_bytes(x.astype("<f8").tobytes(), bits=64, format_tag=FORMAT_FLOAT))
    return p


def float_extreme_f32_max(d: Path) -> Path:
    return float_extreme(d, 3.4e38, "extreme-3.4e38.wav")


#: name -> maker of every broken item (hostile names are separate: they hold good audio).
CORPUS: dict[str, Callable[[Path], Path]] = {
    "zero_byte": zero_byte,
    "header_only": header_only,
    "data_claims_more": data_claims_more,
    "data_claims_less": data_claims_less,
    "riff_size_zero": riff_size_zero,
    "riff_size_zero_data_ok": riff_size_zero_data_ok,
    "text_as_wav": text_as_wav,
    "image_as_wav": image_as_wav,
    "channels_0": channels_0,
    "channels_1000": channels_1000,
    "rate_1_hz": rate_1_hz,
    "rate_10_mhz": rate_10_mhz,
    "float_nan_inf": float_nan_inf,
    "zero_frames": zero_frames,
    "zero_frames_then_chunk": zero_frames_then_chunk,
    "codec_mp3_in_wav": codec_mp3_in_wav,
    "codec_unknown": codec_unknown,
    "flac_no_length": flac_no_length,
    "mp3_garbage_middle": mp3_garbage_middle,
    "unreadable": unreadable,
    "dangling_symlink": dangling_symlink,
    "directory_named_wav": directory_named_wav,
    "aiff_cut": aiff_cut,
    "au_cut": au_cut,
    "w64_cut": w64_cut,
    "caf_cut": caf_cut,
    "flac_cut": flac_cut,
    "ogg_cut": ogg_cut,
    "voc_cut": voc_cut,
    "flac_half_length": flac_half_length,
    "float_extreme": float_extreme,
    "float_extreme_f32_max": float_extreme_f32_max,
}

#: Hostile but legal file names; each holds a good 1 s WAV.
NAMED_FILES: dict[str, str] = {
    "spaces": "take  one final .wav",
    "unicode": "Grüße 音声 ☃ café.wav",
    "newline": "line one\nline two.wav",
    "quotes": 'it\'s "final".wav',
    "html": "<img src=x onerror=alert(1)>.wav",
    "formula_equals": "=cmd.wav",
    "formula_plus": "+1.wav",
    "formula_minus": "-x.wav",
    "formula_at": "@a.wav",
}


def named_file(d: Path, key: str) -> Path:
    return good_wav(d / NAMED_FILES[key])


# --- Intake: what a batch finds in a delivery folder -------------------------------------------
# Each maker writes one file into a folder and returns its path. tests/e2e/test_intake.py holds the
# expected outcome of each (measured / error row / not checked) and the batch that mixes them.

#: ISO base media (MP4/M4A) starts with a box: uint32 size, "ftyp", major brand (ISO/IEC 14496-12).
M4A_HEAD = struct.pack(">I", 24) + b"ftypM4A " + struct.pack(">I", 0) + b"M4A isom"
#: AppleDouble header: magic 0x00051607, version 0x00020000 (RFC 1740), then filler and no entries.
APPLEDOUBLE = b"\x00\x05\x16\x07\x00\x02\x00\x00" + b"Mac OS X        " + b"\x00\x00"
#: A Finder .DS_Store begins with 00 00 00 01 "Bud1" (from memory: its buddy-allocator header).
DS_STORE = b"\x00\x00\x00\x01Bud1" + bytes(24)


def _wav_named(d: Path, name: str | bytes) -> Path:
    data = wav_bytes(sine_pcm16(0.5))
    if isinstance(name, bytes):  # a name that is not valid UTF-8: write it through the OS bytes
        raw = os.path.join(os.fsencode(d), name)
        with open(raw, "wb") as fh:
            fh.write(data)
        return Path(os.fsdecode(raw))
    p = d / name
    p.write_bytes(data)
    return p


INTAKE: dict[str, Callable[[Path], Path]] = {
    "wav_no_extension": lambda d: _wav_named(d, "episode-12"),
    "wav_trailing_space": lambda d: _wav_named(d, "final.wav "),
    "wav_wrong_extension": lambda d: _wav_named(d, "take.dat"),
    "wav_bwf_extension": lambda d: _wav_named(d, "scene.bwf"),
    "wav_part": lambda d: _wav_named(d, "episode.wav.part"),
    "wav_crdownload": lambda d: _wav_named(d, "promo.wav.crdownload"),
    "wav_non_utf8_name": lambda d: _wav_named(d, b"caf\xe9-latin1.wav"),
    "wav_escape_sequence_name": lambda d: _wav_named(d, "x\x1b[2K\x1b[32mok\x1b[0m.wav"),
    "m4a": lambda d: _write(d / "episode.m4a", M4A_HEAD + bytes(200)),
    "m4a_renamed_wav": lambda d: _write(d / "interview.wav", M4A_HEAD + bytes(200)),
    "text_as_wav": text_as_wav,
    "unknown_binary": lambda d: _write(d / "data.bin", bytes(range(1, 200))),
    "text": lambda d: _write(d / "notes.txt", b"Deliver by Friday.\n"),
    "image": lambda d: _write(d / "cover.png", png_bytes()),
    "resource_fork": lambda d: _write(d / "._final.wav", APPLEDOUBLE + bytes(64)),
    "ds_store": lambda d: _write(d / ".DS_Store", DS_STORE),
    "peak_sidecar": lambda d: _write(d / "final.wav.reapeaks", bytes(range(1, 100))),
    "empty_no_extension": lambda d: _write(d / "placeholder", b""),
}


def _write(p: Path, data: bytes) -> Path:
    p.write_bytes(data)
    return p
