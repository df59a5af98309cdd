"""checker.io.carriers and checker.io.oggpages: declared loudness in iXML, axml, Vorbis comments,
FLAC and Opus, built byte by byte here from the published layouts.

Layouts used (each builder names its source):
- RIFF/WAVE chunks: Microsoft RIFF (4-byte id, uint32 LE size, body, pad to even).
- ADM ``loudnessMetadata`` in ``axml``: ITU-R BS.2076 (element names as in EBU's ADM
  reference: integratedLoudness, loudnessRange, maxTruePeak, maxMomentary, maxShortTerm,
  dialogLoudness).
- iXML loudness: the bext mirror ``<BEXT><BWF_LOUDNESS_VALUE>`` (from memory).
- Ogg pages: RFC 3533 section 6 (header fields, lacing, CRC polynomial 0x04C11DB7, init 0,
  unreflected) -- the CRC here is a bit-by-bit implementation of that text, independent of
  the table-driven one under test.
- Opus headers: RFC 7845 section 5.1 (OpusHead: version, channels, pre-skip, input rate,
  output gain Q7.8, mapping family) and 5.2 (OpusTags: vendor, comment list); R128 gains
  section 5.2.1 (Q7.8 integers relative to -23 LUFS).
- Vorbis headers: Vorbis I specification 4.2.2 (identification) and 5.2.1 (comments).
- FLAC: METADATA_BLOCK_HEADER (last flag, 7-bit type, 24-bit BE length); type 4 =
  VORBIS_COMMENT (FLAC format description).
"""

from __future__ import annotations

import struct

import numpy as np
import pytest
import soundfile as sf
from numpy.testing import assert_allclose
from test_rules import one_limit_profile

from checker.analysis.onepass import measure
from checker.io.carriers import empty_carrier_values, read_carriers
from checker.io.oggpages import read_head, read_page
from checker.io.wavchunks import read_wav_header
from checker.io.xmlchunks import safe_xml
from checker.judge.rules import evaluate

# ---------------------------------------------------------------- builders


def rfc3533_crc(data: bytes) -> int:
    """Bit by bit, as RFC 3533 section 6 describes it (not the table method under test)."""
    crc = 0
    for byte in data:
        crc ^= byte << 24
        for _ in range(8):
            crc = ((crc << 1) ^ 0x04C11DB7) if crc & 0x80000000 else crc << 1
            crc &= 0xFFFFFFFF
    return crc


