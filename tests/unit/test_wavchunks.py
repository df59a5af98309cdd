"""checker.io.wavchunks, layout_from_mask and their use in measure().

Files are written by soundfile, then the test itself rewrites their chunks with
struct: bext chunks (EBU Tech 3285 versions 1 and 2), extensible channel masks
and hostile headers. Byte offsets and mask bits are from the project's standards
notes (WAV details): bext Version at body offset 346, the five loudness fields
as int16 x 100 at 412-420, 0x7FFF = not set, fixed part 602 bytes; mask bits
FL 0x1 FR 0x2 FC 0x4 LFE 0x8 BL 0x10 BR 0x20 ... BC 0x100 SL 0x200 SR 0x400,
channels interleaved in ascending bit order; 5.1 = 0x3F, 7.1 = 0x63F.
"""

from __future__ import annotations

import struct
import tempfile
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from signals import noise, programme, write

import checker
from checker.analysis.onepass import measure
from checker.io.layout import layout_from_mask, mask_problem
from checker.io.wavchunks import WAV_KEYS, read_wav_header
from checker.model.errors import AudioReadError

LOUDNESS_METER = Path(checker.__file__).parent / "meters" / "loudness.py"


# ---------------------------------------------------------------- file surgery helpers


def chunks_of(data: bytes) -> list[tuple[bytes, bytes]]:
    """(id, body) of a well-formed RIFF file (as soundfile writes them)."""
    out, pos = [], 12
    while pos + 8 <= len(data):
        size = struct.unpack_from("<I", data, pos + 4)[0]
        out.append((data[pos : pos + 4], data[pos + 8 : pos + 8 + size]))
        pos += 8 + size + (size & 1)
    return out


def chunk(cid: bytes, body: bytes, size: int | None = None, pad: bool = True) -> bytes:
    size = len(body) if size is None else size
    return cid + struct.pack("<I", size) + body + (b"\0" if pad and len(body) % 2 else b"")


def riff(parts: list[bytes], size: int | None = None, form: bytes = b"RIFF") -> bytes:
    body = b"WAVE" + b"".join(parts)
    return form + struct.pack("<I", len(body) if size is None else size) + body


def bext_body(version: int, loudness: tuple[int, int, int, int, int] | None = None) -> bytes:
    """A 602-byte bext body; ``loudness`` = the five int16 codes (100 x value)."""
    body = bytearray(602)
    body[0:20] = b"synthetic test file".ljust(20, b"\0")  # Description
    struct.pack_into("<H", body, 346, version)
    if loudness is not None:
        struct.pack_into("<5h", body, 412, *loudness)
    return bytes(body)


def with_mask(fmt: bytes, mask: int) -> bytes:
    """An extensible fmt body (as soundfile writes for WAVEX) with a new channel mask."""
    assert struct.unpack_from("<H", fmt, 0)[0] == 0xFFFE and len(fmt) >= 40
    return fmt[:20] + struct.pack("<I", mask) + fmt[24:]


def build(
    tmp_path: Path,
    name: str,
    x: np.ndarray,
    *,
    mask: int | None = None,
    bext: bytes | None = None,
    subtype: str = "PCM_16",
) -> Path:
    """Write ``x`` with soundfile (WAVEX when a mask is wanted), then re-chunk it."""
    src = tmp_path / f"src_{name}"
    sf.write(str(src), x, 48_000, subtype=subtype, format="WAVEX" if mask is not None else "WAV")
    parts = []
    for cid, body in chunks_of(src.read_bytes()):
        if cid == b"fmt " and mask is not None:
            body = with_mask(body, mask)
        if cid == b"data" and bext is not None:
            parts.append(chunk(b"bext", bext))
        parts.append(chunk(cid, body))
    path = tmp_path / name
    path.write_bytes(riff(parts))
    return path


def plain_parts(tmp_path: Path, seconds: float = 0.5) -> tuple[bytes, bytes]:
    """fmt and data bodies of a small stereo PCM_16 file written by soundfile."""
    src = write(tmp_path / "plain.wav", noise(seconds, channels=2, seed=3) * 0.1, subtype="PCM_16")
    found = dict(chunks_of(src.read_bytes()))
    return found[b"fmt "], found[b"data"]


# ---------------------------------------------------------------- fmt, bext


