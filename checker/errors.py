"""Exception hierarchy. Each class carries the process exit code the CLI uses.

Exit codes (README): 0 every file passed (warnings allowed); 1 at least one
file failed a rule; 2 usage or profile error, nothing checked; 3 at least one
file could not be checked. When several apply, the highest wins.
"""

from __future__ import annotations

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_USAGE = 2
EXIT_UNCHECKED = 3


class CheckerError(Exception):
    """Base class. Messages follow `<where>: <what> = <got> (expected <constraint>)`."""

    exit_code = EXIT_UNCHECKED


class UsageError(CheckerError):
    exit_code = EXIT_USAGE


class ProfileError(CheckerError):
    exit_code = EXIT_USAGE


class AudioReadError(CheckerError):
    exit_code = EXIT_UNCHECKED


class UnsupportedAudioError(AudioReadError):
    exit_code = EXIT_UNCHECKED


class StoreError(CheckerError):
    exit_code = EXIT_UNCHECKED
