"""A small, defensive, read-only reader of RIFF / RF64 / BW64 WAVE headers.

It reads what libsndfile does not expose through soundfile: the ``fmt `` chunk's
format tag, valid bits and channel mask (WAVE_FORMAT_EXTENSIBLE), the ``bext``
chunk's version and loudness fields (EBU Tech 3285 v2), the list of chunks with
their sizes and, for RF64/BW64, the ``ds64`` sizes. Standard library only.

Rules it keeps:
- Only the header is read: chunk headers, and the bodies of ``fmt ``, ``bext``
  (its first 422 bytes) and ``ds64``. The audio is skipped with a seek.
- No size field is trusted: every size is checked against the file size, and a
  malformed structure becomes a finding (a plain-words string), never an
  exception. Problems libsndfile only logs are reported the same way (a data
  chunk larger than the file = truncated file; an odd-sized chunk without its
  pad byte; a second ``fmt `` chunk; a size claim of gigabytes in a tiny file).

Facts used (see docs/standards.md):
- ``bext`` (EBU Tech 3285 v2): Version (WORD) at body offset 346; LoudnessValue,
  LoudnessRange, MaxTruePeakLevel, MaxMomentaryLoudness, MaxShortTermLoudness at
  412, 414, 416, 418, 420, each int16 holding 100 x the value; 0x7FFF = not set;
  version 1 files hold zeros there and carry no loudness.
- ``bext`` TimeReference (all versions): a 64-bit count of samples since midnight at
  body offset 338 (low DWORD, then high DWORD at 342), just before Version.
- ``fmt `` of WAVE_FORMAT_EXTENSIBLE (tag 0xFFFE, cbSize >= 22): valid bits at 18,
  channel mask (DWORD) at 20, sub-format GUID at 24 (its first WORD is the tag).
- RF64 / BW64: the RIFF size and the ``data`` size are 0xFFFFFFFF and the real
  64-bit values sit in ``ds64`` (riff size, data size, sample count, table).
"""

from __future__ import annotations

import os
import struct
from dataclasses import dataclass, field
from typing import Any, BinaryIO

from checker.io.layout import mask_problem

WAVE_FORMAT_EXTENSIBLE = 0xFFFE

#: Body offsets of the EBU Tech 3285 v2 loudness fields, in value-key order.
BEXT_VERSION_OFFSET = 346
BEXT_LOUDNESS_OFFSETS: tuple[tuple[str, int], ...] = (
    ("declared_integrated_lufs", 412),
    ("declared_loudness_range_lu", 414),
    ("declared_true_peak_dbtp", 416),
    ("declared_max_momentary_lufs", 418),
    ("declared_max_short_term_lufs", 420),
)
BEXT_NOT_SET = 0x7FFF
BEXT_FIXED_BYTES = 602
BEXT_READ_BYTES = 422  # enough for the version and the five loudness fields

#: Words of the finding on bytes after the 'data' chunk that are not a chunk (probably
#: audio past a 'data' size that is too small).
WAV_TRAILING_AUDIO = "probably audio past a 'data' size that is too small"
#: A chunk list longer than this is not followed further (a file of empty chunks).
MAX_CHUNKS = 4096

WAV_KEYS: tuple[str, ...] = (
    "wav_format_tag",
    "channel_mask",
    "bext_version",
    "bext_time_reference_frames",
    *(key for key, _ in BEXT_LOUDNESS_OFFSETS),
    "header_findings",
)


@dataclass(frozen=True)
class ChunkInfo:
    chunk_id: str  # e.g. "fmt ", "data" (non-printable bytes shown as "?")
    offset: int  # byte offset of the chunk header in the file
    size: int  # size as declared (for RF64 data: the ds64 value)
    present: int  # bytes of body actually in the file (<= size)


