"""File names as text that is safe to store, write and print.

On POSIX a file name is bytes. Python hands a name that is not valid UTF-8 over as a str
holding "surrogate escapes" (U+DC80..U+DCFF, one per undecodable byte); such a str opens
the file fine but cannot be encoded as UTF-8, so SQLite, CSV, JSON and HTML writers would
raise on it. Two views of a name:

- :func:`readable` (store, reports): the name unchanged when it is valid text, else each
  undecodable byte written ``\\xNN`` (and any other lone surrogate ``\\uDxxx``). Always
  encodable as UTF-8. The file itself is still opened with its original name.
- :func:`for_terminal` (console lines): :func:`readable`, plus control characters (C0,
  DEL, C1) and the bidirectional-override/isolate characters written as ``\\xNN`` /
  ``\\uNNNN``, so a name cannot move the cursor, erase or recolour a line, or reorder
  what follows it.
"""

from __future__ import annotations

import os
import re
from typing import Any

_SURROGATE = re.compile("[\ud800-\udfff]")
#: C0 controls, DEL, C1 controls; bidi embedding/override/isolate marks; line/para separators.
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u200e\u200f\u202a-\u202e\u2066-\u2069\u2028\u2029]")


def _escape_surrogate(match: re.Match) -> str:
    code = ord(match.group())
    return f"\\x{code - 0xDC00:02x}" if 0xDC80 <= code <= 0xDCFF else f"\\u{code:04x}"


def _escape_control(match: re.Match) -> str:
    code = ord(match.group())
    return f"\\x{code:02x}" if code <= 0xFF else f"\\u{code:04x}"


def readable(text: str) -> str:
    """``text`` with undecodable bytes (surrogate escapes) shown as ``\\xNN``; see module doc."""
    return _SURROGATE.sub(_escape_surrogate, text) if has_surrogates(text) else text


def has_surrogates(text: str) -> bool:
    """Whether ``text`` holds a surrogate (an undecodable byte of a name): what readable changes."""
    return _SURROGATE.search(text) is not None


def for_terminal(text: str) -> str:
    """``readable(text)`` with control and bidi characters made visible; see module doc."""
    return _CONTROL.sub(_escape_control, readable(str(text)))


def for_libsndfile(path: str) -> str | bytes:
    """``path`` as soundfile should be given it: the str itself, or its bytes when the name
    is not valid UTF-8 (soundfile encodes a str strictly, which fails on such a name)."""
    if _SURROGATE.search(path) is None:
        return path
    return os.fsencode(path)


def readable_data(value: Any) -> Any:
    """:func:`readable` applied to every string in nested dicts, lists and tuples."""
    if isinstance(value, str):
        return readable(value)
    if isinstance(value, dict):
        return {readable_data(k): readable_data(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return type(value)(readable_data(v) for v in value)
    return value
