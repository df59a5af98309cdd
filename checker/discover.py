"""Find the audio files under the PATH arguments of a batch.

Directories are walked recursively (following symlinked directories, each real
directory at most once, so symlink loops end); files are kept when their
extension is one libsndfile reads. A file named on the command line is taken
whatever its extension. Problems (a path that does not exist, a dangling
symlink, a folder that cannot be listed, a symlink loop) are returned as data,
never raised. The result is sorted, so every run sees the same order.
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass, field

import soundfile as sf

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


def audio_extensions() -> frozenset[str]:
    """COMMON_EXTENSIONS plus '.<name>' for each format libsndfile reports."""
    try:
        names = {"." + name.lower() for name in sf.available_formats()}
    except Exception:  # pragma: no cover - a broken libsndfile install
        names = set()
    names.discard(".raw")  # header-less: cannot be read without being told the format
    return COMMON_EXTENSIONS | names


@dataclass(frozen=True)
class Problem:
    """Something under the inputs that could not be looked at."""

    path: str
    message: str
    #: True when a file may have been missed (counts as "could not be checked");
    #: False for notes such as a symlink loop that was skipped.
    missed: bool = True


@dataclass(frozen=True)
class Discovery:
    files: tuple[str, ...] = field(default_factory=tuple)
    problems: tuple[Problem, ...] = field(default_factory=tuple)


def discover(paths: list[str] | tuple[str, ...], extensions=None) -> Discovery:
    """Audio files under ``paths`` (sorted, each real file once) and the problems met."""
    exts = audio_extensions() if extensions is None else frozenset(extensions)
    found: dict[str, str] = {}  # real path -> path as found
    problems: list[Problem] = []
    seen_dirs: set[tuple[int, int]] = set()
    for arg in paths:
        arg = str(arg)
        try:
            st = os.stat(arg)
        except FileNotFoundError:
            if os.path.islink(arg):
                problems.append(Problem(arg, f"{arg}: symlink target does not exist"))
            else:
                problems.append(Problem(arg, f"{arg}: path does not exist"))
            continue
        except OSError as exc:
            problems.append(Problem(arg, f"{arg}: cannot be read ({exc.strerror or exc})"))
            continue
        if stat.S_ISDIR(st.st_mode):
            _walk(arg, exts, found, problems, seen_dirs)
        elif stat.S_ISREG(st.st_mode):
            _add(arg, found)
        else:
            problems.append(Problem(arg, f"{arg}: not a regular file (expected an audio file)"))
    files = sorted(found.values(), key=_sort_key)
    problems.sort(key=lambda p: _sort_key(p.path))
    return Discovery(files=tuple(files), problems=tuple(problems))


def _sort_key(path: str):
    return (os.path.normcase(path), path)


def _add(path: str, found: dict[str, str]) -> None:
    real = os.path.realpath(path)
    if real not in found or _sort_key(path) < _sort_key(found[real]):
        found[real] = path


def _walk(top: str, exts, found, problems: list[Problem], seen_dirs: set) -> None:
    stack = [top]
    while stack:
        d = stack.pop()
        try:
            st = os.stat(d)
        except OSError as exc:
            problems.append(Problem(d, f"{d}: folder vanished ({exc.strerror or exc})"))
            continue
        key = (st.st_dev, st.st_ino)
        if key in seen_dirs:
            if os.path.islink(d):
                problems.append(
                    Problem(d, f"{d}: symlink loop or repeated folder, skipped", missed=False)
                )
            continue
        seen_dirs.add(key)
        try:
            with os.scandir(d) as it:
                entries = list(it)
        except OSError as exc:
            problems.append(Problem(d, f"{d}: folder cannot be listed ({exc.strerror or exc})"))
            continue
        for entry in entries:
            path = entry.path
            try:
                is_dir = entry.is_dir(follow_symlinks=True)
                is_file = entry.is_file(follow_symlinks=True)
            except OSError as exc:  # pragma: no cover - rare (e.g. ELOOP on stat)
                problems.append(Problem(path, f"{path}: cannot be read ({exc.strerror or exc})"))
                continue
            if is_dir:
                stack.append(path)
                continue
            if os.path.splitext(entry.name)[1].lower() not in exts:
                continue
            if is_file:
                _add(path, found)
            elif entry.is_symlink() and not os.path.exists(path):
                problems.append(Problem(path, f"{path}: symlink target does not exist"))
            else:  # a fifo, socket or device with an audio extension
                problems.append(Problem(path, f"{path}: not a regular file, skipped"))