@dataclass(frozen=True)
class WavHeader:
    """What the header says. Every field is None when absent or unreadable."""

    container: str  # "RIFF" | "RF64" | "BW64"
    file_size: int
    format_tag: int | None = None
    channels: int | None = None
    sample_rate_hz: int | None = None
    bits_per_sample: int | None = None
    valid_bits: int | None = None
    channel_mask: int | None = None
    subformat_tag: int | None = None
    bext_version: int | None = None
    #: bext TimeReference: frames (samples per channel) since midnight of the first frame.
    bext_time_reference_frames: int | None = None
    declared: dict[str, float | None] = field(default_factory=dict)
    ds64: dict[str, int] | None = None
    chunks: tuple[ChunkInfo, ...] = ()
    findings: tuple[str, ...] = ()

    def values(self) -> dict[str, Any]:
        """The flat WAV-metadata keys of Measurement.values."""
        out: dict[str, Any] = {
            "wav_format_tag": self.format_tag,
            "channel_mask": self.channel_mask,
            "bext_version": self.bext_version,
            "bext_time_reference_frames": self.bext_time_reference_frames,
        }
        for key, _ in BEXT_LOUDNESS_OFFSETS:
            out[key] = self.declared.get(key)
        out["header_findings"] = list(self.findings)
        return out


def empty_values() -> dict[str, Any]:
    """The WAV-metadata keys for a file that is not a RIFF/RF64/BW64 WAVE file."""
    out: dict[str, Any] = dict.fromkeys(WAV_KEYS)
    out["header_findings"] = []
    return out


def read_wav_header(path: str) -> WavHeader | None:
    """Read the header of ``path``; None if it is not a RIFF/RF64/BW64 WAVE file.

    Never raises for file content; an unreadable file (permissions, vanished)
    gives None, since the audio reader reports that on its own.
    """
    try:
        with open(path, "rb") as fh:
            return _read(fh, os.fstat(fh.fileno()).st_size)
    except OSError:
        return None


def _chunk_name(raw: bytes) -> str:
    return "".join(chr(b) if 0x20 <= b < 0x7F else "?" for b in raw)


def _plausible_id(raw: bytes) -> bool:
    return len(raw) == 4 and all(0x20 <= b < 0x7F for b in raw)


def _read(fh: BinaryIO, file_size: int) -> WavHeader | None:
    head = fh.read(12)
    if len(head) < 12 or head[8:12] != b"WAVE" or head[:4] not in (b"RIFF", b"RF64", b"BW64"):
        return None
    container = head[:4].decode("ascii")
    riff_size = struct.unpack_from("<I", head, 4)[0]
    findings: list[str] = []
    state: dict[str, Any] = {"declared": {}}
    chunks: list[ChunkInfo] = []
    ds64: dict[str, int] | None = None
    seen: dict[str, int] = {}

    pos = 12
    while pos + 8 <= file_size:
        if len(chunks) >= MAX_CHUNKS:
            findings.append(f"more than {MAX_CHUNKS} chunks: the rest of the header was not read")
            break
        fh.seek(pos)
        hdr = fh.read(8)
        if len(hdr) < 8:
            break
        raw_id, size = hdr[:4], struct.unpack_from("<I", hdr, 4)[0]
        name = _chunk_name(raw_id)
        if not _plausible_id(raw_id):
            if chunks and chunks[-1].chunk_id == "data":
                findings.append(
                    f"{file_size - pos} bytes after the 'data' chunk ({chunks[-1].size} bytes "
                    f"declared) are not a chunk (unreadable chunk header at byte {pos}): "
                    f"{WAV_TRAILING_AUDIO}; only the declared audio was measured"
                )
            else:
                findings.append(
                    f"unreadable chunk header at byte {pos}: the rest of the file was not read"
                )
            break
        body = pos + 8
        if ds64 is not None and size == 0xFFFFFFFF:
            size = ds64.get("data_size" if name == "data" else name, size)
        present = max(0, min(size, file_size - body))
        chunks.append(ChunkInfo(name, pos, size, present))
        seen[name] = seen.get(name, 0) + 1
        if size > present:
            findings.append(_short_chunk(name, size, present, file_size))
        if seen[name] > 1 and name in ("fmt ", "data", "bext", "ds64"):
            used = (
                "this reader uses the first" if name != "data" else "audio readers may use either"
            )
            findings.append(f"'{name}' chunk appears again at byte {pos} ({used})")
        elif name == "ds64":
            if len(chunks) != 1:
                findings.append(f"ds64 chunk at byte {pos} is not the first chunk")
            ds64 = _parse_ds64(fh, body, present, findings)
        elif name == "fmt ":
            _parse_fmt(fh, body, present, state, findings)
        elif name == "bext":
            _parse_bext(fh, body, present, size, state, findings)
        if name == "data" and seen[name] == 1:
            _check_data_size(size, state.get("block_align"), findings)
        if size > present:
            break  # the chunk runs past the end of the file: nothing follows it
        nxt = body + size
        if size % 2:
            nxt = _after_odd_chunk(fh, name, size, nxt, file_size, findings)
        pos = nxt

    cut = bool(chunks) and chunks[-1].size > chunks[-1].present  # already reported
    _check_riff_size(container, riff_size, ds64, file_size, pos, cut, findings)
    _check_required(seen, container, findings)
    return WavHeader(
        container=container,
        file_size=file_size,
        format_tag=state.get("format_tag"),
        channels=state.get("channels"),
        sample_rate_hz=state.get("sample_rate_hz"),
        bits_per_sample=state.get("bits_per_sample"),
        valid_bits=state.get("valid_bits"),
        channel_mask=state.get("channel_mask"),
        subformat_tag=state.get("subformat_tag"),
        bext_version=state.get("bext_version"),
        bext_time_reference_frames=state.get("bext_time_reference_frames"),
        declared=dict(state["declared"]),
        ds64=ds64,
        chunks=tuple(chunks),
        findings=tuple(findings),
    )


