"""The CSV reports (report.csv, flags.csv, fixes.csv, parts.csv), safe to open in a spreadsheet.

A text cell that a spreadsheet would run as a formula (first character ``=``, ``+``, ``-``,
``@``, tab, carriage return or line feed) gets a leading single quote. Numbers are never
touched: a negative level is a number, not text, and a text cell that is exactly one plain
number (``"-1.5"``, ``"-inf"``) is left as it is. ``None`` is an empty cell; digital
silence is written ``-inf``.

Written with the standard library's csv module as pandas' ``to_csv(index=False, na_rep="",
lineterminator="\\n")`` wrote them before (pandas hands each cell to the same csv writer:
minimal quoting, ``str`` of every value; tests/unit/test_report_csv.py compares the two), so
the reports are byte for byte what they were, without importing pandas.
"""

from __future__ import annotations

import csv
import math
import re
from pathlib import Path
from typing import Any

from checker.report.atomic import atomic_text
from checker.report.frame import Table

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


def safe_rows(table: Table) -> list[list[Any]]:
    """Every cell through :func:`neutralise`, None as an empty cell; column order kept, ints
    stay ints (never 48000.0)."""
    # Ints, finite floats and text that triggers nothing (most cells) are kept as they are
    # without a call; the rest go through neutralise.
    return [
        [
            c
            if (t := type(c)) is int
            or (t is float and c == c)
            or (t is str and not c.startswith(FORMULA_TRIGGERS))
            else ("" if (v := neutralise(c)) is None else v)
            for c in row
        ]
        for row in table.rows
    ]


def write_csv(table: Table, path: Path) -> Path:
    """Write one neutralised table atomically (UTF-8, LF line ends, header row)."""
    with atomic_text(Path(path)) as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(table.columns)
        writer.writerows(safe_rows(table))
    return Path(path)
