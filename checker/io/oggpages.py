"""A small, defensive reader of Ogg pages (RFC 3533): the first packets of the first
logical stream, and the last granule position. Standard library only.

It reads only the head of the file (the pages holding the identification and
comment packets, within a byte budget) and its tail (the last page of the stream),
never the audio between. Every length is checked against the file; a malformed
page (bad capture pattern, version, CRC, a page running past the end) becomes a
finding, never an exception.

Facts used (docs/standards.md#codecs):
- Page header (RFC 3533 section 6): "OggS", version 0, header type (0x01
  continued packet, 0x02 first page, 0x04 last page), granule position (int64 LE),
  serial number, page sequence number, CRC (uint32 LE), segment count, then the
  lacing table; a packet ends at the first lacing value below 255.
- CRC (RFC 3533 section 6, "CRC_checksum"): polynomial 0x04C11DB7, initial value 0,
  no bit reflection, no final XOR, over the whole page with the CRC field as zeros.
- A granule position of -1 marks a page on which no packet ends.

Another module (the containers helper) also reads Ogg granule positions to judge
truncation; the two readers may be unified later.
"""

from __future__ import annotations

import struct
import zlib
from dataclasses import dataclass, field
from typing import BinaryIO

CAPTURE = b"OggS"
HEADER_BYTES = 27
MAX_PAGE_BYTES = HEADER_BYTES + 255 + 255 * 255  # 65,307 (RFC 3533 section 6)
FLAG_CONTINUED, FLAG_FIRST, FLAG_LAST = 0x01, 0x02, 0x04
NO_GRANULE = -1
#: The head read stops after this many bytes of pages (a comment packet holding
#: cover art can be megabytes; the loudness tags sit at its start).
HEAD_BUDGET_BYTES = 4 * 1024 * 1024


#: Each byte with its bits in reverse order (for the Ogg CRC through zlib, below).
_REVERSED_BITS = bytes(int(f"{i:08b}"[::-1], 2) for i in range(256))


def ogg_crc(data: bytes) -> int:
    """The Ogg page checksum of ``data`` (RFC 3533 section 6): CRC-32 with the polynomial
    0x04C11DB7, not reflected, initial value 0, no final xor. Computed by zlib: a CRC over
    bit-reversed bytes with the reflected polynomial is the bit-reversed CRC (zlib's initial
    and final inversions are undone by starting from 0xFFFFFFFF and inverting the result)."""
    reflected = zlib.crc32(data.translate(_REVERSED_BITS), 0xFFFFFFFF) ^ 0xFFFFFFFF
    return int(f"{reflected:032b}"[::-1], 2)


@dataclass(frozen=True)
class Page:
    offset: int
    header_type: int
    granule: int
    serial: int
    sequence: int
    lacing: bytes
    body: bytes

    @property
    def size(self) -> int:
        return HEADER_BYTES + len(self.lacing) + len(self.body)


@dataclass
class OggHead:
    """The first packets of the first logical stream, and what went wrong reading them."""

    serial: int | None = None
    packets: list[bytes] = field(default_factory=list)
    #: True when the last packet in ``packets`` was cut short by the head budget.
    last_packet_capped: bool = False
    other_streams: int = 0
    findings: list[str] = field(default_factory=list)


def read_page(fh: BinaryIO, offset: int, file_size: int) -> tuple[Page | None, str | None]:
    """The page at ``offset``, or (None, a finding)."""
    if offset + HEADER_BYTES > file_size:
        return None, f"Ogg page header at byte {offset} runs past the end of the file"
    fh.seek(offset)
    head = fh.read(HEADER_BYTES)
    if head[:4] != CAPTURE:
        return None, f"no Ogg capture pattern at byte {offset} (expected 'OggS')"
    version, htype, granule, serial, seq, crc, nseg = struct.unpack_from("<BBqIIIB", head, 4)
    if version != 0:
        return None, f"Ogg page at byte {offset}: stream structure version = {version} (expected 0)"
    lacing = fh.read(nseg)
    body_len = sum(lacing)
    end = offset + HEADER_BYTES + nseg + body_len
    if len(lacing) < nseg or end > file_size:
        return None, (
            f"Ogg page at byte {offset} claims {HEADER_BYTES + nseg + body_len} bytes, "
            f"{file_size - offset} present: the file is truncated"
        )
    body = fh.read(body_len)
    raw = head[:22] + b"\0\0\0\0" + head[26:] + lacing + body
    if ogg_crc(raw) != crc:
        return None, f"Ogg page {seq} at byte {offset}: CRC mismatch (a damaged page)"
    return Page(offset, htype, granule, serial, seq, lacing, body), None


def read_head(fh: BinaryIO, file_size: int, packets_wanted: int = 2) -> OggHead:
    """The first ``packets_wanted`` packets of the first logical stream."""
    out = OggHead()
    pos = 0
    partial = bytearray()
    used = 0
    expected_seq = 0
    while len(out.packets) < packets_wanted and pos < file_size:
        page, problem = read_page(fh, pos, file_size)
        if page is None:
            out.findings.append(problem or f"unreadable Ogg page at byte {pos}")
            return out
        pos += page.size
        if out.serial is None:
            if not page.header_type & FLAG_FIRST:
                out.findings.append("the first Ogg page is not marked as a stream's first page")
            out.serial = page.serial
        if page.serial != out.serial:
            if page.header_type & FLAG_FIRST:
                out.other_streams += 1
            continue
        if page.sequence != expected_seq:
            out.findings.append(
                f"Ogg page sequence {page.sequence} at byte {page.offset} (expected "
                f"{expected_seq}): a page is missing"
            )
        expected_seq = page.sequence + 1
        at = 0
        for lace in page.lacing:
            partial += page.body[at : at + lace]
            at += lace
            if lace < 255:
                out.packets.append(bytes(partial))
                partial.clear()
                if len(out.packets) >= packets_wanted:
                    break
        used += page.size
        if used > HEAD_BUDGET_BYTES and len(out.packets) < packets_wanted:
            out.packets.append(bytes(partial))
            out.last_packet_capped = True
            break
    if len(out.packets) < packets_wanted and not out.last_packet_capped and not out.findings:
        out.findings.append(
            f"the Ogg stream ends after {len(out.packets)} header packet(s) "
            f"(expected at least {packets_wanted})"
        )
    if out.other_streams:
        out.findings.append(
            f"{out.other_streams} further logical stream(s) multiplexed in the Ogg file: "
            "only the first was read"
        )
    return out


def last_granule(fh: BinaryIO, file_size: int, serial: int) -> tuple[int | None, bool, str | None]:
    """(granule position of the stream's last complete page, its end-of-stream flag, a finding).

    Reads at most the file's last 64 KiB and a page; searches backwards for a page of
    ``serial`` with a valid CRC and a granule position other than -1."""
    start = max(0, file_size - MAX_PAGE_BYTES - HEADER_BYTES)
    fh.seek(start)
    tail = fh.read(file_size - start)
    at = len(tail)
    while True:
        at = tail.rfind(CAPTURE, 0, at)
        if at < 0:
            return None, False, "no complete Ogg page found at the end of the file"
        page, _problem = read_page(fh, start + at, file_size)
        if page is not None and page.serial == serial and page.granule != NO_GRANULE:
            eos = bool(page.header_type & FLAG_LAST)
            note = None
            if start + at + page.size < file_size:
                note = (
                    f"{file_size - start - at - page.size} bytes after the last complete Ogg "
                    "page: the file is truncated or has trailing bytes"
                )
            elif not eos:
                note = "the last Ogg page is not marked end-of-stream: the file may be truncated"
            return page.granule, eos, note