def ogg_page(packets: list[bytes], *, serial=7, seq=0, granule=0, flags=0, crc_ok=True) -> bytes:
    """One page holding whole packets (RFC 3533 section 6; lacing: 255s then the rest)."""
    lacing = bytearray()
    for p in packets:
        lacing += b"\xff" * (len(p) // 255) + bytes([len(p) % 255])
    assert len(lacing) <= 255
    head = b"OggS" + struct.pack("<BBqIIIB", 0, flags, granule, serial, seq, 0, len(lacing))
    page = bytearray(head + bytes(lacing) + b"".join(packets))
    struct.pack_into("<I", page, 22, rfc3533_crc(bytes(page)) ^ (0 if crc_ok else 1))
    return bytes(page)


def comment_list(vendor: bytes, comments: list[bytes]) -> bytes:
    """Vorbis I 5.2.1 / RFC 7845 5.2: lengths are uint32 LE."""
    out = struct.pack("<I", len(vendor)) + vendor + struct.pack("<I", len(comments))
    return out + b"".join(struct.pack("<I", len(c)) + c for c in comments)


def opus_head(gain_q78: int = 0, pre_skip: int = 312) -> bytes:
    """RFC 7845 5.1: 'OpusHead', version 1, channels, pre-skip, rate, gain, family 0."""
    return b"OpusHead" + struct.pack("<BBHIhB", 1, 2, pre_skip, 48000, gain_q78, 0)


def opus_file(comments: list[bytes], gain_q78: int = 0) -> bytes:
    tags = b"OpusTags" + comment_list(b"test vendor", comments)
    return ogg_page([opus_head(gain_q78)], flags=0x02) + ogg_page([tags], seq=1)


def vorbis_file(comments: list[bytes]) -> bytes:
    """Vorbis I 4.2.2: type 1, 'vorbis', version 0, channels, rate, three bit rates,
    block sizes, framing; 5.2.1: type 3 comment header ending with a framing bit."""
    ident = b"\x01vorbis" + struct.pack("<IBIiiiBB", 0, 2, 48000, 0, 128000, 0, 0xB8, 1)
    comment = b"\x03vorbis" + comment_list(b"test vendor", comments) + b"\x01"
    return ogg_page([ident], flags=0x02) + ogg_page([comment], seq=1)


def flac_file(comments: list[bytes]) -> bytes:
    streaminfo = bytes(34)
    block = comment_list(b"test vendor", comments)
    return (
        b"fLaC"
        + bytes([0]) + len(streaminfo).to_bytes(3, "big") + streaminfo
        + bytes([0x80 | 4]) + len(block).to_bytes(3, "big") + block
    )  # fmt: skip


def wav_with(chunks: list[tuple[bytes, bytes]], seconds=1.0, level=0.1) -> bytes:
    """16-bit mono 48 kHz PCM (a 1 kHz sine) plus the given chunks (Microsoft RIFF)."""
    n = int(48000 * seconds)
    pcm = np.round(level * 32767 * np.sin(2 * np.pi * 1000 * np.arange(n) / 48000))
    fmt = struct.pack("<HHIIHH", 1, 1, 48000, 96000, 2, 16)
    parts = [(b"fmt ", fmt), (b"data", pcm.astype("<i2").tobytes()), *chunks]
    body = b"WAVE"
    for cid, data in parts:
        body += cid + struct.pack("<I", len(data)) + data + (b"\0" if len(data) % 2 else b"")
    return b"RIFF" + struct.pack("<I", len(body)) + body


def adm(integrated="-24.0", extra="", in_programme=True) -> bytes:
    meta = (
        '<loudnessMetadata loudnessMethod="ITU-R BS.1770">'
        f"<integratedLoudness>{integrated}</integratedLoudness>"
        "<loudnessRange>5.5</loudnessRange><maxTruePeak>-2.5</maxTruePeak>"
        "<maxMomentary>-18.0</maxMomentary><maxShortTerm>-20.0</maxShortTerm>"
        "<dialogLoudness>-25.0</dialogLoudness></loudnessMetadata>"
    )
    prog = f'<audioProgramme audioProgrammeID="APR_1001">{meta if in_programme else ""}'
    prog += "</audioProgramme>"
    content = f'<audioContent audioContentID="ACO_1001">{"" if in_programme else meta}'
    content += "</audioContent>"
    return (
        '<?xml version="1.0" encoding="UTF-8"?><ebuCoreMain xmlns="urn:ebu:metadata-schema:ebuCore_2014">'
        f"<coreMetadata><format><audioFormatExtended>{prog}{content}{extra}"
        "</audioFormatExtended></format></coreMetadata></ebuCoreMain>"
    ).encode()


def ixml(value="-23.50") -> bytes:
    return (
        f"<?xml version='1.0' encoding='UTF-8'?><BWFXML><IXML_VERSION>2.10</IXML_VERSION>"
        f"<BEXT><BWF_LOUDNESS_VALUE>{value}</BWF_LOUDNESS_VALUE>"
        "<BWF_LOUDNESS_RANGE>4.0</BWF_LOUDNESS_RANGE>"
        "<BWF_MAX_TRUE_PEAK_LEVEL>-3.0</BWF_MAX_TRUE_PEAK_LEVEL></BEXT></BWFXML>"
    ).encode()


def carriers_of(tmp_path, data: bytes, name="f.wav"):
    p = tmp_path / name
    p.write_bytes(data)
    return read_carriers(str(p), read_wav_header(str(p)))


# ---------------------------------------------------------------- WAV XML carriers


def test_axml_programme_loudness_is_read(tmp_path):
    v = carriers_of(tmp_path, wav_with([(b"axml", adm())]))
    # the values written into the ADM document above
    assert v["declared_axml_integrated_lufs"] == -24.0
    assert v["declared_axml_loudness_range_lu"] == 5.5
    assert v["declared_axml_true_peak_dbtp"] == -2.5
    assert v["declared_axml_max_momentary_lufs"] == -18.0
    assert v["declared_axml_max_short_term_lufs"] == -20.0
    assert v["declared_axml_dialogue_lufs"] == -25.0
    assert v["declared_carriers"] == ["axml"]
    assert v["metadata_findings"] == []


def test_axml_content_level_loudness_and_several_blocks(tmp_path):
    v = carriers_of(tmp_path, wav_with([(b"axml", adm(in_programme=False))]))
    assert v["declared_axml_integrated_lufs"] == -24.0  # the only block, in audioContent
    two = adm(extra="<audioObject><loudnessMetadata><integratedLoudness>-30"
              "</integratedLoudness></loudnessMetadata></audioObject>")  # fmt: skip
    v = carriers_of(tmp_path, wav_with([(b"axml", two)]))
    assert v["declared_axml_integrated_lufs"] == -24.0  # the programme's wins
    assert any("2 loudnessMetadata elements" in f for f in v["metadata_findings"])


def test_ixml_bext_mirror_is_read(tmp_path):
    v = carriers_of(tmp_path, wav_with([(b"iXML", ixml())]))
    assert v["declared_ixml_integrated_lufs"] == -23.5
    assert v["declared_ixml_loudness_range_lu"] == 4.0
    assert v["declared_ixml_true_peak_dbtp"] == -3.0
    assert v["declared_ixml_max_momentary_lufs"] is None  # not written
    assert v["declared_carriers"] == ["ixml"]


def test_utf16_ixml_is_read(tmp_path):
    doc = ixml().decode().replace("UTF-8", "UTF-16").encode("utf-16")  # with a BOM
    v = carriers_of(tmp_path, wav_with([(b"iXML", doc)]))
    assert v["declared_ixml_integrated_lufs"] == -23.5


BILLION_LAUGHS = (
    b'<?xml version="1.0"?><!DOCTYPE lolz [<!ENTITY lol "lol">'
    b'<!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">]>'
    b"<BWFXML><BEXT><BWF_LOUDNESS_VALUE>&lol2;</BWF_LOUDNESS_VALUE></BEXT></BWFXML>"
)


@pytest.mark.parametrize(
    "cid, body, finding",
    [
        (b"iXML", BILLION_LAUGHS, "document type declaration (refused: entities)"),
        (b"axml", b"<ebuCoreMain><unclosed>", "not well-formed XML"),
        (b"iXML", ixml("loud"), "BWF_LOUDNESS_VALUE = 'loud' (expected a number)"),
        (b"iXML", ixml("-2300"), "expected a level between -200 and 100"),
        (b"axml", b"\0\0\0\0", "empty"),
        (b"iXML", b"\xff\xfe\x00\xd8", "not text in a Unicode encoding"),
    ],
    ids=["entities", "not-well-formed", "not-a-number", "implausible", "zeros", "bad-utf16"],
)
def test_malformed_xml_carriers_are_findings(tmp_path, cid, body, finding):
    v = carriers_of(tmp_path, wav_with([(cid, body)]))
    assert any(finding in f for f in v["metadata_findings"]), v["metadata_findings"]
    assert v["declared_ixml_integrated_lufs"] is None
    assert v["declared_axml_integrated_lufs"] is None


def test_axml_chunk_cut_short_is_a_finding(tmp_path):
    data = wav_with([(b"axml", adm())])
    cut = data[: len(data) - 40]  # the chunk claims more bytes than are left
    v = carriers_of(tmp_path, cut)
    assert any("not well-formed XML" in f for f in v["metadata_findings"])


def test_safe_xml_never_expands_entities():
    findings: list[str] = []
    assert safe_xml(BILLION_LAUGHS, "x", findings) is None
    assert findings == ["x: holds a document type declaration (refused: entities)"]


# ---------------------------------------------------------------- Ogg, Opus, Vorbis, FLAC


def test_rfc3533_crc_matches_pages_libogg_wrote(tmp_path):
    """Every page of a file libsndfile (libogg) wrote passes our CRC check; one flipped
    byte fails it."""
    p = tmp_path / "x.opus"
    sf.write(p, np.zeros((4800, 1)), 48000, format="OGG", subtype="OPUS")
    data = p.read_bytes()
    pos, pages = 0, 0
    with open(p, "rb") as fh:
        while pos < len(data):
            page, problem = read_page(fh, pos, len(data))
            assert problem is None
            assert rfc3533_crc(data[pos : pos + 22] + bytes(4) + data[pos + 26 : pos + page.size])
            pos, pages = pos + page.size, pages + 1
    assert pages >= 3
    bad = bytearray(data)
    bad[40] ^= 0xFF
    p.write_bytes(bytes(bad))
    with open(p, "rb") as fh:
        page, problem = read_page(fh, 0, len(bad))
    assert page is None and "CRC mismatch" in problem


def test_opus_r128_gains_and_output_gain(tmp_path):
    # RFC 7845 5.2.1: -512 = -2.0 dB; the track is declared at -23 - (-2) = -21 LUFS
    data = opus_file([b"R128_TRACK_GAIN=-512", b"R128_ALBUM_GAIN=128"], gain_q78=-384)
    v = carriers_of(tmp_path, data, "t.opus")
    assert v["r128_track_gain_db"] == -2.0
    assert v["r128_album_gain_db"] == 0.5
    assert v["opus_output_gain_db"] == -1.5  # -384 / 256
    assert v["declared_gain_tag_integrated_lufs"] == -21.0
    assert v["gain_tag_carrier"] == "OpusTags"
    assert v["declared_carriers"] == ["opus header", "opus tags"]
    assert v["metadata_findings"] == []


def test_replaygain_in_vorbis_and_flac(tmp_path):
    tags = [b"replaygain_track_gain=-6.50 dB", b"REPLAYGAIN_TRACK_PEAK=0.5", b"TITLE=x"]
    for name, data in (("t.ogg", vorbis_file(tags)), ("t.flac", flac_file(tags))):
        v = carriers_of(tmp_path, data, name)
        assert v["replaygain_track_gain_db"] == -6.5
        # 20 log10(0.5) = -6.02 dB
        assert_allclose(v["replaygain_track_peak_dbfs"], -6.02, rtol=0, atol=0.005)
        # ReplayGain reference -18 LUFS (common practice, from memory): -18 - (-6.5)
        assert v["declared_gain_tag_integrated_lufs"] == -11.5
        assert v["declared_carriers"] == ["vorbis comment"]


def test_replaygain_in_opus_is_ignored_with_a_finding(tmp_path):
    v = carriers_of(tmp_path, opus_file([b"REPLAYGAIN_TRACK_GAIN=-3 dB"]), "t.opus")
    assert v["replaygain_track_gain_db"] == -3.0
    assert v["declared_gain_tag_integrated_lufs"] is None  # Opus players use R128 only
    assert any("Opus players ignore" in f for f in v["metadata_findings"])


@pytest.mark.parametrize(
    "data, finding",
    [
        (opus_file([b"R128_TRACK_GAIN=-2.0 dB"]), "expected a Q7.8 integer"),
        (opus_file([b"R128_TRACK_GAIN=1", b"R128_TRACK_GAIN=2"]), "appears more than once"),
        (opus_file([b"REPLAYGAIN_TRACK_PEAK=-1"]), "expected a linear peak"),
        (
            ogg_page([opus_head()], flags=0x02)
            + ogg_page([b"OpusTags" + struct.pack("<I", 1000) + b"short"], seq=1),
            "the vendor string (1000 bytes) runs past the end of the packet",
        ),
        (
            ogg_page([opus_head()], flags=0x02)
            + ogg_page([b"OpusTags" + comment_list(b"v", [])[:-4] + struct.pack("<I", 3)], seq=1),
            "comment 1 of 3 runs past the end",
        ),
        (opus_file([b"x"])[:-10], "the file is truncated"),
        (ogg_page([opus_head()], flags=0x02, crc_ok=False), "CRC mismatch"),
        (ogg_page([opus_head()], flags=0x02), "ends after 1 header packet"),
        (ogg_page([b"OpusHead\x01"], flags=0x02) + ogg_page([b"x"], seq=1), "OpusHead packet"),
        (ogg_page([opus_head()], flags=0x02) + ogg_page([b"x"], seq=2), "a page is missing"),
        (flac_file([])[:-6], "FLAC metadata block (type 4) at byte 42 claims"),
    ],
    ids=[
        "r128-unit",
        "twice",
        "peak",
        "vendor",
        "count",
        "truncated",
        "crc",
        "one-packet",
        "short-head",
        "sequence",
        "flac-short",
    ],  # fmt: skip
)
def test_malformed_ogg_and_flac_carriers_are_findings(tmp_path, data, finding):
    name = "t.flac" if data.startswith(b"fLaC") else "t.opus"
    v = carriers_of(tmp_path, data, name)
    assert any(finding in f for f in v["metadata_findings"]), v["metadata_findings"]


def test_head_reader_stops_at_a_capture_pattern_it_cannot_find(tmp_path):
    p = tmp_path / "t.opus"
    p.write_bytes(b"OggS" + bytes(100))
    with open(p, "rb") as fh:
        head = read_head(fh, 104)
    assert head.packets == []
    assert "stream structure version" in head.findings[0] or "CRC" in head.findings[0]


# ---------------------------------------------------------------- through measure()


def _swap_opus_tags(src: bytes, comments: list[bytes], gain_q78: int | None = None) -> bytes:
    """A libsndfile Opus file with our own OpusTags page (RFC 7845 5.2: the tags start on
    the second page and the first audio packet on a new page) and, optionally, gain."""
    n0 = 27 + src[26]
    first_len = n0 + sum(src[27:n0])
    n1 = first_len + 27 + src[first_len + 26]
    second_len = n1 + sum(src[first_len + 27 : n1]) - first_len
    serial = struct.unpack_from("<I", src, 14)[0]
    head = src[n0:first_len]
    if gain_q78 is not None:
        head = head[:16] + struct.pack("<h", gain_q78) + head[18:]
    tags = b"OpusTags" + comment_list(b"test vendor", comments)
    return (
        ogg_page([head], serial=serial, flags=0x02)
        + ogg_page([tags], serial=serial, seq=1)
        + src[first_len + second_len :]
    )


@pytest.fixture(scope="module")
def opus_src(tmp_path_factory):
    p = tmp_path_factory.mktemp("opus") / "src.opus"
    t = np.arange(48000 * 3) / 48000
    x = 0.1 * np.sin(2 * np.pi * 997 * t)
    sf.write(p, np.c_[x, x], 48000, format="OGG", subtype="OPUS")
    return p.read_bytes()


def test_player_loudness_from_r128_track_gain(tmp_path, opus_src):
    plain = tmp_path / "plain.opus"
    plain.write_bytes(_swap_opus_tags(opus_src, []))
    tagged = tmp_path / "tagged.opus"
    tagged.write_bytes(_swap_opus_tags(opus_src, [b"R128_TRACK_GAIN=1024"]))
    a, b = measure(str(plain)), measure(str(tagged))
    assert b.integrated_lufs == a.integrated_lufs  # tags do not change the decoded audio
    # a player applying R128_TRACK_GAIN adds 1024/256 = 4 dB
    assert_allclose(b.player_track_integrated_lufs, b.integrated_lufs + 4.0, rtol=0, atol=0.006)
    assert a.player_track_integrated_lufs is None


def test_libsndfile_applies_the_opus_output_gain(tmp_path, opus_src):
    """RFC 7845 5.1: decoders apply the output gain; libsndfile does (+6 dB = 1536)."""
    plain = tmp_path / "plain.opus"
    plain.write_bytes(_swap_opus_tags(opus_src, []))
    louder = tmp_path / "louder.opus"
    louder.write_bytes(_swap_opus_tags(opus_src, [], gain_q78=1536))
    a, b = measure(str(plain)), measure(str(louder))
    assert_allclose(b.integrated_lufs - a.integrated_lufs, 6.0, rtol=0, atol=0.01)
    assert b.opus_output_gain_db == 6.0


def test_declared_mismatch_names_the_carrier(tmp_path):
    # axml declares -30 LUFS, iXML -23.5; a 1 kHz sine of peak 0.1 reads -23.0 LUFS
    # (-23.01 dB RMS, +0.69 dB K-weighting at 1 kHz, -0.691: BS.1770; measured -23.004)
    p = tmp_path / "m.wav"
    p.write_bytes(wav_with([(b"axml", adm("-30.0")), (b"iXML", ixml())]))
    m = measure(str(p))
    assert m.declared_axml_integrated_lufs == -30.0
    profile = one_limit_profile(tmp_path, "declared_integrated_tolerance_lu", 1.0)
    (flag,) = evaluate(m, profile).flags
    assert "Declared integrated loudness (axml) is -30.00 LUFS" in flag.message
    assert "(iXML)" not in flag.message  # 0.5 LU off: within the tolerance
    assert flag.measured == -30.0


def test_every_file_has_every_carrier_key(tmp_path):
    p = tmp_path / "plain.wav"
    sf.write(p, np.zeros(4800), 48000)
    m = measure(str(p))
    for key in empty_carrier_values():
        assert key in m.values
    assert m.declared_carriers == []
    assert m.metadata_findings == []


# ---------------------------------------------------------------- ID3v2 TXXX in MP3


def id3v24(frames: list[tuple[bytes, bytes]]) -> bytes:
    """ID3v2.4.0 structure 3.1 (header: 'ID3', 4, 0, flags 0, syncsafe size) and 4.1
    (frame: id, syncsafe size, two flag bytes)."""

    def syncsafe(n: int) -> bytes:
        return bytes([(n >> 21) & 0x7F, (n >> 14) & 0x7F, (n >> 7) & 0x7F, n & 0x7F])

    body = b"".join(fid + syncsafe(len(data)) + b"\0\0" + data for fid, data in frames)
    return b"ID3\x04\x00\x00" + syncsafe(len(body)) + body


def txxx(desc: str, value: str, enc: int = 3) -> bytes:
    """ID3v2.4.0 frames 4.2.6: encoding byte, description, terminator, value."""
    if enc == 1:
        return b"\x01" + desc.encode("utf-16") + b"\0\0" + value.encode("utf-16")
    return bytes([enc]) + desc.encode() + b"\0" + value.encode()


def test_id3v2_replaygain_on_a_real_mp3(tmp_path):
    src = tmp_path / "src.mp3"
    t = np.arange(44100 * 2) / 44100
    x = 0.1 * np.sin(2 * np.pi * 997 * t)
    sf.write(src, np.c_[x, x], 44100, format="MP3", subtype="MPEG_LAYER_III")
    tag = id3v24(
        [
            (b"TIT2", b"\x03An invented episode"),
            (b"TXXX", txxx("REPLAYGAIN_TRACK_GAIN", "+2.50 dB")),
            (b"TXXX", txxx("replaygain_album_gain", "-1.00 dB", enc=1)),
        ]
    )
    tagged = tmp_path / "tagged.mp3"
    tagged.write_bytes(tag + src.read_bytes())
    m = measure(str(tagged))
    assert m.replaygain_track_gain_db == 2.5 and m.replaygain_album_gain_db == -1.0
    assert m.gain_tag_carrier == "ID3v2 TXXX" and "id3v2 txxx" in m.declared_carriers
    # a player applying the track gain plays the measured loudness + 2.5 dB
    assert_allclose(m.player_track_integrated_lufs, m.integrated_lufs + 2.5, rtol=0, atol=0.006)
    assert m.declared_gain_tag_integrated_lufs == -20.5  # -18 - 2.5 (ReplayGain reference)
    assert m.gapless_mismatch_frames == 0  # the lossy reader skipped the tag too


def test_id3v2_frame_past_the_tag_is_a_finding(tmp_path):
    tag = bytearray(id3v24([(b"TXXX", txxx("REPLAYGAIN_TRACK_GAIN", "-3 dB"))]))
    tag[17] = 0x7F  # the frame's size now runs past the tag
    v = carriers_of(tmp_path, bytes(tag) + bytes(100), "t.mp3")
    assert any("ID3v2 frame TXXX at byte 10 claims" in f for f in v["metadata_findings"])
    big = b"ID3\x04\x00\x00\x00\x00\x7f\x7f"  # 16383 bytes claimed, none present
    v = carriers_of(tmp_path, big, "t.mp3")
    assert any("ID3v2 tag claims 16383 bytes" in f for f in v["metadata_findings"])
