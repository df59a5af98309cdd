"""The length a FLAC or Ogg stream declares, and what its last frame or page shows.

FLAC: STREAMINFO's 36-bit total samples is the declared length; libsndfile stops
decoding there, so a STREAMINFO that understates the length hides the rest of the
audio. The last valid frame header near the end of the file (sync code, fields
consistent with STREAMINFO, CRC-8 of the header) gives the frames the file holds:
its first sample plus its block size (``frames_held``). When that is more than
declared, measure() decodes the file with the total marked unknown
(``FlacUnknownLength``), so every frame is measured and the difference reported.

Ogg: the granule position of the last complete page is the length (Vorbis: frames;
Opus: 48 kHz samples after the OpusHead pre-skip; FLAC in Ogg: frames). A file whose
last bytes are not a complete page, or whose last page lacks the end-of-stream flag,
was cut.

Layouts (see docs/standards.md#containers): FLAC metadata block header = 1 bit
last-block flag, 7 bits type, 24-bit length; STREAMINFO (type 0, 34 bytes) = min/max
block size (16 bits each), min/max frame size (24 bits each), then 20 bits rate, 3 bits
channels - 1, 5 bits bits - 1, 36 bits total samples, 16 bytes MD5. Frame header = sync
0xFFF8 (fixed block size: a frame number follows) or 0xFFF9 (variable: a sample number),
block-size and rate codes, channel assignment and sample size, the UTF-8-style coded
number, optional 8/16-bit block size and rate, CRC-8 (polynomial 0x07). Ogg page =
"OggS", version 0, flags (0x04 end of stream), granule int64, serial, sequence, CRC-32
(polynomial 0x04C11DB7, not reflected, computed with the CRC field zeroed), segment
count and table, body.
"""

from __future__ import annotations

import io
import struct
from typing import BinaryIO

from checker.io.lengths import CUT_SHORT, TRUNCATED, ContainerLength
from checker.io.oggpages import ogg_crc
from checker.io.sniff import id3_end

#: Bytes at the end of a FLAC searched for the last frame header (at least; more when
#: STREAMINFO's maximum frame size is larger), and never more than this.
FLAC_TAIL_BYTES = 1 << 16
FLAC_TAIL_MAX_BYTES = 1 << 24
#: The largest Ogg page: 27-byte header, 255 lacing values, 255 x 255 body bytes.
OGG_MAX_PAGE = 27 + 255 + 255 * 255
#: Byte range of STREAMINFO's 36-bit total samples after the "fLaC" marker's position.
TOTAL_OFFSET = 4 + 4 + 13  # marker, block header, 13 bytes before the total's low nibble


def crc8(data: bytes) -> int:
    crc = 0
    for byte in data:
        crc ^= byte
        for _ in range(8):
            crc = ((crc << 1) ^ 0x07) & 0xFF if crc & 0x80 else (crc << 1) & 0xFF
    return crc


def _id3_skip(fh: BinaryIO) -> int:
    """Bytes of an ID3v2 tag in front of the "fLaC" marker (0 when there is none)."""
    fh.seek(0)
    return id3_end(fh.read(10)) or 0


