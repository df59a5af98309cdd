"""Declared loudness in every metadata carrier a file may hold, besides bext.

- WAV ``iXML`` chunk: loudness fields (the bext mirror ``BWF_LOUDNESS_VALUE`` ... and a
  ``LOUDNESS`` block ``LOUDNESS_VALUE`` ...).
- WAV ``axml`` chunk: ADM ``loudnessMetadata`` (ITU-R BS.2076): integratedLoudness,
  loudnessRange, maxTruePeak, maxMomentary, maxShortTerm, dialogLoudness.
- Vorbis comments (Ogg Vorbis, FLAC) and ID3v2 ``TXXX`` frames (MP3):
  ``REPLAYGAIN_TRACK_GAIN`` / ``_ALBUM_GAIN`` / ``_PEAK``.
- Opus (RFC 7845): the identification header's output gain and the ``R128_TRACK_GAIN`` /
  ``R128_ALBUM_GAIN`` comments (Q7.8 dB relative to -23 LUFS).

Readers of our own, standard library only. Every length field is checked against the
bytes present; a malformed carrier becomes a finding (plain words), never an exception.
The WAV XML chunks are read by checker.io.xmlchunks (no document type declarations, a size cap).

Player gain tags give the loudness a player applying them would produce
(``player_track_integrated_lufs``: measured integrated loudness + track gain). libsndfile
applies the Opus output gain when it decodes (measured: a +6 dB header gain raised the
decoded peak by 6.00 dB), so the measured loudness of an Opus file already includes it.
"""

from __future__ import annotations

import math
import os
import re
import struct
from typing import Any, BinaryIO

from checker.io import oggpages
from checker.io.wavchunks import WavHeader
from checker.io.xmlchunks import MAX_XML_BYTES, plausible_number, wav_xml

#: Comments longer than this are skipped (cover art), their length still checked.
MAX_COMMENT_BYTES = 4096
MAX_COMMENTS = 10_000

#: R128 gain tags are relative to this level (RFC 7845 section 5.2.1).
R128_REFERENCE_LUFS = -23.0
#: ReplayGain 2.0 reference level (common practice; from memory).
REPLAYGAIN_REFERENCE_LUFS = -18.0

#: Quantity suffixes of the five bext-like loudness statements (same as bext's keys).
QUANTITIES = (
    "integrated_lufs",
    "loudness_range_lu",
    "true_peak_dbtp",
    "max_momentary_lufs",
    "max_short_term_lufs",
)

IXML_KEYS = tuple(f"declared_ixml_{q}" for q in QUANTITIES)
AXML_KEYS = (*(f"declared_axml_{q}" for q in QUANTITIES), "declared_axml_dialogue_lufs")
GAIN_KEYS = (
    "opus_output_gain_db",
    "r128_track_gain_db",
    "r128_album_gain_db",
    "replaygain_track_gain_db",
    "replaygain_album_gain_db",
    "replaygain_track_peak_dbfs",
    "replaygain_album_peak_dbfs",
)
CARRIER_KEYS: tuple[str, ...] = (
    "declared_carriers",
    *IXML_KEYS,
    *AXML_KEYS,
    *GAIN_KEYS,
    "gain_tag_carrier",
    "declared_gain_tag_integrated_lufs",
    "player_track_integrated_lufs",
    "player_album_integrated_lufs",
    "metadata_findings",
)

_COMMENT_TAGS = {
    "R128_TRACK_GAIN": "r128_track_gain_db",
    "R128_ALBUM_GAIN": "r128_album_gain_db",
    "REPLAYGAIN_TRACK_GAIN": "replaygain_track_gain_db",
    "REPLAYGAIN_ALBUM_GAIN": "replaygain_album_gain_db",
    "REPLAYGAIN_TRACK_PEAK": "replaygain_track_peak_dbfs",
    "REPLAYGAIN_ALBUM_PEAK": "replaygain_album_peak_dbfs",
}


def empty_carrier_values() -> dict[str, Any]:
    out: dict[str, Any] = dict.fromkeys(CARRIER_KEYS)
    out["declared_carriers"] = []
    out["metadata_findings"] = []
    return out


