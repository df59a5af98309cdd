"""report.csv and flags.csv through pandas, safe to open in a spreadsheet.

A text cell that a spreadsheet would run as a formula (first character ``=``, ``+``, ``-``,
``@``, tab, carriage return or line feed) gets a leading single quote. Numbers are never
touched: a negative level is a number, not text, and a text cell that is exactly one plain
number (``"-1.5"``, ``"-inf"``) is left as it is. ``None`` is an empty cell; digital
silence is written ``-inf``.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Any

import pandas as pd

from checker.report.atomic import atomic_text

FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r", "\n")
_PLAIN_NUMBER = re.compile(r"[+-]?(?:(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?|inf)")


def neutralise(value: Any) -> Any:
    """Make one cell inert for spreadsheets; numbers, booleans and None pass unchanged."""
    if isinstance(value, float) and math.isnan(value):
        return None
    if not isinstance(value, str) or not value.startswith(FORMULA_TRIGGERS):
        return value
    if _PLAIN_NUMBER.fullmatch(value):
        return value
    return "'" + value


def safe_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """Every cell through :func:`neutralise`; column order kept, ints stay ints.

    Column by column into object Series: ``DataFrame.map`` would infer dtypes and turn a
    column of ints with empty cells into floats (48000.0).
    """
    data = {
        c: pd.Series([neutralise(v) for v in frame[c]], dtype=object, index=frame.index)
        for c in frame.columns
    }
    return pd.DataFrame(data, columns=list(frame.columns), index=frame.index)


def write_csv(frame: pd.DataFrame, path: Path) -> Path:
    """Write one neutralised frame atomically (UTF-8, LF line ends, header row)."""
    safe = safe_frame(frame)
    with atomic_text(Path(path)) as handle:
        safe.to_csv(handle, index=False, na_rep="", lineterminator="\n")
    return Path(path)
