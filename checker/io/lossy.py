"""Stream facts of lossy deliverables: codec, bit rate, encoder delay and padding, the
gapless length, read from the bytes (not from the decoder). Standard library only.

- MP3 (MPEG-1/2/2.5 audio, ISO/IEC 11172-3 and 13818-3 frame headers): the first frame
  header after any ID3v2 tag; the encoder information tag in the first frame ("Xing"
  for variable, "Info" for constant bit rate, or "VBRI"), and the LAME extension after
  it: encoder string, method, 12-bit encoder delay and 12-bit padding (samples).
  Gapless length = frames x samples per frame - delay - padding, where the tag's frame
  count excludes the tag's own frame (measured: equals what libsndfile 1.2.2 decodes
  for files LAME 3.100 wrote through libsndfile, at 22.05, 44.1 and 48 kHz).
- Ogg Vorbis (Vorbis I 4.2.2): nominal / minimum / maximum bit rates in the
  identification header; gapless length = the last granule position.
- Ogg Opus (RFC 7845 5.1, 4): pre-skip (48 kHz samples) in the identification header;
  gapless length = last granule position - pre-skip (48 kHz units, scaled to the
  decoding rate).

libsndfile decodes the gapless programme itself (the measured length equals the
gapless length above for every libsndfile-written test file), so the meters, durations
and head/tail silence already see the gapless programme; ``gapless_mismatch_frames``
(decoded minus gapless) shows when a decoder disagrees with the file's own data.
"""

from __future__ import annotations

import os
import struct
from typing import Any, BinaryIO

from checker.io import oggpages

LOSSY_KEYS: tuple[str, ...] = (
    "codec",
    "bit_rate_kbps",
    "bit_rate_mode",
    "channel_mode",
    "encoder",
    "encoder_delay_frames",
    "encoder_padding_frames",
    "gapless_frames",
    "gapless_duration_s",
    "gapless_mismatch_frames",
    "lossy_findings",
)

SUBTYPE_CODECS = {
    "MPEG_LAYER_III": "mp3",
    "MPEG_LAYER_II": "mp2",
    "MPEG_LAYER_I": "mp1",
    "VORBIS": "vorbis",
    "OPUS": "opus",
}

# ISO/IEC 11172-3 2.4.2.3 and 13818-3: bit rate index -> kbit/s, per version and layer
_BR_V1 = {
    1: (0, 32, 64, 96, 128, 160, 192, 224, 256, 288, 320, 352, 384, 416, 448),
    2: (0, 32, 48, 56, 64, 80, 96, 112, 128, 160, 192, 224, 256, 320, 384),
    3: (0, 32, 40, 48, 56, 64, 80, 96, 112, 128, 160, 192, 224, 256, 320),
}
_BR_V2 = {
    1: (0, 32, 48, 56, 64, 80, 96, 112, 128, 144, 160, 176, 192, 224, 256),
    2: (0, 8, 16, 24, 32, 40, 48, 56, 64, 80, 96, 112, 128, 144, 160),
    3: (0, 8, 16, 24, 32, 40, 48, 56, 64, 80, 96, 112, 128, 144, 160),
}
_RATES = {3: (44100, 48000, 32000), 2: (22050, 24000, 16000), 0: (11025, 12000, 8000)}
_MODES = ("stereo", "joint stereo", "dual channel", "mono")
#: LAME extension "method" nibble -> bit rate mode (from memory: LAME tag rev. 1).
_LAME_METHODS = {1: "constant", 8: "constant", 2: "average", 9: "average"}
SYNC_SEARCH_BYTES = 64 * 1024


def empty_lossy_values() -> dict[str, Any]:
    out: dict[str, Any] = dict.fromkeys(LOSSY_KEYS)
    out["lossy_findings"] = []
    return out


