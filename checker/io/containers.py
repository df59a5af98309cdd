"""Small, defensive readers of the length a container declares (AIFF/AIFC, W64, AU, CAF).

libsndfile trims a declared length to what the file holds and only writes the
difference to its log, so a cut-short AIFF, W64 or AU file opens and decodes
without complaint. These readers look at the header again, check every size
field against the file size, and say what the container declares:

- ``frames_declared``: the frame count the header promises (None when it gives none
  or the codec's frame size is unknown),
- ``findings``: plain-words problems (a chunk running past the end of the file, a
  frame count that disagrees with the audio chunk's size, a container size that
  does not match the file).

FLAC and Ogg (lengths in STREAMINFO and page granule positions) are read by
``checker.io.streamlength``; RIFF/RF64/BW64 WAVE by ``checker.io.wavchunks``. Formats
without a reader here fall back to what libsndfile's own log says about lengths
(``log_findings``). Standard library only; never raises for file content.

Layouts (see docs/standards.md#containers):
- AIFF / AIFC (big-endian): "FORM" size "AIFF"|"AIFC", chunks id + uint32 size,
  padded to even. COMM: channels int16, numSampleFrames uint32, sampleSize int16,
  sample rate 80-bit extended (AIFC adds a compression type). SSND: offset uint32,
  blockSize uint32, then the samples.
- Sony Wave64: 16-byte GUID chunk ids whose first four bytes read "riff", "wave",
  "fmt ", "data"; uint64 little-endian sizes that include the 24-byte chunk header;
  chunks aligned to 8 bytes. The fmt body is WAVE's.
- Sun/NeXT AU: ".snd" (big-endian; "dns." little-endian), data offset, data size
  (0xFFFFFFFF = unknown), encoding, sample rate, channels, all uint32.
- Apple CAF (big-endian): "caff" version flags, chunks type + int64 size (-1 for a
  final 'data' chunk that runs to the end of the file). desc: sample rate float64,
  format id, flags, bytes per packet, frames per packet, channels, bits. data: a
  uint32 edit count, then the packets. pakt: packets int64, valid frames int64,
  priming int32, remainder int32.
"""

from __future__ import annotations

import os
import struct
from dataclasses import replace
from typing import Any, BinaryIO

from checker.io.audio import StreamInfo
from checker.io.lengths import TRUNCATED, ContainerLength
from checker.io.streamlength import read_flac, read_ogg
from checker.io.wavchunks import WAV_TRAILING_AUDIO, WavHeader

#: A chunk list longer than this is not followed further.
MAX_CHUNKS = 4096


def read_container_length(path: str) -> ContainerLength | None:
    """The declared length of a file in one of the containers read here; None for others
    (and for a file that cannot be opened: the audio reader reports that)."""
    try:
        with open(path, "rb") as fh:
            size = os.fstat(fh.fileno()).st_size
            head = fh.read(16)
            readers = (
                (head[:4] == b"FORM" and head[8:12] in (b"AIFF", b"AIFC"), _read_aiff),
                (head[:4] == b"riff" and size >= 40, _read_w64),
                (head[:4] in (b".snd", b"dns."), _read_au),
                (head[:4] == b"caff", _read_caf),
                (head[:4] == b"fLaC" or head[:3] == b"ID3", read_flac),
                (head[:4] == b"OggS", read_ogg),
            )
            for matches, reader in readers:
                if matches:
                    return reader(fh, size)
    except OSError:
        return None
    return None


# --- AIFF / AIFC ------------------------------------------------------------------------

#: AIFC compression types of uncompressed samples -> bytes per sample (None: from sampleSize).
AIFC_PLAIN = {
    b"NONE": None,
    b"twos": None,
    b"sowt": None,
    b"raw ": None,
    b"in24": 3,
    b"in32": 4,
    b"fl32": 4,
    b"FL32": 4,
    b"fl64": 8,
    b"FL64": 8,
    b"ulaw": 1,
    b"ULAW": 1,
    b"alaw": 1,
    b"ALAW": 1,
}


def _chunk_name(raw: bytes) -> str:
    return "".join(chr(b) if 0x20 <= b < 0x7F else "?" for b in raw)