def read_flac(fh: BinaryIO, file_size: int) -> ContainerLength:
    start = _id3_skip(fh)
    fh.seek(start)
    if fh.read(4) != b"fLaC":
        return ContainerLength("FLAC", None, ("no 'fLaC' marker after the ID3 tag",))
    findings: list[str] = []
    info = None
    pos, last = start + 4, False
    while not last:
        fh.seek(pos)
        hdr = fh.read(4)
        if len(hdr) < 4:
            findings.append(f"the metadata blocks end before the audio: {TRUNCATED}")
            return ContainerLength("FLAC", None, tuple(findings))
        last, kind = bool(hdr[0] & 0x80), hdr[0] & 0x7F
        length = int.from_bytes(hdr[1:4], "big")
        if pos + 4 + length > file_size:
            findings.append(
                f"FLAC metadata block (type {kind}) claims {length} bytes, "
                f"{max(file_size - pos - 4, 0)} present: {TRUNCATED}"
            )
            return ContainerLength("FLAC", None, tuple(findings))
        if kind == 0 and info is None and length >= 34:
            info = fh.read(34)
        pos += 4 + length
    if info is None:
        return ContainerLength("FLAC", None, ("no STREAMINFO block: the length is unknown",))
    max_block = struct.unpack_from(">H", info, 2)[0]
    max_frame = int.from_bytes(info[7:10], "big")
    packed = int.from_bytes(info[10:18], "big")
    channels = ((packed >> 41) & 0x7) + 1
    total = packed & 0xFFFFFFFFF
    if total == 0:
        return ContainerLength("FLAC", None, tuple(findings))  # "unknown": read to the end
    # The last frame is at most max_frame bytes long (0: not given, so look further back).
    window = min(max(FLAC_TAIL_BYTES, 2 * max_frame if max_frame else 16 * FLAC_TAIL_BYTES),
                 FLAC_TAIL_MAX_BYTES)  # fmt: skip
    lo = max(pos, file_size - window)
    fh.seek(lo)
    ends = _frame_ends(fh.read(file_size - lo), max_block, channels)
    # The true last frame ends exactly at the total in a consistent file; a stray match
    # inside frame data can only come after it, so any exact match settles it.
    held = total if total in ends else max(ends, default=None)
    if held is not None and held < total:
        findings.append(
            f"STREAMINFO declares {total} frames, the last frame header near the end of the "
            f"file ends at frame {held}: {TRUNCATED}"
        )
    return ContainerLength("FLAC", total, tuple(findings), frames_held=held)


_BLOCK_CODES = {1: 192, 2: 576, 3: 1152, 4: 2304, 5: 4608}


def _frame_ends(tail: bytes, max_block: int, channels: int) -> set[int]:
    """First sample + block size of every valid frame header in ``tail``."""
    ends = set()
    for sync in (b"\xff\xf8", b"\xff\xf9"):
        i = tail.find(sync)
        while i >= 0:
            end = _frame_end(tail, i, max_block, channels)
            if end is not None:
                ends.add(end)
            i = tail.find(sync, i + 1)
    return ends


def _frame_end(buf: bytes, i: int, max_block: int, channels: int) -> int | None:
    if i + 6 > len(buf):
        return None
    variable = buf[i + 1] == 0xF9
    size_code, rate_code = buf[i + 2] >> 4, buf[i + 2] & 0xF
    assign, bits_code, reserved = buf[i + 3] >> 4, (buf[i + 3] >> 1) & 0x7, buf[i + 3] & 1
    if size_code == 0 or rate_code == 15 or assign > 10 or bits_code == 3 or reserved:
        return None
    if (assign + 1 if assign < 8 else 2) != channels:
        return None
    j = i + 4
    first = buf[j]
    extra = next((n for n, mask in enumerate((0x80, 0x40, 0x20, 0x10, 0x08, 0x04, 0x02))
                  if not first & (0x80 >> n)), 7)  # fmt: skip
    if extra == 1 or (extra == 7 and not variable) or j + max(extra, 1) > len(buf):
        return None
    number = first & (0x7F >> extra) if extra else first
    for k in range(1, extra):
        cont = buf[j + k]
        if cont & 0xC0 != 0x80:
            return None
        number = (number << 6) | (cont & 0x3F)
    j += max(extra, 1)
    if size_code in (6, 7):
        width = size_code - 5
        if j + width > len(buf):
            return None
        block = int.from_bytes(buf[j : j + width], "big") + 1
        j += width
    else:
        block = _BLOCK_CODES.get(size_code) or 256 << (size_code - 8)
    j += {12: 1, 13: 2, 14: 2}.get(rate_code, 0)
    if j >= len(buf) or crc8(buf[i:j]) != buf[j]:
        return None
    if not variable and block > max_block:
        return None
    return (number if variable else number * max_block) + block