def test_plain_pcm_header(tmp_path):
    path = write(tmp_path / "a.wav", noise(0.2, channels=2) * 0.1, subtype="PCM_24")
    header = read_wav_header(str(path))
    # WAVE_FORMAT_PCM = 1 (Microsoft RIFF spec); no extensible part, no bext.
    assert (header.format_tag, header.channels, header.bits_per_sample) == (1, 2, 24)
    assert header.channel_mask is None and header.bext_version is None
    assert [c.chunk_id for c in header.chunks] == ["fmt ", "data"]
    assert header.findings == ()
    values = header.values()
    assert list(values) == list(WAV_KEYS)
    assert values["declared_integrated_lufs"] is None and values["header_findings"] == []


def test_bext_version_2_loudness_fields(tmp_path):
    x = noise(0.3, channels=2, seed=1) * 0.05
    # Codes are 100 x value (EBU Tech 3285 v2); 0x7FFF = not set (max momentary here).
    codes = (-2300, 750, -120, 0x7FFF, -1830)
    path = build(tmp_path, "v2.wav", x, bext=bext_body(2, codes))
    header = read_wav_header(str(path))
    assert header.bext_version == 2
    d = header.values()
    assert_allclose(d["declared_integrated_lufs"], -23.0, rtol=0, atol=1e-12)  # -2300 / 100
    assert_allclose(d["declared_loudness_range_lu"], 7.5, rtol=0, atol=1e-12)  # 750 / 100
    assert_allclose(d["declared_true_peak_dbtp"], -1.2, rtol=0, atol=1e-12)  # -120 / 100
    assert d["declared_max_momentary_lufs"] is None  # 0x7FFF = not set
    assert_allclose(d["declared_max_short_term_lufs"], -18.3, rtol=0, atol=1e-12)
    assert d["header_findings"] == []
    # libsndfile still reads the audio; measure() carries the declared values.
    m = measure(str(path))
    assert m.bext_version == 2 and m.declared_integrated_lufs == -23.0
    assert m.frames == x.shape[0]


def test_bext_version_1_has_no_loudness(tmp_path):
    # Version 1 keeps those bytes reserved: even non-zero bytes there are not loudness.
    path = build(tmp_path, "v1.wav", noise(0.2, seed=2) * 0.1, bext=bext_body(1, (-2300,) * 5))
    header = read_wav_header(str(path))
    assert header.bext_version == 1
    assert all(header.values()[k] is None for k in WAV_KEYS if k.startswith("declared_"))


def test_truncated_bext_is_a_finding(tmp_path):
    fmt, data = plain_parts(tmp_path)
    # The bext chunk claims 900 bytes but the file ends 312 bytes into its body.
    raw = riff([chunk(b"fmt ", fmt), chunk(b"data", data)]) + chunk(
        b"bext", bext_body(2, (-2300, 0, 0, 0, 0))[:312], size=900
    )
    path = tmp_path / "bext_cut.wav"
    path.write_bytes(raw)
    header = read_wav_header(str(path))
    assert "'bext' chunk claims 900 bytes, 312 present" in header.findings
    assert header.bext_version is None  # the version field (offset 346) is not there
    m = measure(str(path))  # audio before it is intact
    assert m.frames == len(data) // 4
    assert "'bext' chunk claims 900 bytes, 312 present" in m.findings


# ---------------------------------------------------------------- channel masks and layout


def test_layout_from_mask_standard_layouts():
    # 5.1 as 0x3F and as 0x60F, 7.1 as 0x63F (docs/standards.md); weights per BS.1770-4:
    # LFE 0, surrounds at 90-110 deg 1.41, rear pair at about 150 deg 1.0.
    for mask in (0x3F, 0x60F):
        layout = layout_from_mask(mask, 6)
        assert layout.labels == ("L", "R", "C", "LFE", "Ls", "Rs") and layout.source == "mask"
        assert layout.weights == (1.0, 1.0, 1.0, 0.0, 1.41, 1.41)
    layout = layout_from_mask(0x63F, 8)
    assert layout.labels == ("L", "R", "C", "LFE", "Lrs", "Rrs", "Lss", "Rss")
    assert layout.weights == (1.0, 1.0, 1.0, 0.0, 1.0, 1.0, 1.41, 1.41)


def test_mask_disagreeing_with_channel_count():
    assert layout_from_mask(0x3F, 8) is None  # 6 bits, 8 channels
    assert "names 6 speaker positions for 8 channels" in mask_problem(0x3F, 8)
    assert layout_from_mask(0, 2) is None and mask_problem(0, 2) is None  # no information


