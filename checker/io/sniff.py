"""What a file's first bytes say it is: an audio container libsndfile reads, an audio
container it does not read, something that is clearly not audio, or unknown.

    sniff(head) -> Sniffed(kind, name)

``head`` is the start of the file (``HEAD_BYTES`` is enough for every signature here).
Only signatures are read, nothing is decoded; the reader (checker.io.audio) has the last
word on a file sniffed as readable. Signatures: docs/standards.md#file-signatures.
"""

from __future__ import annotations

from dataclasses import dataclass

#: How many leading bytes sniff() needs for every signature (and a fair sample of text).
HEAD_BYTES = 4096
#: The most read to look past an ID3v2 tag (cover art can make it large): see id3_end().
ID3_MAX_BYTES = 1024 * 1024


def id3_end(head: bytes) -> int | None:
    """Where the audio after a leading ID3v2 tag starts (10-byte header, syncsafe size,
    optional 10-byte footer), or None when ``head`` has no tag."""
    if len(head) < 10 or head[:3] != b"ID3":
        return None
    size = (head[6] << 21) | (head[7] << 14) | (head[8] << 7) | head[9]
    return 10 + size + (10 if head[5] & 0x10 else 0)


READABLE = "readable"  # a container libsndfile reads
UNSUPPORTED = "unsupported"  # audio (or audio-video), but not a container libsndfile reads
NOT_AUDIO = "not-audio"  # a document, image, archive, sidecar...
EMPTY = "empty"
UNKNOWN = "unknown"


@dataclass(frozen=True)
class Sniffed:
    kind: str  # READABLE | UNSUPPORTED | NOT_AUDIO | EMPTY | UNKNOWN
    name: str  # what the content is, in words ("WAV", "MP4/M4A (ISO media)", "text")

    @property
    def audio(self) -> bool:
        """True when the content is audio, whether or not libsndfile reads it."""
        return self.kind in (READABLE, UNSUPPORTED)


_W64_RIFF = bytes.fromhex("726966662e91cf11a5d628db04c10000")  # "riff" GUID (Sony Wave64)
_ASF = bytes.fromhex("3026b2758e66cf11a6d900aa0062ce6c")  # ASF header object (WMA/WMV)