class FlacUnknownLength(io.RawIOBase):
    """A read-only view of a FLAC file with STREAMINFO's total samples read as 0
    ("unknown"), so libsndfile decodes every frame instead of stopping at a total that
    understates the length. Passed to soundfile as a file-like object."""

    def __init__(self, path: str):
        super().__init__()
        self._fh = open(path, "rb")  # noqa: SIM115 - closed by close()
        skip = _id3_skip(self._fh)
        self._lo = skip + TOTAL_OFFSET
        self._fh.seek(self._lo)
        patch = bytearray(self._fh.read(5))
        if len(patch) == 5:
            patch[0] &= 0xF0
            patch[1:5] = b"\0\0\0\0"
        self._patch = bytes(patch)
        self._fh.seek(0)

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return True

    def seek(self, offset: int, whence: int = 0) -> int:
        return self._fh.seek(offset, whence)

    def tell(self) -> int:
        return self._fh.tell()

    def readinto(self, b) -> int:
        at = self._fh.tell()
        n = self._fh.readinto(b)
        lo, hi = max(at, self._lo), min(at + n, self._lo + len(self._patch))
        if lo < hi:
            view = memoryview(b)
            view[lo - at : hi - at] = self._patch[lo - self._lo : hi - self._lo]
        return n

    def read(self, size: int = -1) -> bytes:
        if size is None or size < 0:
            size = max(self._size() - self._fh.tell(), 0)
        buf = bytearray(size)
        n = self.readinto(buf)
        return bytes(buf[:n])

    def _size(self) -> int:
        here = self._fh.tell()
        end = self._fh.seek(0, 2)
        self._fh.seek(here)
        return end

    def close(self) -> None:
        self._fh.close()
        super().close()


# --- Ogg ----------------------------------------------------------------------------------


def _ogg_crc(page: bytes) -> int:
    """Ogg's page CRC over ``page`` with its CRC field zeroed (checker.io.oggpages.ogg_crc)."""
    return ogg_crc(page[:22] + b"\0\0\0\0" + page[26:])


def _page_at(buf: bytes, i: int) -> tuple[int, int, int, int] | None:
    """(flags, granule, serial, length) of a complete page with a good CRC at ``i``."""
    if i + 27 > len(buf) or buf[i + 4] != 0:
        return None
    flags, granule, serial, _seq, crc, nseg = struct.unpack_from("<BqIIIB", buf, i + 5)
    if i + 27 + nseg > len(buf):
        return None
    length = 27 + nseg + sum(buf[i + 27 : i + 27 + nseg])
    if i + length > len(buf) or _ogg_crc(buf[i : i + length]) != crc:
        return None
    return flags, granule, serial, length


def read_ogg(fh: BinaryIO, file_size: int) -> ContainerLength:
    fh.seek(0)
    first = fh.read(min(file_size, OGG_MAX_PAGE))
    head = _page_at(first, 0)
    if head is None:
        return ContainerLength("OGG", None, ("the first Ogg page is incomplete or damaged",))
    body = first[27 + first[26] : head[3]]
    serial = head[2]
    if body[:7] == b"\x01vorbis":
        codec, pre_skip = "vorbis", 0
    elif body[:8] == b"OpusHead" and len(body) >= 12:
        codec, pre_skip = "opus", struct.unpack_from("<H", body, 10)[0]
    elif body[:5] == b"\x7fFLAC":
        codec, pre_skip = "flac", 0
    else:
        return ContainerLength("OGG", None, ())
    lo = max(0, file_size - 2 * OGG_MAX_PAGE)
    fh.seek(lo)
    tail = fh.read(file_size - lo)
    pages = []  # (offset, flags, granule, serial, length) of complete pages in the tail
    i = tail.find(b"OggS")
    while i >= 0:
        page = _page_at(tail, i)
        if page is not None:
            pages.append((lo + i, *page))
            i = tail.find(b"OggS", i + page[3])
        else:
            i = tail.find(b"OggS", i + 1)
    findings: list[str] = []
    if not pages:
        findings.append("no complete Ogg page in the last 128 KiB: the file is damaged")
        return ContainerLength("OGG", None, tuple(findings))
    end = pages[-1][0] + pages[-1][4]
    if end < file_size:
        findings.append(
            f"the last {file_size - end} bytes are not a complete Ogg page: {TRUNCATED}"
        )
    if not pages[-1][1] & 0x04:
        findings.append(f"the last Ogg page has no end-of-stream flag: {CUT_SHORT}")
    ours = [p for p in pages if p[3] == serial and p[2] >= 0]
    if not ours or any(p[3] != serial for p in pages):
        findings.append("the stream's last pages belong to another logical stream: length unknown")
        return ContainerLength("OGG", None, tuple(findings))
    granule = ours[-1][2]
    frames = max(granule - pre_skip, 0)
    # Opus granules count 48 kHz samples whatever rate the stream is decoded at.
    units = 48_000 if codec == "opus" else None
    return ContainerLength("OGG", frames, tuple(findings), units_hz=units)