def test_mask_decides_layout_in_measure(tmp_path):
    x = noise(0.3, channels=6, seed=4) * 0.05
    # FL FR LFE BL BR BC (0x13B): the LFE is the third channel, not the fourth.
    m = measure(str(build(tmp_path, "moved.wav", x, mask=0x13B)))
    assert m.layout_source == "mask"
    assert m.channel_layout == "L R LFE Ls Rs Cs (from WAV channel mask)"
    assert m.channel_mask == 0x13B and m.wav_format_tag == 0xFFFE
    # The same audio without a mask: default 5.1 map, reported as assumed.
    m = measure(str(write(tmp_path / "nomask.wav", x, subtype="PCM_16")))
    assert m.layout_source == "assumed" and m.channel_mask is None
    # An explicit layout wins over the mask.
    from checker.meters.base import MeasureOptions

    given_layout = MeasureOptions(layout="L R C LFE Ls Rs")
    m = measure(str(build(tmp_path, "moved2.wav", x, mask=0x13B)), given_layout)
    assert m.layout_source == "given"


def test_7_1_mask_in_measure(tmp_path):
    x = noise(0.3, channels=8, seed=5) * 0.05
    m = measure(str(build(tmp_path, "s71.wav", x, mask=0x63F)))
    assert m.channel_layout == "L R C LFE Lrs Rrs Lss Rss (from WAV channel mask)"


def test_mask_count_mismatch_in_measure(tmp_path):
    x = noise(0.3, channels=6, seed=6) * 0.05
    path = build(tmp_path, "bad_mask.wav", x, mask=0x63F)  # 8 positions for 6 channels
    m = measure(str(path))
    assert m.layout_source == "assumed"
    assert any("names 8 speaker positions for 6 channels" in f for f in m.findings)
    assert any("names 8 speaker positions" in f for f in m.header_findings)


@pytest.mark.skipif(not LOUDNESS_METER.exists(), reason="loudness meter not present")
@pytest.mark.parametrize("mask,lfe", [(0x3F, 3), (0x13B, 2)])
def test_loud_lfe_is_ignored(tmp_path, mask, lfe):
    # BS.1770-4: the LFE channel is excluded from the loudness sum, so loud LFE
    # content must not change the integrated loudness.
    x = programme(2.5, 48_000, 6, seed=7, level_dbfs=-26.0)
    silent = x.copy()
    silent[:, lfe] = 0.0
    loud = silent.copy()
    loud[:, lfe] = programme(2.5, 48_000, 1, seed=8, level_dbfs=-6.0)[:, 0]
    a = measure(str(build(tmp_path, "loud_lfe.wav", loud, mask=mask, subtype="PCM_24")))
    b = measure(str(build(tmp_path, "silent_lfe.wav", silent, mask=mask, subtype="PCM_24")))
    assert a.layout_source == "mask"
    assert_allclose(a.integrated_lufs, b.integrated_lufs, rtol=0, atol=1e-9)
    # Control: the same loud channel counted as a main channel reads much louder, so
    # the equality above is not an accident of the meter ignoring the channel anyway.
    # (0x137 = L R C Ls Rs Cs puts channel 3 in Ls; no mask = default map, channel 2 is C.)
    c = measure(str(build(tmp_path, "as_main.wav", loud, mask=0x137 if lfe == 3 else None)))
    assert c.integrated_lufs > b.integrated_lufs + 3.0


# ---------------------------------------------------------------- hostile headers


def hostile_cases(fmt: bytes, data: bytes) -> dict[str, tuple[bytes, str, bool]]:
    """name -> (file bytes, expected finding text, libsndfile reads the audio)."""
    ok = [chunk(b"fmt ", fmt), chunk(b"data", data)]
    full = riff(ok)
    return {
        "truncated": (
            full[: len(full) - 5000],
            f"'data' chunk claims {len(data)} bytes, {len(data) - 5000} present: "
            "the file is truncated",
            True,
        ),
        "size_larger_than_file": (
            riff([*ok, chunk(b"LIST", b"abcd", size=900)]),
            "'LIST' chunk claims 900 bytes, 4 present",
            True,
        ),
        "odd_chunk_without_pad": (
            riff([*ok, chunk(b"junk", b"abc", pad=False), chunk(b"LIST", b"abcd")]),
            "odd-sized 'junk' chunk (3 bytes) has no pad byte",
            True,
        ),
        "odd_chunk_without_pad_before_data": (
            riff([ok[0], chunk(b"junk", b"abc", pad=False), ok[1]]),
            "odd-sized 'junk' chunk (3 bytes) has no pad byte",
            False,  # libsndfile 1.2.2 then misses the data chunk
        ),
        "duplicate_fmt": (
            riff([*ok, chunk(b"fmt ", fmt)]),
            "'fmt ' chunk appears again",
            True,
        ),
        "duplicate_fmt_before_data": (
            riff([ok[0], chunk(b"fmt ", fmt), ok[1]]),
            "'fmt ' chunk appears again",
            False,  # libsndfile 1.2.2 refuses the file
        ),
        "riff_size_4gb": (
            riff(ok, size=0xFFFFFFF0),
            "RIFF header claims 4294967288 bytes",
            True,
        ),
        "data_size_4gb": (
            riff([ok[0], chunk(b"data", data, size=0xFFFFFFF0)]),
            "(a size of 4.0 GiB in a",
            True,
        ),
    }