def _read_aiff(fh: BinaryIO, file_size: int) -> ContainerLength:
    fh.seek(0)
    head = fh.read(12)
    form_size = struct.unpack_from(">I", head, 4)[0]
    aifc = head[8:12] == b"AIFC"
    findings: list[str] = []
    frames = channels = sample_bits = None
    frame_bytes = None
    ssnd_frames = None
    comm_seen = False
    pos, count = 12, 0
    while pos + 8 <= file_size and count < MAX_CHUNKS:
        count += 1
        fh.seek(pos)
        hdr = fh.read(8)
        raw_id, size = hdr[:4], struct.unpack_from(">I", hdr, 4)[0]
        name = _chunk_name(raw_id)
        body = pos + 8
        present = max(0, min(size, file_size - body))
        if size > present:
            findings.append(f"'{name}' chunk claims {size} bytes, {present} present: {TRUNCATED}")
        if name == "COMM" and not comm_seen and present >= 18:
            comm_seen = True
            body_raw = fh.read(min(present, 22))
            channels, frames, sample_bits = struct.unpack_from(">hIh", body_raw, 0)
            compression = body_raw[18:22] if aifc and len(body_raw) >= 22 else b"NONE"
            if compression not in AIFC_PLAIN:
                frames = None  # a codec's packets: numSampleFrames may not count frames
            elif channels > 0 and sample_bits > 0:
                width = AIFC_PLAIN[compression] or (sample_bits + 7) // 8
                frame_bytes = channels * width
        elif name == "SSND" and ssnd_frames is None and present >= 8:
            offset = struct.unpack_from(">I", fh.read(8), 0)[0]
            ssnd_frames = (size - 8 - offset, present - 8 - offset)
        if size > present:
            break
        pos = body + size + (size % 2)
    if count >= MAX_CHUNKS:
        findings.append(f"more than {MAX_CHUNKS} chunks: the rest of the header was not read")
    if not comm_seen:
        findings.append("no readable 'COMM' chunk: the declared length is unknown")
    elif frame_bytes and ssnd_frames is not None:
        declared_bytes = max(ssnd_frames[0], 0)
        if declared_bytes // frame_bytes != frames and declared_bytes < frames * frame_bytes:
            findings.append(
                f"'COMM' declares {frames} frames, the 'SSND' chunk's size holds "
                f"{declared_bytes // frame_bytes}"
            )
    _check_outer_size("FORM", form_size + 8, file_size, findings)
    return ContainerLength("AIFF", frames, tuple(findings))


def _check_outer_size(label: str, claimed: int, file_size: int, findings: list[str]) -> None:
    """A container size that disagrees with the file (a cut file's chunk finding comes first)."""
    if claimed > file_size and not any(TRUNCATED in f for f in findings):
        findings.append(f"{label} header claims {claimed} bytes, the file has {file_size}")
    elif claimed < file_size:
        findings.append(f"{file_size - claimed} bytes follow the end of the {label} chunk")


# --- Sony Wave64 ----------------------------------------------------------------------

W64_HEADER = 24  # 16-byte GUID + uint64 size
#: WAVE format tags whose frame size is block_align (PCM, IEEE float; mmreg.h).
PLAIN_TAGS = (0x0001, 0x0003, 0x0006, 0x0007, 0xFFFE)


def _read_w64(fh: BinaryIO, file_size: int) -> ContainerLength:
    fh.seek(0)
    head = fh.read(40)
    if len(head) < 40 or head[24:28] != b"wave":
        return ContainerLength("W64", None, ("not a Wave64 header ('wave' GUID missing)",))
    riff_size = struct.unpack_from("<Q", head, 16)[0]
    findings: list[str] = []
    align = tag = None
    frames = None
    pos, count = 40, 0
    while pos + W64_HEADER <= file_size and count < MAX_CHUNKS:
        count += 1
        fh.seek(pos)
        hdr = fh.read(W64_HEADER)
        name = _chunk_name(hdr[:4])
        size = struct.unpack_from("<Q", hdr, 16)[0]
        if size < W64_HEADER:
            findings.append(f"'{name}' chunk at byte {pos} has size {size} (expected >= 24)")
            break
        present = max(0, min(size, file_size - pos)) - W64_HEADER
        body_size = size - W64_HEADER
        if body_size > present:
            findings.append(
                f"'{name}' chunk claims {body_size} bytes, {max(present, 0)} present: {TRUNCATED}"
            )
        if name == "fmt " and tag is None and present >= 16:
            tag, _channels, _rate, _byte_rate, align = struct.unpack_from("<HHIIH", fh.read(14))
        elif name == "data" and frames is None:
            if tag in PLAIN_TAGS and align:
                frames = body_size // align
            elif tag is None:
                findings.append("'data' before a usable 'fmt ' chunk: the length is unknown")
        if body_size > present:
            break
        pos += (size + 7) // 8 * 8
    _check_outer_size("riff", riff_size, file_size, findings)
    return ContainerLength("W64", frames, tuple(findings))


# --- Sun / NeXT AU -------------------------------------------------------------------------

#: AU encodings -> bytes per sample (mu-law, 8/16/24/32-bit linear, float, double, A-law).
AU_SAMPLE_BYTES = {1: 1, 2: 1, 3: 2, 4: 3, 5: 4, 6: 4, 7: 8, 27: 1}
AU_UNKNOWN_SIZE = 0xFFFFFFFF