def read_lossy(path: str, subtype: str, container: str, rate_hz: int, channels: int, bits):
    """The lossy keys for one file; for PCM and FLAC only codec and bit rate."""
    out = empty_lossy_values()
    codec = SUBTYPE_CODECS.get(subtype)
    findings: list[str] = out["lossy_findings"]
    try:
        with open(path, "rb") as fh:
            size = os.fstat(fh.fileno()).st_size
            if codec in ("mp3", "mp2", "mp1"):
                _mpeg(fh, size, out, findings)
            elif codec in ("vorbis", "opus"):
                _ogg(fh, size, codec, rate_hz, out, findings)
    except OSError as exc:
        findings.append(f"stream data not read: {exc.strerror or exc}")
    if codec is None and container == "FLAC":
        codec = "flac"  # variable by nature: no nominal bit rate
    elif codec is None:
        codec = "pcm" if subtype.startswith("PCM") else subtype.lower()  # "float", "double"
        if bits:
            out["bit_rate_kbps"] = rate_hz * channels * bits / 1000.0
            out["bit_rate_mode"] = "constant"
    out["codec"] = out["codec"] or codec
    if out["gapless_frames"] is not None:
        out["gapless_duration_s"] = out["gapless_frames"] / rate_hz
    return out


def finish_lossy(values: dict[str, Any], decoded_frames: int) -> None:
    """Compare the gapless length with what the decoder gave (after the pass)."""
    gapless = values.get("gapless_frames")
    if not isinstance(gapless, int):
        return
    diff = decoded_frames - gapless
    values["gapless_mismatch_frames"] = diff
    if diff:
        values["lossy_findings"].append(
            f"the decoder gave {decoded_frames} frames, the stream's own data says "
            f"{gapless} (gapless length; {diff:+d} frames): durations and silence at the "
            "ends follow the decoder"
        )


# ---------------------------------------------------------------- MPEG audio