def read_carriers(path: str, header: WavHeader | None) -> dict[str, Any]:
    """The carrier keys for ``path`` (every key present; None where not declared)."""
    out = empty_carrier_values()
    carriers: list[str] = out["declared_carriers"]
    findings: list[str] = out["metadata_findings"]
    if header is not None and any(v is not None for v in header.declared.values()):
        carriers.append("bext")
    try:
        with open(path, "rb") as fh:
            size = os.fstat(fh.fileno()).st_size
            if header is not None:
                wav_xml(fh, header, out, carriers, findings)
            else:
                magic = fh.read(4)
                if magic == oggpages.CAPTURE:
                    _ogg(fh, size, out, carriers, findings)
                elif magic == b"fLaC":
                    _flac(fh, size, out, carriers, findings)
                elif magic[:3] == b"ID3":
                    _id3(fh, size, out, carriers, findings)
    except OSError as exc:  # the audio reader reports an unreadable file on its own
        findings.append(f"metadata not read: {exc.strerror or exc}")
    _derive_tag_loudness(out)
    return out


def add_player_loudness(values: dict[str, Any]) -> None:
    """The loudness a player applying the gain tags would produce (needs the measurement)."""
    m = values.get("integrated_lufs")
    ok = isinstance(m, float) and math.isfinite(m)
    for tag, key in (
        ("track", "player_track_integrated_lufs"),
        ("album", "player_album_integrated_lufs"),
    ):
        gain = _tag_gain(values, tag)
        values[key] = round(m + gain, 2) if ok and gain is not None else None


# ---------------------------------------------------------------- Ogg and FLAC


def _ogg(fh: BinaryIO, size: int, out, carriers, findings) -> None:
    head = oggpages.read_head(fh, size, packets_wanted=2)
    findings.extend(head.findings)
    if not head.packets:
        return
    first = head.packets[0]
    if first.startswith(b"OpusHead"):
        gain = opus_output_gain_db(first, findings)
        if gain is not None:
            out["opus_output_gain_db"] = gain
            if gain != 0.0:
                carriers.append("opus header")
        if len(head.packets) > 1:
            tags = head.packets[1]
            if not tags.startswith(b"OpusTags"):
                findings.append("the second Opus packet is not an OpusTags header (RFC 7845 5.2)")
                return
            _comments(tags, 8, "OpusTags", head.last_packet_capped, out, carriers, findings)
    elif first.startswith(b"\x01vorbis") and len(head.packets) > 1:
        tags = head.packets[1]
        if not tags.startswith(b"\x03vorbis"):
            findings.append("the second Vorbis packet is not a comment header")
            return
        where = "Vorbis comment header"
        _comments(tags, 7, where, head.last_packet_capped, out, carriers, findings)


def opus_output_gain_db(packet: bytes, findings: list[str]) -> float | None:
    """The ID header's output gain (RFC 7845 section 5.1: int16 LE at byte 16, Q7.8 dB)."""
    if len(packet) < 19:
        findings.append(f"OpusHead packet is {len(packet)} bytes (expected at least 19)")
        return None
    return struct.unpack_from("<h", packet, 16)[0] / 256.0


def _flac(fh: BinaryIO, size: int, out, carriers, findings) -> None:
    """FLAC metadata blocks: 1 byte (last flag, type), 24-bit BE length; type 4 holds a
    Vorbis comment block without the framing bit (FLAC format, METADATA_BLOCK_HEADER)."""
    pos = 4
    for _ in range(1024):
        if pos + 4 > size:
            findings.append(f"FLAC metadata block header at byte {pos} runs past the end")
            return
        fh.seek(pos)
        b = fh.read(4)
        last, kind, length = b[0] & 0x80, b[0] & 0x7F, int.from_bytes(b[1:4], "big")
        if pos + 4 + length > size:
            findings.append(
                f"FLAC metadata block (type {kind}) at byte {pos} claims {length} bytes, "
                f"{size - pos - 4} present"
            )
            return
        if kind == 4:
            capped = length > oggpages.HEAD_BUDGET_BYTES
            block = fh.read(min(length, oggpages.HEAD_BUDGET_BYTES))
            _comments(block, 0, "FLAC Vorbis comment block", capped, out, carriers, findings)
            return
        if last:
            return
        pos += 4 + length