@pytest.mark.parametrize(
    "case",
    [
        "truncated",
        "size_larger_than_file",
        "odd_chunk_without_pad",
        "odd_chunk_without_pad_before_data",
        "duplicate_fmt",
        "duplicate_fmt_before_data",
        "riff_size_4gb",
        "data_size_4gb",
    ],
)
def test_hostile_header(tmp_path, case):
    fmt, data = plain_parts(tmp_path)
    raw, expected, readable = hostile_cases(fmt, data)[case]
    path = tmp_path / f"{case}.wav"
    path.write_bytes(raw)
    header = read_wav_header(str(path))
    assert any(expected in f for f in header.findings), header.findings
    if readable:
        m = measure(str(path))
        assert any(expected in f for f in m.findings)
        assert m.header_findings == list(header.findings)
        decoded = min(len(data), len(raw) - 44) // 4  # 4 bytes per stereo PCM_16 frame
        assert m.frames == decoded
    else:
        # Not readable: the open error carries the header finding, so the user sees why.
        with pytest.raises(AudioReadError, match="header: .*" + expected[:20]):
            measure(str(path))


def test_rf64_ds64_sizes(tmp_path):
    x = noise(0.2, channels=2, seed=9) * 0.1
    path = tmp_path / "r.wav"
    sf.write(str(path), x, 48_000, subtype="PCM_16", format="RF64")
    header = read_wav_header(str(path))
    assert header.container == "RF64"
    # ds64 data size = frames x 4 bytes (2 channels x 16 bit); sample count = frames.
    assert header.ds64["data_size"] == x.shape[0] * 4
    assert header.ds64["sample_count"] == x.shape[0]
    data = [c for c in header.chunks if c.chunk_id == "data"][0]
    assert data.size == data.present == x.shape[0] * 4
    assert header.findings == ()
    # BW64 (ITU-R BS.2088, from memory) uses the same ds64 layout under another magic.
    bw64 = tmp_path / "b.wav"
    bw64.write_bytes(b"BW64" + path.read_bytes()[4:])
    header = read_wav_header(str(bw64))
    assert header.container == "BW64" and header.ds64["data_size"] == x.shape[0] * 4
    assert header.findings == ()


def test_non_wav_has_empty_keys(tmp_path):
    path = write(tmp_path / "a.flac", noise(0.2, channels=2) * 0.1, subtype="PCM_16")
    assert read_wav_header(str(path)) is None
    m = measure(str(path))
    assert m.wav_format_tag is None and m.bext_version is None and m.header_findings == []
    assert m.declared_true_peak_dbtp is None


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    cut=st.integers(0, 900),
    edits=st.lists(st.tuples(st.integers(0, 899), st.integers(0, 255)), max_size=8),
)
def test_reader_never_raises(cut, edits):
    # Any truncation and byte corruption of a valid header gives a result, never an exception.
    fmt = struct.pack("<HHIIHH", 1, 2, 48_000, 192_000, 4, 16)
    base = bytearray(
        riff(
            [
                chunk(b"fmt ", fmt),
                chunk(b"bext", bext_body(2, (-2300,) * 5)),
                chunk(b"data", bytes(200)),
            ]
        )
    )
    for pos, value in edits:
        if pos < len(base):
            base[pos] = value
    with tempfile.NamedTemporaryFile(suffix=".wav") as fh:
        fh.write(bytes(base[:cut]))
        fh.flush()
        header = read_wav_header(fh.name)
    assert header is None or isinstance(header.findings, tuple)