def _read_au(fh: BinaryIO, file_size: int) -> ContainerLength:
    fh.seek(0)
    head = fh.read(24)
    if len(head) < 24:
        return ContainerLength("AU", None, (f"AU header is {len(head)} bytes (expected 24)",))
    order = ">" if head[:4] == b".snd" else "<"
    offset, data_size, encoding, _rate, channels = struct.unpack_from(order + "5I", head, 4)
    findings: list[str] = []
    if offset < 24 or offset > file_size:
        findings.append(f"AU data offset = {offset} (expected 24 to the file size {file_size})")
        return ContainerLength("AU", None, tuple(findings))
    if data_size == AU_UNKNOWN_SIZE:
        return ContainerLength("AU", None, ("AU header gives no data size",))
    present = file_size - offset
    if data_size > present:
        findings.append(f"AU data size claims {data_size} bytes, {present} present: {TRUNCATED}")
    elif data_size < present:
        findings.append(f"{present - data_size} bytes follow the declared AU data")
    width = AU_SAMPLE_BYTES.get(encoding)
    frames = data_size // (width * channels) if width and channels else None
    return ContainerLength("AU", frames, tuple(findings))


# --- Apple CAF ------------------------------------------------------------------------------

CAF_RUNS_TO_END = -1


def _read_caf(fh: BinaryIO, file_size: int) -> ContainerLength:
    findings: list[str] = []
    desc: tuple | None = None
    data_bytes: int | None = None
    valid_frames: int | None = None
    pos, count = 8, 0
    while pos + 12 <= file_size and count < MAX_CHUNKS:
        count += 1
        fh.seek(pos)
        hdr = fh.read(12)
        name = _chunk_name(hdr[:4])
        size = struct.unpack_from(">q", hdr, 4)[0]
        body = pos + 12
        available = file_size - body
        if name == "data" and size == CAF_RUNS_TO_END:
            size = available
        if size < 0:
            findings.append(f"'{name}' chunk at byte {pos} has size {size} (expected >= 0)")
            break
        present = min(size, available)
        if size > present:
            findings.append(f"'{name}' chunk claims {size} bytes, {present} present: {TRUNCATED}")
        if name == "desc" and present >= 32:
            desc = struct.unpack(">d4s5I", fh.read(32))
        elif name == "data":
            data_bytes = max(size - 4, 0)  # after the edit count
        elif name == "pakt" and present >= 24:
            valid_frames = struct.unpack(">qq", fh.read(16))[1]
        if size > present:
            break
        pos = body + size
    if desc is None:
        findings.append("no readable 'desc' chunk: the declared length is unknown")
        return ContainerLength("CAF", None, tuple(findings))
    bytes_per_packet, frames_per_packet = desc[3], desc[4]
    frames = None
    if valid_frames is not None and valid_frames >= 0:
        frames = valid_frames
    elif data_bytes is not None and bytes_per_packet and frames_per_packet:
        frames = data_bytes // bytes_per_packet * frames_per_packet
    return ContainerLength("CAF", frames, tuple(findings))


# --- Anything else libsndfile reads ------------------------------------------------------

#: Phrases libsndfile's log uses when a length field disagrees with the file.
LOG_SIGNS = ("should be", "truncated", "> file length", "not equal to frame count")


def log_findings(log: str) -> tuple[str, ...]:
    """Lines of libsndfile's header log that say a length is wrong, as findings (for the
    containers without a reader here)."""
    out = []
    for line in log.splitlines():
        text = " ".join(line.replace("***", "").split())
        if text and any(sign in text for sign in LOG_SIGNS):
            out.append(f"the decoder library reports: {text}")
    return tuple(out[:4])


# --- Assembly: the declared length against what decoded ----------------------------------


def with_declared(info: StreamInfo, length: ContainerLength | None) -> StreamInfo:
    """``info`` with the container's declared frame count when libsndfile reports less (it
    trims a cut file's length to what is there) or none."""
    declared = length.declared_at(info.sample_rate_hz) if length is not None else None
    if declared is not None and (info.frames_declared is None or declared > info.frames_declared):
        return replace(info, frames_declared=declared)
    return info


def length_values(
    info: StreamInfo, frames: int, length: ContainerLength | None, wav: WavHeader | None
) -> tuple[dict[str, Any], list[str]]:
    """The measured keys ``container_intact`` (None with ``container_intact_note`` when no
    reader here knows the container) and ``undeclared_frames`` (frames decoded past the
    declared length), and the container's findings."""
    declared = info.frames_declared
    findings: list[str] = []
    note = None
    if length is not None:
        findings.extend(length.findings)
        cut = length.cut
    elif wav is not None:
        cut = any(c.size > c.present for c in wav.chunks) or any(
            WAV_TRAILING_AUDIO in f for f in wav.findings
        )
    else:
        findings.extend(log_findings(info.extra_info))
        cut = bool(findings)
        if not cut:
            note = f"the declared length of {info.container} files is not checked"
    undeclared = None if declared is None else max(frames - declared, 0)
    if undeclared and length is not None and length.kind == "FLAC":
        findings.append(
            f"STREAMINFO declares {declared} frames, {undeclared} more follow in the file "
            "and were decoded: players that trust the header stop early"
        )
    intact: bool | None = None
    if note is None:
        intact = not cut and (declared is None or declared == frames)
    values = {"container_intact": intact, "undeclared_frames": undeclared}
    values["container_intact_note"] = note
    return values, findings
