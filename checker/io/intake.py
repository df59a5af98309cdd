"""What one file is, by its content and name: measure it, refuse it with the reason, or leave it
out as not a deliverable. :func:`classify` is the one place that decides what is audio; the batch
(checker.io.discover, which walks the inputs) and stem sets (checker.stems.sets) both ask it.

- measure: its content is audio libsndfile reads (by its first bytes, see checker.io.sniff), or
  the content is not recognised but the name has an audio extension (the reader then has the
  last word);
- refuse: audio in a container libsndfile does not read (.m4a, WavPack...), an unfinished
  transfer (.part) of audio, a file named like audio whose content is something else, a file
  whose content nobody recognises, a file that cannot be opened;
- not checked: clearly not a deliverable (text, images, documents, archives, peak and analysis
  sidecars, ``._*`` resource forks, .DS_Store), listed with its reason in every report.

A file named on the command line is never "not checked": it is measured or refused.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import soundfile as sf

from checker.io.sniff import (
    EMPTY,
    HEAD_BYTES,
    ID3_MAX_BYTES,
    NOT_AUDIO,
    READABLE,
    UNSUPPORTED,
    Sniffed,
    id3_end,
    sniff,
)

MEASURE = "measure"
REFUSE = "refuse"
NOT_CHECKED = "not checked"

#: Extensions (lower case, with the dot) of the formats libsndfile reads, plus common aliases.
COMMON_EXTENSIONS = frozenset(
    {
        ".wav",
        ".wave",
        ".bwf",
        ".rf64",
        ".w64",
        ".aif",
        ".aiff",
        ".aifc",
        ".flac",
        ".ogg",
        ".oga",
        ".opus",
        ".mp3",
        ".caf",
        ".au",
        ".snd",
    }
)

#: Audio (or audio-video) containers libsndfile does not read.
UNSUPPORTED_EXTENSIONS = frozenset(
    [
        ".m4a",
        ".m4b",
        ".m4p",
        ".mp4",
        ".mov",
        ".aac",
        ".alac",
        ".wma",
        ".wmv",
        ".wv",
        ".ape",
        ".mka",
        ".mkv",
        ".webm",
        ".ac3",
        ".ec3",
        ".eac3",
        ".dts",
        ".amr",
        ".dsf",
        ".dff",
        ".tta",
        ".mpc",
        ".3gp",
        ".spx",
        ".mp2",
        ".ra",
        ".rm",
    ]
)

#: Names of files that copy tools and browsers write while a transfer is unfinished.
PARTIAL_SUFFIXES = (".part", ".partial", ".crdownload", ".download", ".filepart", ".!ut", ".tmp")

#: Files the operating system leaves in folders.
SYSTEM_FILES = frozenset({".ds_store", "thumbs.db", "desktop.ini", "icon\r", ".localized"})

#: Extensions of files that travel beside deliverables but are not audio (by name, used only
#: when the content has no known signature): reason shown in the reports.
SIDECAR_EXTENSIONS = {
    **dict.fromkeys(
        [
            ".txt",
            ".md",
            ".rtf",
            ".doc",
            ".docx",
            ".odt",
            ".pdf",
            ".csv",
            ".tsv",
            ".xls",
            ".xlsx",
            ".json",
            ".xml",
            ".html",
            ".htm",
            ".log",
            ".nfo",
            ".cue",
            ".m3u",
            ".m3u8",
            ".pls",
            ".srt",
            ".vtt",
            ".lrc",
            ".ini",
            ".yaml",
            ".yml",
            ".toml",
        ],
        "document or text",
    ),
    **dict.fromkeys(
        [
            ".jpg",
            ".jpeg",
            ".png",
            ".gif",
            ".tif",
            ".tiff",
            ".bmp",
            ".webp",
            ".heic",
            ".svg",
            ".psd",
        ],
        "image",
    ),
    **dict.fromkeys(
        [".pk", ".pkf", ".peak", ".reapeaks", ".asd", ".sfk", ".gpk", ".ovw", ".wfm", ".mrk"],
        "waveform or analysis sidecar of an audio editor",
    ),
    **dict.fromkeys(
        [
            ".ptx",
            ".ptf",
            ".als",
            ".rpp",
            ".aup",
            ".aup3",
            ".sesx",
            ".cpr",
            ".flp",
            ".logicx",
            ".band",
            ".sdir",
        ],
        "session or project file",
    ),
    **dict.fromkeys([".md5", ".sha1", ".sha256", ".sfv", ".sig", ".asc"], "checksum or signature"),
    **dict.fromkeys([".zip", ".7z", ".rar", ".tar", ".gz", ".tgz", ".bz2", ".xz"], "archive"),
    **dict.fromkeys([".mid", ".midi"], "MIDI (note data, no audio)"),
    **dict.fromkeys([".bak", ".tmp", ".lock"], "backup or temporary file"),
}


def audio_extensions() -> frozenset[str]:
    """COMMON_EXTENSIONS plus '.<name>' for each format libsndfile reports."""
    try:
        names = {"." + name.lower() for name in sf.available_formats()}
    except Exception:  # pragma: no cover - a broken libsndfile install
        names = set()
    names.discard(".raw")  # header-less: cannot be read without being told the format
    return COMMON_EXTENSIONS | names


_AUDIO_EXTENSIONS = audio_extensions()


@dataclass(frozen=True)
class Intake:
    """What to do with one file, and why."""

    path: str
    outcome: str  # MEASURE | REFUSE | NOT_CHECKED
    #: REFUSE / NOT_CHECKED: the one-line reason; MEASURE: a remark about the name (for
    #: example a content/extension mismatch), else "".
    reason: str = ""
    #: What the first bytes say ("WAV", "MP4/M4A/MOV ...", "text"), or "" when not read.
    content: str = ""
    #: True when the content (or, unread, the name) says audio: a stem set counts it.
    audio: bool = False


def _extension(name: str) -> str:
    return os.path.splitext(name)[1].lower()


def _read_head(path: str) -> bytes:
    """The first HEAD_BYTES of the file; past a leading ID3 tag when it is longer (up to
    ID3_MAX_BYTES), so what follows the tag can be recognised."""
    with open(path, "rb") as fh:
        head = fh.read(HEAD_BYTES)
        end = id3_end(head)
        if end is not None and len(head) < end + 16 <= ID3_MAX_BYTES:
            head += fh.read(end + 16 - len(head))
        return head


def classify(path: str, named: bool = False, head: bytes | None = None) -> Intake:
    """Measure, refuse or leave unchecked (see the module doc). ``named``: the file was
    named on the command line (never "not checked"). ``head``: its first bytes when the
    caller has them (tests); else they are read here. Never raises."""
    base = os.path.basename(path)
    stripped, partial = _strip_partial(base)
    ext = _extension(stripped)
    by_name_audio = ext in _AUDIO_EXTENSIONS
    if head is None:
        try:
            head = _read_head(path)
        except OSError as exc:
            why = exc.strerror or str(exc)
            if by_name_audio and not partial:  # the reader will say what is wrong, as ever
                return Intake(path, MEASURE, audio=True)
            return Intake(path, REFUSE, f"cannot be opened to look at its content ({why})")
    found = sniff(head)
    audio = found.audio or (by_name_audio and found.kind != NOT_AUDIO)
    if partial:
        if audio or ext in UNSUPPORTED_EXTENSIONS or named:
            return Intake(
                path,
                REFUSE,
                f"unfinished transfer: the name ends in '{partial}' (a copy or download that "
                f"has not finished{_looks(found)}); wait for it to complete and check the "
                "whole file",
                found.name,
                True,
            )
        return Intake(
            path,
            NOT_CHECKED,
            f"unfinished transfer ('{partial}') of {_article(found.name)}",
            found.name,
        )
    system = _system_file(base)
    if system and not found.audio and not named:  # '._take.wav' is no take
        return Intake(path, NOT_CHECKED, system, found.name)
    if found.kind == READABLE:
        return Intake(path, MEASURE, _name_remark(base, ext, found), found.name, True)
    if found.kind == UNSUPPORTED:
        return Intake(
            path,
            REFUSE,
            f"unsupported container: {found.name}, which this checker cannot decode "
            "(expected WAV, AIFF, FLAC, W64, RF64, CAF, AU, Ogg or MP3: export or convert to one)",
            found.name,
            True,
        )
    if by_name_audio:
        if found.kind in (NOT_AUDIO,):
            return Intake(
                path,
                REFUSE,
                f"named like audio ('{ext}') but its content is {_article(found.name)}, not audio",
                found.name,
                False,
            )
        return Intake(path, MEASURE, content=found.name, audio=True)  # the reader decides
    if ext in UNSUPPORTED_EXTENSIONS:
        return Intake(
            path,
            REFUSE,
            f"unsupported container: '{ext}' files are not read by this checker and the "
            f"content ({found.name}) is no format it reads (export or convert to WAV or FLAC)",
            found.name,
            True,
        )
    reason = _not_deliverable(base, ext, found)
    if reason is None or named:
        return Intake(
            path,
            REFUSE,
            f"not audio: {reason or _unrecognised(ext, found)}",
            found.name,
            False,
        )
    return Intake(path, NOT_CHECKED, reason, found.name, False)


def named_like_audio(name: str) -> bool:
    """The name ends in an audio extension (for entries that cannot be opened at all)."""
    return _extension(name) in _AUDIO_EXTENSIONS


def is_audio(path: str) -> bool:
    """True when :func:`classify` counts the file as audio (measured or refused as audio)."""
    return classify(path).audio


def _strip_partial(base: str) -> tuple[str, str]:
    """('take.wav', '.part') for 'take.wav.part'; (base, '') when not a partial name."""
    lower = base.lower()
    for suffix in PARTIAL_SUFFIXES:
        if lower.endswith(suffix) and len(base) > len(suffix):
            return base[: -len(suffix)], base[-len(suffix) :]
    return base, ""


def _looks(found: Sniffed) -> str:
    return f"; its start looks like {found.name}" if found.audio else ""


def _article(name: str) -> str:
    return (
        f"an {name}" if name[:1].lower() in "aeiou" else (name if name == "text" else f"a {name}")
    )


def _name_remark(base: str, ext: str, found: Sniffed) -> str:
    """A remark about the name of a file measured by its content, or ""."""
    if base != base.strip():
        return (
            f"the file name begins or ends with white space ({base!r}); receivers may not find it"
        )
    if not ext:
        return f"the file name has no extension; its content is {found.name}"
    if ext not in _AUDIO_EXTENSIONS:
        return f"the file name ends in '{ext}', not an audio extension; its content is {found.name}"
    return ""


def _not_deliverable(base: str, ext: str, found: Sniffed) -> str | None:
    """Why a file is clearly not a deliverable, or None when that is not clear."""
    system = _system_file(base)
    if system:
        return system
    if found.kind == NOT_AUDIO:
        return found.name
    if found.kind == EMPTY:
        return "empty file (0 bytes)"
    if ext in SIDECAR_EXTENSIONS:
        return SIDECAR_EXTENSIONS[ext]
    return None


def _system_file(base: str) -> str | None:
    """Why a file the operating system leaves behind is not a deliverable, or None."""
    lower = base.lower()
    if lower.startswith("._"):
        return "macOS resource fork ('._' file written beside a copied file)"
    if lower in SYSTEM_FILES:
        return "folder settings of the operating system"
    return None


def _unrecognised(ext: str, found: Sniffed) -> str:
    named = f"the name ends in '{ext}'" if ext else "the name has no extension"
    return f"the content matches no audio format ({found.name}) and {named}"