def _mpeg_header(b: bytes) -> dict[str, int] | None:
    """Fields of a 4-byte frame header, or None when it is not a valid header."""
    if len(b) < 4 or b[0] != 0xFF or (b[1] & 0xE0) != 0xE0:
        return None
    version, layer_bits = (b[1] >> 3) & 3, (b[1] >> 1) & 3
    br_index, sr_index = b[2] >> 4, (b[2] >> 2) & 3
    if version == 1 or layer_bits == 0 or br_index in (0, 15) or sr_index == 3:
        return None  # reserved values; free format (index 0) is not followed
    layer = 4 - layer_bits
    table = _BR_V1 if version == 3 else _BR_V2
    kbps = table[layer][br_index]
    rate = _RATES[version][sr_index]
    pad = (b[2] >> 1) & 1
    if layer == 1:
        length, spf = (12 * kbps * 1000 // rate + pad) * 4, 384
    elif layer == 3 and version != 3:
        length, spf = 72 * kbps * 1000 // rate + pad, 576
    else:
        length, spf = 144 * kbps * 1000 // rate + pad, 1152
    return {
        "version": version,
        "layer": layer,
        "kbps": kbps,
        "rate": rate,
        "length": length,
        "spf": spf,
        "mode": b[3] >> 6,
        "crc": 0 if b[1] & 1 else 2,
    }


def _skip_id3v2(fh: BinaryIO, size: int, findings: list[str]) -> int:
    """Offset after any ID3v2 tags: "ID3", version (2), flags, syncsafe size (ID3v2.4 3.1)."""
    pos = 0
    for _ in range(8):
        fh.seek(pos)
        head = fh.read(10)
        if len(head) < 10 or head[:3] != b"ID3":
            return pos
        if any(x & 0x80 for x in head[6:10]):
            findings.append(f"ID3v2 tag at byte {pos}: size is not syncsafe")
            return pos
        tag_size = (head[6] << 21) | (head[7] << 14) | (head[8] << 7) | head[9]  # syncsafe
        pos += 10 + tag_size + (10 if head[5] & 0x10 else 0)
        if pos > size:
            findings.append(f"ID3v2 tag claims {tag_size} bytes, more than the file holds")
            return size
    return pos


def _find_frame(fh: BinaryIO, start: int, size: int) -> tuple[int, dict[str, int]] | None:
    """The first frame header at or after ``start`` followed by another valid header."""
    fh.seek(start)
    buf = fh.read(SYNC_SEARCH_BYTES + 4)
    at = buf.find(b"\xff")
    while 0 <= at < len(buf) - 3:
        hdr = _mpeg_header(buf[at : at + 4])
        if hdr is not None:
            nxt = start + at + hdr["length"]
            fh.seek(nxt)
            follow = _mpeg_header(fh.read(4))
            if nxt >= size or (
                follow is not None
                and (follow["version"], follow["layer"]) == (hdr["version"], hdr["layer"])
            ):
                return start + at, hdr
        at = buf.find(b"\xff", at + 1)
    return None


def _mpeg(fh: BinaryIO, size: int, out: dict[str, Any], findings: list[str]) -> None:
    start = _skip_id3v2(fh, size, findings)
    found = _find_frame(fh, start, size)
    if found is None:
        findings.append(
            f"no MPEG audio frame header in the {SYNC_SEARCH_BYTES} bytes after the tags"
        )
        return
    pos, hdr = found
    if pos > start:
        findings.append(f"{pos - start} bytes before the first MPEG audio frame are not audio")
    out["codec"] = {1: "mp1", 2: "mp2", 3: "mp3"}[hdr["layer"]]
    out["channel_mode"] = _MODES[hdr["mode"]]
    out["bit_rate_kbps"] = float(hdr["kbps"])
    fh.seek(pos)
    frame = fh.read(min(hdr["length"], size - pos))
    side = (
        (32 if hdr["mode"] != 3 else 17) if hdr["version"] == 3 else (17 if hdr["mode"] != 3 else 9)
    )
    x = 4 + hdr["crc"] + side
    if hdr["layer"] == 3 and frame[x : x + 4] in (b"Xing", b"Info"):
        _xing(frame, x, hdr, size - pos, out, findings)
    elif frame[36:40] == b"VBRI":
        _vbri(frame, hdr, out, findings)
    else:
        out["bit_rate_mode"] = "constant"
        findings.append(
            "no encoder information tag (Xing/Info/VBRI) in the first MPEG frame: bit rate "
            "from the first frame only; encoder delay, padding and the gapless length unknown"
        )


def _xing(frame: bytes, x: int, hdr, audio_bytes: int, out, findings) -> None:
    if len(frame) < x + 8:
        findings.append("the Xing/Info tag is cut short by the end of its frame")
        return
    tag = frame[x : x + 4]
    flags = struct.unpack_from(">I", frame, x + 4)[0]
    at = x + 8
    frames = nbytes = None
    for bit, width in ((1, 4), (2, 4), (4, 100), (8, 4)):
        if not flags & bit:
            continue
        if at + width > len(frame):
            findings.append("the Xing/Info tag runs past the end of its frame")
            return
        if bit == 1:
            frames = struct.unpack_from(">I", frame, at)[0]
        elif bit == 2:
            nbytes = struct.unpack_from(">I", frame, at)[0]
        at += width
    mode = "constant" if tag == b"Info" else "variable"
    lame = frame[at : at + 36] if len(frame) >= at + 36 else b""
    delay = padding = None
    if lame[:4] in (b"LAME", b"Lavc", b"Lavf", b"L3.9"):
        out["encoder"] = lame[:9].decode("latin-1").rstrip("\0 ")
        mode = _LAME_METHODS.get(lame[9] & 0x0F, mode)
        d = lame[21:24]
        delay, padding = (d[0] << 4) | (d[1] >> 4), ((d[1] & 0x0F) << 8) | d[2]
        out["encoder_delay_frames"], out["encoder_padding_frames"] = delay, padding
    out["bit_rate_mode"] = mode
    if frames is None:
        findings.append("the Xing/Info tag gives no frame count: the gapless length is unknown")
        return
    length_s = frames * hdr["spf"] / hdr["rate"]
    if mode != "constant" and length_s > 0:
        total = nbytes if nbytes else audio_bytes
        out["bit_rate_kbps"] = round(total * 8 / length_s / 1000.0, 1)
    gapless = frames * hdr["spf"] - (delay or 0) - (padding or 0)
    if gapless < 0:
        findings.append(
            f"encoder delay {delay} + padding {padding} exceed the {frames} frames' samples"
        )
        return
    out["gapless_frames"] = gapless
    if delay is None:
        findings.append("no encoder extension after the Xing/Info tag: delay and padding unknown")


def _vbri(frame: bytes, hdr, out, findings) -> None:
    """Fraunhofer VBRI at byte 36: version, delay, quality (WORDs), bytes, frames (DWORDs)
    (from memory)."""
    if len(frame) < 54:
        findings.append("the VBRI tag is cut short by the end of its frame")
        return
    _ver, delay, _q, nbytes, frames = struct.unpack_from(">HHHII", frame, 40)
    out["bit_rate_mode"] = "variable"
    out["encoder"] = "VBRI"
    out["encoder_delay_frames"] = delay
    if frames:
        length_s = frames * hdr["spf"] / hdr["rate"]
        out["bit_rate_kbps"] = round(nbytes * 8 / length_s / 1000.0, 1)
        out["gapless_frames"] = max(frames * hdr["spf"] - delay, 0)
        findings.append("VBRI tag gives no padding: the gapless length includes it")


# ---------------------------------------------------------------- Ogg Vorbis and Opus


def _ogg(fh: BinaryIO, size: int, codec: str, rate_hz: int, out, findings) -> None:
    head = oggpages.read_head(fh, size, packets_wanted=2)
    findings.extend(head.findings)
    if not head.packets or head.serial is None:
        return
    ident = head.packets[0]
    granule, _eos, note = oggpages.last_granule(fh, size, head.serial)
    if note:
        findings.append(note)
    if len(head.packets) > 1:
        out["encoder"] = _vendor(head.packets[1], 8 if codec == "opus" else 7)
    if codec == "opus":
        if len(ident) < 19 or not ident.startswith(b"OpusHead"):
            findings.append("the first Ogg packet is not a valid OpusHead (RFC 7845 5.1)")
            return
        pre_skip = struct.unpack_from("<H", ident, 10)[0]
        scale = rate_hz / 48000.0
        out["encoder_delay_frames"] = round(pre_skip * scale)
        if granule is not None:
            if granule < pre_skip:
                findings.append(f"last granule position {granule} is below the pre-skip {pre_skip}")
            else:
                out["gapless_frames"] = round((granule - pre_skip) * scale)
                dur = (granule - pre_skip) / 48000.0
                if dur > 0:
                    out["bit_rate_kbps"] = round(size * 8 / dur / 1000.0, 1)
                    out["bit_rate_mode"] = "average over the file"
    else:
        if len(ident) < 30 or not ident.startswith(b"\x01vorbis"):
            findings.append("the first Ogg packet is not a Vorbis identification header")
            return
        hi, nominal, lo = struct.unpack_from("<iii", ident, 16)
        if nominal > 0:
            out["bit_rate_kbps"] = nominal / 1000.0
        out["bit_rate_mode"] = "constant" if hi == lo == nominal > 0 else "variable"
        if granule is not None:
            out["gapless_frames"] = granule


def _vendor(packet: bytes, at: int) -> str | None:
    if len(packet) < at + 4:
        return None
    n = struct.unpack_from("<I", packet, at)[0]
    if n > 256 or at + 4 + n > len(packet):
        return None
    return packet[at + 4 : at + 4 + n].decode("utf-8", errors="replace")
