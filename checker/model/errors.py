"""Exception hierarchy. Each class carries the process exit code the CLI uses.

Exit codes (README): 0 every file passed (warnings allowed); 1 at least one
file failed a rule; 2 usage or profile error, nothing checked; 3 at least one
file could not be checked; 4 the results store or the reports could not be
written or read (disk full, read-only or missing permission, damaged store):
a problem of the output folder, not of the audio; 130 interrupted. When several
apply, the highest wins.
"""

from __future__ import annotations

import errno

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_USAGE = 2
EXIT_UNCHECKED = 3
EXIT_OUTPUT = 4
EXIT_INTERRUPTED = 130


class CheckerError(Exception):
    """Base class. Messages follow `<where>: <what> = <got> (expected <constraint>)`."""

    exit_code = EXIT_UNCHECKED


class UsageError(CheckerError):
    """A caller's argument is wrong. Library code words the message in terms of the
    parameter (``jobs: 0 (expected >= 1)``) and names it in ``parameter``; the command line
    rewrites the leading ``parameter:`` to its own flag (``--jobs:``)."""

    exit_code = EXIT_USAGE

    def __init__(self, message: str, parameter: str | None = None):
        super().__init__(message)
        self.parameter = parameter


class ProfileError(CheckerError):
    exit_code = EXIT_USAGE


class AudioReadError(CheckerError):
    exit_code = EXIT_UNCHECKED


class UnsupportedAudioError(AudioReadError):
    exit_code = EXIT_UNCHECKED


class OutputError(CheckerError):
    """The output folder failed us: the store or a report cannot be written or read."""

    exit_code = EXIT_OUTPUT


class StoreError(OutputError):
    exit_code = EXIT_OUTPUT


#: errno -> (what happened, what to do), for failures writing the output folder.
_OS_CAUSES = {
    errno.ENOSPC: ("the disk is full", "free some space or choose another output folder"),
    errno.EDQUOT: ("the disk quota is used up", "free some space or choose another output folder"),
    errno.EFBIG: (
        "the file size limit was reached",
        "raise the limit or choose another output folder",
    ),
    errno.EROFS: ("the folder is on a read-only file system", "choose another output folder"),
    errno.EACCES: (
        "permission denied",
        "fix the folder's permissions or choose another output folder",
    ),
    errno.EPERM: (
        "operation not permitted",
        "fix the folder's permissions or choose another output folder",
    ),
    errno.ENOTDIR: ("a part of the path is a file, not a folder", "choose another output folder"),
    errno.EIO: (
        "the disk reported an I/O error",
        "check the disk, or choose another output folder",
    ),
}


def os_cause(exc: OSError) -> tuple[str, str]:
    """(what happened, what to do) for an OSError met while writing the output folder."""
    if exc.errno in _OS_CAUSES:
        return _OS_CAUSES[exc.errno]
    return (exc.strerror or str(exc), "check the output folder, or choose another one")