def _comments(data: bytes, at: int, where: str, capped: bool, out, carriers, findings) -> None:
    """A Vorbis comment list (Vorbis I section 5.2.1; RFC 7845 section 5.2): vendor length
    (uint32 LE), vendor, count (uint32 LE), then per comment a uint32 LE length and
    "NAME=value" in UTF-8."""
    end = len(data)

    def short(what: str) -> None:
        if not capped:
            findings.append(f"{where}: {what} runs past the end of the packet ({end} bytes)")

    if at + 4 > end:
        return short("the vendor length")
    vlen = struct.unpack_from("<I", data, at)[0]
    at += 4 + vlen
    if at + 4 > end:
        return short(f"the vendor string ({vlen} bytes)")
    count = struct.unpack_from("<I", data, at)[0]
    at += 4
    if count > MAX_COMMENTS:
        findings.append(f"{where}: {count} comments claimed (read the first {MAX_COMMENTS})")
    seen: set[str] = set()
    for i in range(min(count, MAX_COMMENTS)):
        if at + 4 > end:
            return short(f"comment {i + 1} of {count}")
        clen = struct.unpack_from("<I", data, at)[0]
        at += 4
        if at + clen > end:
            return short(f"comment {i + 1} of {count} ({clen} bytes)")
        if clen <= MAX_COMMENT_BYTES:
            _one_comment(data[at : at + clen], where, seen, out, findings)
        at += clen
    if seen:
        label = {"OpusTags": "opus tags"}.get(where, "vorbis comment")
        if label not in carriers:
            carriers.append(label)
        out["gain_tag_carrier"] = where
    if where == "OpusTags" and any(k.startswith("REPLAYGAIN_") for k in seen):
        findings.append(
            "OpusTags holds REPLAYGAIN_* tags, which Opus players ignore (RFC 7845 5.2.1 "
            "asks for R128_TRACK_GAIN / R128_ALBUM_GAIN)"
        )


def _one_comment(raw: bytes, where: str, seen: set[str], out, findings) -> None:
    text = raw.decode("utf-8", errors="replace")
    name, eq, value = text.partition("=")
    name = name.upper()
    key = _COMMENT_TAGS.get(name)
    if not eq or key is None:
        return
    if name in seen:
        findings.append(f"{where}: {name} appears more than once (the first is used)")
        return
    seen.add(name)
    v = _tag_value(name, value.strip(), f"{where}: {name}", findings)
    if v is not None:
        out[key] = v


_DB_VALUE = re.compile(r"^([+-]?\d+(?:\.\d+)?)\s*(?:dB)?$", re.I)


def _tag_value(name: str, value: str, where: str, findings: list[str]) -> float | None:
    if name.startswith("R128_"):
        # RFC 7845 5.2.1: a signed decimal integer, Q7.8 dB (value / 256), no unit
        if not re.fullmatch(r"[+-]?\d{1,6}", value):
            findings.append(f"{where} = {value[:40]!r} (expected a Q7.8 integer, e.g. -512)")
            return None
        return int(value) / 256.0
    if name.endswith("_PEAK"):
        try:
            peak = float(value)
        except ValueError:
            peak = math.nan
        if not math.isfinite(peak) or peak < 0:
            findings.append(f"{where} = {value[:40]!r} (expected a linear peak, e.g. 0.891)")
            return None
        return -math.inf if peak == 0 else round(20 * math.log10(peak), 2)
    match = _DB_VALUE.match(value)
    if match is None:
        findings.append(f"{where} = {value[:40]!r} (expected a gain such as '-6.50 dB')")
        return None
    return plausible_number(match.group(1), where, findings)


def _tag_gain(values: dict[str, Any], tag: str) -> float | None:
    """The gain a player applies for ``tag``: R128 in Opus (players ignore ReplayGain
    there, RFC 7845 5.2.1), ReplayGain elsewhere."""
    opus = values.get("gain_tag_carrier") == "OpusTags"
    keys = (f"r128_{tag}_gain_db",) if opus else (f"replaygain_{tag}_gain_db",)
    for key in keys:
        gain = values.get(key)
        if isinstance(gain, float):
            return gain
    return None