#: Fixed signatures at offset 0: (prefix, kind, name). Checked in order.
_PREFIXES: tuple[tuple[bytes, str, str], ...] = (
    (b"fLaC", READABLE, "FLAC"),
    (b"OggS", READABLE, "Ogg (Vorbis, Opus or FLAC)"),
    (b".snd", READABLE, "AU/SND"),
    (b"dns.", READABLE, "AU/SND (little-endian)"),
    (b"caff", READABLE, "CAF"),
    (b"NIST_1A", READABLE, "NIST SPHERE"),
    (b"Creative Voice File", READABLE, "VOC"),
    (b"2BIT", READABLE, "AVR"),
    (b"MATLAB 5.0", READABLE, "MAT5"),
    (b"PVF1", READABLE, "PVF"),
    (b"Extended Instrument:", READABLE, "XI"),
    (b" paf", READABLE, "PAF"),
    (b"fap ", READABLE, "PAF"),
    (b"ALawSoundFile**", READABLE, "WVE"),
    (_W64_RIFF, READABLE, "W64"),
    (b"wvpk", UNSUPPORTED, "WavPack"),
    (b"MAC ", UNSUPPORTED, "Monkey's Audio (APE)"),
    (b"TTA1", UNSUPPORTED, "TTA"),
    (b"MPCK", UNSUPPORTED, "Musepack"),
    (b"MP+", UNSUPPORTED, "Musepack"),
    (b"#!AMR", UNSUPPORTED, "AMR"),
    (b"ADIF", UNSUPPORTED, "AAC (ADIF)"),
    (b"FRM8", UNSUPPORTED, "DSDIFF (DSD)"),
    (b"DSD ", UNSUPPORTED, "DSF (DSD)"),
    (b"\x0b\x77", UNSUPPORTED, "AC-3 / E-AC-3"),
    (b"\x7f\xfe\x80\x01", UNSUPPORTED, "DTS"),
    (b"\x1a\x45\xdf\xa3", UNSUPPORTED, "Matroska/WebM"),
    (_ASF, UNSUPPORTED, "ASF (WMA/WMV)"),
    (b"\x00\x05\x16\x07", NOT_AUDIO, "macOS resource fork (AppleDouble)"),
    (b"\x00\x05\x16\x00", NOT_AUDIO, "macOS AppleSingle file"),
    (b"\x00\x00\x00\x01Bud1", NOT_AUDIO, "macOS Finder settings (.DS_Store)"),
    (b"MThd", NOT_AUDIO, "MIDI (note data, no audio)"),
    (b"%PDF", NOT_AUDIO, "PDF document"),
    (b"\x89PNG\r\n\x1a\n", NOT_AUDIO, "PNG image"),
    (b"\xff\xd8\xff", NOT_AUDIO, "JPEG image"),
    (b"GIF87a", NOT_AUDIO, "GIF image"),
    (b"GIF89a", NOT_AUDIO, "GIF image"),
    (b"II*\x00", NOT_AUDIO, "TIFF image"),
    (b"MM\x00*", NOT_AUDIO, "TIFF image"),
    (b"8BPS", NOT_AUDIO, "Photoshop image"),
    (b"PK\x03\x04", NOT_AUDIO, "ZIP archive (or an office document)"),
    (b"PK\x05\x06", NOT_AUDIO, "ZIP archive (empty)"),
    (b"7z\xbc\xaf\x27\x1c", NOT_AUDIO, "7-Zip archive"),
    (b"Rar!\x1a\x07", NOT_AUDIO, "RAR archive"),
    (b"\x1f\x8b", NOT_AUDIO, "gzip archive"),
    (b"BZh", NOT_AUDIO, "bzip2 archive"),
    (b"\xfd7zXZ\x00", NOT_AUDIO, "xz archive"),
    (b"bplist", NOT_AUDIO, "binary property list"),
    (b"SQLite format 3\x00", NOT_AUDIO, "SQLite database"),
    (b"\x7fELF", NOT_AUDIO, "program (ELF)"),
    (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1", NOT_AUDIO, "Microsoft Office (OLE) document"),
)

_RIFF_FORMS = {
    b"WAVE": (READABLE, "WAV"),
    b"AVI ": (UNSUPPORTED, "AVI video"),
    b"WEBP": (NOT_AUDIO, "WebP image"),
    b"RMID": (NOT_AUDIO, "MIDI (RIFF, note data, no audio)"),
}
_IFF_FORMS = {
    b"AIFF": (READABLE, "AIFF"),
    b"AIFC": (READABLE, "AIFF-C"),
    b"8SVX": (READABLE, "IFF 8SVX"),
    b"16SV": (READABLE, "IFF 16SV"),
}


def sniff(head: bytes) -> Sniffed:
    """What ``head`` (the first bytes of a file) is; see the module doc."""
    if not head:
        return Sniffed(EMPTY, "empty (0 bytes)")
    four, form = head[:4], head[8:12]
    if four in (b"RIFF", b"RIFX", b"RF64", b"BW64"):
        if form == b"WAVE":
            return Sniffed(
                READABLE,
                {b"RIFF": "WAV", b"RIFX": "WAV (big-endian RIFX)"}.get(four, four.decode()),
            )
        kind, name = _RIFF_FORMS.get(form, (UNKNOWN, f"RIFF form {form!r}"))
        return Sniffed(kind, name)
    if four == b"FORM":
        kind, name = _IFF_FORMS.get(form, (UNKNOWN, f"IFF form {form!r}"))
        return Sniffed(kind, name)
    if head[4:8] == b"ftyp":
        return Sniffed(UNSUPPORTED, "MP4/M4A/MOV (ISO media, e.g. AAC or ALAC)")
    for prefix, kind, name in _PREFIXES:
        if head.startswith(prefix):
            return Sniffed(kind, name)
    if head[:3] == b"ID3":
        return _after_id3(head)
    if _text(head):
        return Sniffed(NOT_AUDIO, "text")
    mpeg = _mpeg_frame(head)
    if mpeg is not None:
        return mpeg
    if head.lstrip()[:5].lower() in (b"<?xml", b"<!doc", b"<html"):
        return Sniffed(NOT_AUDIO, "XML/HTML document")
    return Sniffed(UNKNOWN, "no known signature")


def _after_id3(head: bytes) -> Sniffed:
    """An ID3v2 tag (10-byte header, syncsafe size, optional 10-byte footer) precedes
    MPEG audio, and now and then FLAC or AAC: look past it when it fits in ``head``."""
    end = id3_end(head)
    if end is None:
        return Sniffed(READABLE, "MP3 (ID3 tag)")
    rest = head[end:]
    if rest.startswith(b"fLaC"):
        return Sniffed(READABLE, "FLAC (after an ID3 tag)")
    frame = _mpeg_frame(rest)
    if frame is not None:
        return frame
    return Sniffed(READABLE, "MP3 (ID3 tag)")


def _mpeg_frame(head: bytes) -> Sniffed | None:
    """An MPEG audio frame header (or an ADTS AAC one) at offset 0, checked field by field
    (sync, version, layer, bit-rate and sample-rate indices), else None."""
    if len(head) < 4 or head[0] != 0xFF or head[1] & 0xE0 != 0xE0:
        return None
    version = (head[1] >> 3) & 3
    layer = (head[1] >> 1) & 3
    if layer == 0:  # ADTS: MPEG-2/4 AAC, sync 0xFFF, layer 00
        return Sniffed(UNSUPPORTED, "AAC (ADTS)") if head[1] & 0xF0 == 0xF0 else None
    bitrate, rate = head[2] >> 4, (head[2] >> 2) & 3
    if version == 1 or bitrate == 15 or rate == 3:  # reserved values
        return None
    return Sniffed(READABLE, f"MPEG audio layer {4 - layer}")


def _text(head: bytes) -> bool:
    """Plain text: a UTF BOM, or no NUL byte and valid UTF-8 (a character cut at the end of
    ``head`` allowed) made of printable characters and white space."""
    if head.startswith((b"\xef\xbb\xbf", b"\xff\xfe", b"\xfe\xff")):
        if head[:2] in (b"\xff\xfe", b"\xfe\xff"):
            try:
                text = head[2 : 2 + (len(head) - 2) // 2 * 2].decode(
                    "utf-16-le" if head[0] == 0xFF else "utf-16-be"
                )
            except UnicodeDecodeError:
                return False
            return _printable(text)
        head = head[3:]
    if b"\x00" in head:
        return False
    try:
        text = head.decode("utf-8")
    except UnicodeDecodeError as exc:
        if exc.start < len(head) - 3:
            return False
        text = head[: exc.start].decode("utf-8")
    return _printable(text)


def _printable(text: str) -> bool:
    if not text:
        return False
    odd = sum(1 for ch in text if not ch.isprintable() and ch not in "\t\n\r\f\v")
    return odd <= len(text) // 100