def _short_chunk(name: str, size: int, present: int, file_size: int) -> str:
    text = f"'{name}' chunk claims {size} bytes, {present} present"
    if size >= 2**31 and file_size < size // 1024:
        text += f" (a size of {size / 2**30:.1f} GiB in a {file_size}-byte file)"
    if name == "data":
        huge = size >= 2**31 and file_size < size // 1024
        text += ": a wrong size field or a truncated file" if huge else ": the file is truncated"
    return text


def _after_odd_chunk(
    fh: BinaryIO, name: str, size: int, unpadded: int, file_size: int, findings: list[str]
) -> int:
    """Where the next chunk starts after an odd-sized chunk (RIFF pads to even)."""
    if unpadded >= file_size:
        findings.append(
            f"odd-sized '{name}' chunk ({size} bytes) at the end of the file has no pad byte"
        )
        return unpadded
    if unpadded + 1 >= file_size:
        return unpadded + 1  # the pad byte is the last byte of the file
    fh.seek(unpadded)
    probe = fh.read(5)
    padded_ok = _plausible_id(probe[1:5]) or unpadded + 1 + 8 > file_size
    if not padded_ok and _plausible_id(probe[0:4]):
        findings.append(
            f"odd-sized '{name}' chunk ({size} bytes) has no pad byte "
            f"(the next chunk starts at byte {unpadded}, expected {unpadded + 1})"
        )
        return unpadded
    return unpadded + 1


def _check_data_size(size: int, align: int | None, findings: list[str]) -> None:
    if align and size % align and size != 0xFFFFFFFF:
        findings.append(
            f"'data' chunk of {size} bytes is not a whole number of {align}-byte frames "
            f"({size % align} bytes left over)"
        )


def with_header_findings(path: str, message: str) -> str:
    """``message`` (an open failure) plus what the WAV header reader found, if anything."""
    header = read_wav_header(path)
    if header is None or not header.findings:
        return message
    return f"{message}; header: {'; '.join(header.findings)}"