def _derive_tag_loudness(out: dict[str, Any]) -> None:
    """The integrated loudness the track gain tag implies: reference minus gain."""
    gain = _tag_gain(out, "track")
    if gain is not None:
        opus = out.get("gain_tag_carrier") == "OpusTags"
        ref = R128_REFERENCE_LUFS if opus else REPLAYGAIN_REFERENCE_LUFS
        out["declared_gain_tag_integrated_lufs"] = round(ref - gain, 4)


# ---------------------------------------------------------------- ID3v2 (MP3)


def _id3(fh: BinaryIO, size: int, out, carriers, findings) -> None:
    """TXXX frames of an ID3v2.3 / 2.4 tag (ID3v2.4.0 structure 3.1 and 4; frames 4.2.6):
    header "ID3", version, flags, syncsafe size; frames of 4-byte id, size (syncsafe in
    2.4), 2 flag bytes; TXXX = encoding byte, description, value."""
    fh.seek(0)
    head = fh.read(10)
    if len(head) < 10 or any(b & 0x80 for b in head[6:10]):
        findings.append("ID3v2 tag header: size is not syncsafe (tag not read)")
        return
    version, flags = head[3], head[5]
    tag_size = _syncsafe(head[6:10])
    if version not in (3, 4):
        return  # ID3v2.2 (3-character frame ids) is not read
    if 10 + tag_size > size:
        findings.append(f"ID3v2 tag claims {tag_size} bytes, {size - 10} present (tag not read)")
        return
    if tag_size > MAX_XML_BYTES:
        findings.append(f"ID3v2 tag of {tag_size} bytes (over {MAX_XML_BYTES}): not read")
        return
    body = fh.read(tag_size)
    if flags & 0x80 and version == 3:
        body = body.replace(b"\xff\x00", b"\xff")  # whole-tag unsynchronisation (2.3)
    pos = 0
    if flags & 0x40 and len(body) >= 4:  # extended header
        ext = struct.unpack_from(">I", body, 0)[0]
        pos = _syncsafe(body[0:4]) if version == 4 else ext + 4
    where = "ID3v2 TXXX"
    seen: set[str] = set()
    while pos + 10 <= len(body) and body[pos] != 0:
        fid, raw_size, fflags = (
            body[pos : pos + 4],
            body[pos + 4 : pos + 8],
            body[pos + 8 : pos + 10],
        )
        fsize = _syncsafe(raw_size) if version == 4 else int.from_bytes(raw_size, "big")
        start = pos + 10
        if start + fsize > len(body):
            findings.append(
                f"ID3v2 frame {_printable(fid)} at byte {10 + pos} claims {fsize} bytes, "
                f"{len(body) - start} left in the tag"
            )
            break
        if fid == b"TXXX" and not (version == 4 and fflags[1] & 0x0F):
            text = _txxx(body[start : start + fsize])
            if text is not None:
                _one_comment(text.encode("utf-8"), where, seen, out, findings)
        pos = start + fsize
    if seen:
        if "id3v2 txxx" not in carriers:
            carriers.append("id3v2 txxx")
        out["gain_tag_carrier"] = where


def _syncsafe(b: bytes) -> int:
    """A syncsafe integer: 7 bits per byte, most significant first (ID3v2.4.0 6.2)."""
    n = 0
    for x in b:
        n = (n << 7) | (x & 0x7F)
    return n


def _printable(b: bytes) -> str:
    return "".join(chr(x) if 0x20 <= x < 0x7F else "?" for x in b)


def _txxx(data: bytes) -> str | None:
    """'DESCRIPTION=value' of a TXXX frame body, or None when unreadable."""
    if not data:
        return None
    enc, rest = data[0], data[1:]
    codec = {0: "latin-1", 1: "utf-16", 2: "utf-16-be", 3: "utf-8"}.get(enc)
    if codec is None:
        return None
    if enc in (1, 2):
        cut = next((i for i in range(0, len(rest) - 1, 2) if rest[i : i + 2] == b"\0\0"), -1)
        desc, value = (rest[:cut], rest[cut + 2 :]) if cut >= 0 else (rest, b"")
        vcodec = "utf-16" if enc == 1 else codec
    else:
        desc, _, value = rest.partition(b"\0")
        vcodec = codec
    try:
        return f"{desc.decode(codec)}={value.decode(vcodec).strip(chr(0))}"
    except UnicodeDecodeError:
        return None
