"""Find what is under the PATH arguments of a batch, and account for every file.

Directories are walked recursively (following symlinked directories, each real
directory at most once, so symlink loops end). Every regular file met gets one
of three outcomes from :func:`checker.io.intake.classify`, the one place that
decides what is audio: measure, refuse (an error row saying why) or not checked
(listed with its reason in every report). A file named on the command line is
never "not checked": it is measured or refused. Problems (a path that does not exist, a dangling symlink, a folder
that cannot be listed, a symlink loop) are returned as data, never raised.
Every list is sorted, so every run sees the same order.
"""

from __future__ import annotations

import os
import stat
from dataclasses import dataclass, field

from checker.io.intake import MEASURE, REFUSE, Intake, classify, named_like_audio


@dataclass(frozen=True)
class Problem:
    """Something under the inputs that could not be looked at, or was refused."""

    path: str
    message: str
    #: True when a file may have been missed (counts as "could not be checked");
    #: False for notes such as a symlink loop that was skipped.
    missed: bool = True


@dataclass(frozen=True)
class Skipped:
    """A file that is clearly not a deliverable: listed as "not checked" with its reason."""

    path: str
    reason: str


@dataclass(frozen=True)
class Discovery:
    files: tuple[str, ...] = field(default_factory=tuple)  # to measure
    problems: tuple[Problem, ...] = field(default_factory=tuple)  # error rows and notes
    not_checked: tuple[Skipped, ...] = field(default_factory=tuple)
    #: path -> a remark about its name, for measured files whose name is odd
    remarks: dict[str, str] = field(default_factory=dict)


def discover(paths: list[str] | tuple[str, ...]) -> Discovery:
    """Every file under ``paths`` with its outcome (see the module doc), and the problems met."""
    found: dict[str, Intake] = {}  # real path -> intake of the path as found
    problems: list[Problem] = []
    skipped: list[Skipped] = []
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
            _walk(arg, found, problems, skipped, seen_dirs)
        elif stat.S_ISREG(st.st_mode):
            _add(arg, found, named=True)
        else:
            problems.append(Problem(arg, f"{arg}: not a regular file (expected an audio file)"))
    files, remarks = [], {}
    for intake in found.values():
        if intake.outcome == MEASURE:
            files.append(intake.path)
            if intake.reason:
                remarks[intake.path] = intake.reason
        elif intake.outcome == REFUSE:
            problems.append(Problem(intake.path, f"{intake.path}: {intake.reason}"))
        else:
            skipped.append(Skipped(intake.path, intake.reason))
    files.sort(key=_sort_key)
    skipped.sort(key=lambda s: _sort_key(s.path))
    problems.sort(key=lambda p: _sort_key(p.path))
    return Discovery(tuple(files), tuple(problems), tuple(skipped), remarks)


def _sort_key(path: str):
    return (os.path.normcase(path), path)


def _add(path: str, found: dict[str, Intake], named: bool = False) -> None:
    real = os.path.realpath(path)
    if real not in found or _sort_key(path) < _sort_key(found[real].path):
        found[real] = classify(path, named=named)


def _walk(top: str, found, problems: list[Problem], skipped: list, seen_dirs: set) -> None:
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
            if is_file:
                _add(path, found)
                continue
            dangling = entry.is_symlink() and not os.path.exists(path)
            why = "symlink target does not exist" if dangling else "not a regular file, skipped"
            if named_like_audio(entry.name):
                problems.append(Problem(path, f"{path}: {why}"))
            else:  # a fifo, socket or device is never opened (reading a fifo would block)
                skipped.append(Skipped(path, why))