def _parse_ds64(fh: BinaryIO, body: int, present: int, findings: list[str]) -> dict[str, int]:
    if present < 24:
        findings.append(f"ds64 chunk has {present} bytes (expected at least 24)")
        return {}
    fh.seek(body)
    raw = fh.read(min(present, 28))
    riff, data, samples = struct.unpack_from("<QQQ", raw, 0)
    out = {"riff_size": riff, "data_size": data, "sample_count": samples}
    if len(raw) >= 28:
        table_len = struct.unpack_from("<I", raw, 24)[0]
        fits = (present - 28) // 12
        if table_len > fits:
            findings.append(f"ds64 table claims {table_len} entries, {fits} present")
        if min(table_len, fits) > 0:
            fh.seek(body + 28)
            table = fh.read(12 * min(table_len, fits, 64))
            for i in range(len(table) // 12):
                cid, csize = struct.unpack_from("<4sQ", table, 12 * i)
                out[_chunk_name(cid)] = csize
    return out


def _parse_fmt(
    fh: BinaryIO, body: int, present: int, state: dict[str, Any], findings: list[str]
) -> None:
    if present < 16:
        findings.append(f"'fmt ' chunk has {present} bytes (expected at least 16)")
        return
    fh.seek(body)
    raw = fh.read(min(present, 40))
    tag, channels, rate, _byte_rate, align, bits = struct.unpack_from("<HHIIHH", raw, 0)
    state.update(format_tag=tag, channels=channels, sample_rate_hz=rate, bits_per_sample=bits)
    state["block_align"] = align
    if tag != WAVE_FORMAT_EXTENSIBLE:
        return
    cb_size = struct.unpack_from("<H", raw, 16)[0] if len(raw) >= 18 else 0
    if len(raw) < 40 or cb_size < 22:
        findings.append(
            f"extensible 'fmt ' chunk is {present} bytes with extension size {cb_size} "
            "(expected 40 and 22): no channel mask"
        )
        return
    valid, mask, sub = struct.unpack_from("<HIH", raw, 18)
    state.update(valid_bits=valid, channel_mask=mask, subformat_tag=sub)
    problem = mask_problem(mask, channels)
    if problem:
        findings.append(problem)
    if valid > bits:
        findings.append(f"fmt valid bits = {valid} (expected at most the {bits} bits stored)")


def _parse_bext(
    fh: BinaryIO, body: int, present: int, size: int, state: dict[str, Any], findings: list[str]
) -> None:
    if state.get("bext_version") is not None:
        return
    if size < BEXT_FIXED_BYTES and present == size:
        findings.append(
            f"bext chunk has {size} bytes (expected at least {BEXT_FIXED_BYTES}, EBU Tech 3285)"
        )
    if present < BEXT_VERSION_OFFSET + 2:
        return
    fh.seek(body)
    raw = fh.read(min(present, BEXT_READ_BYTES))
    version = struct.unpack_from("<H", raw, BEXT_VERSION_OFFSET)[0]
    state["bext_version"] = version
    # TimeReferenceLow / High: two DWORDs at 338 and 342 (EBU Tech 3285, all versions).
    state["bext_time_reference_frames"] = struct.unpack_from("<Q", raw, BEXT_VERSION_OFFSET - 8)[0]
    if version < 2:
        return
    if len(raw) < BEXT_READ_BYTES:
        findings.append(f"bext version {version} chunk ends before its loudness fields")
        return
    declared = state["declared"]
    for key, offset in BEXT_LOUDNESS_OFFSETS:
        code = struct.unpack_from("<h", raw, offset)[0]
        declared[key] = None if code == BEXT_NOT_SET else code / 100.0


def _check_riff_size(
    container: str,
    riff_size: int,
    ds64: dict[str, int] | None,
    file_size: int,
    end: int,
    cut: bool,
    findings: list[str],
) -> None:
    if container != "RIFF" and riff_size == 0xFFFFFFFF:
        if not ds64 or "riff_size" not in ds64:
            findings.append(f"{container} file without a readable ds64 chunk: sizes unknown")
            return
        riff_size = ds64["riff_size"]
    claimed = riff_size + 8
    if claimed > file_size and cut:
        return  # the short chunk's finding already says the file ends early
    if claimed > file_size:
        text = f"{container} header claims {claimed} bytes, the file has {file_size}"
        if riff_size >= 2**31 and file_size < riff_size // 1024:
            text += f" (a size of {riff_size / 2**30:.1f} GiB in a tiny file)"
        findings.append(text)
    elif claimed < file_size and end > claimed:
        findings.append(
            f"{container} header claims {claimed} bytes, chunks continue to byte {min(end, file_size)}"
        )
    elif claimed < file_size:
        findings.append(f"{file_size - claimed} bytes follow the end of the {container} chunk")


def _check_required(seen: dict[str, int], container: str, findings: list[str]) -> None:
    for name in ("fmt ", "data"):
        if name not in seen:
            findings.append(f"no '{name}' chunk found in the {container} header")
    if container != "RIFF" and "ds64" not in seen:
        findings.append(f"{container} file has no ds64 chunk")
