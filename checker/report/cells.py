"""Spreadsheet-clean cells for report.csv, flags.csv and fixes.csv.

The CSV files are for people with a spreadsheet; results.jsonl and the SQLite store keep
full precision. Here:

- whole numbers are integers (``48000``, never ``48000.0``);
- floats are rounded to a stated precision per unit (``PRECISION``, by the key's unit
  suffix): 0.01 for LUFS, LU, dBTP, dBFS and dB; 0.001 s for times; 1 Hz; 0.0001 % for
  DC offset percentages; 0.001 for unitless ratios (correlation, bandwidth fraction);
- per-channel lists get one numeric column per channel (``true_peak_channel_dbtp`` ->
  ``true_peak_ch1_dbtp``, ``true_peak_ch2_dbtp``, ...), counted from 1;
- channel pairs read ``1-2: 0.62`` (channels from 1), other lists ``a; b`` as text;
- a limit is split into numbers and words (``limit_low``, ``limit_high``, ``limit_text``).
"""

from __future__ import annotations

import math
import re
from typing import Any

from checker.profile.catalogue import BY_KEY, MAX, MIN, NO_CUTOFF_BELOW, TARGET

#: Decimals kept in the CSV files, by unit suffix of the key (full precision: JSONL, SQLite).
PRECISION: dict[str, int] = {
    "lufs": 2,
    "lu": 2,
    "dbtp": 2,
    "dbfs": 2,
    "db": 2,
    "s": 3,
    "ms": 3,
    "hz": 0,
    "percent": 4,
    "frames": 0,
    "samples": 0,
}
#: Decimals of a float whose key has no unit suffix (ratios, correlations, fractions).
OTHER_DECIMALS = 3

#: Per-channel list keys -> one column per channel.
PER_CHANNEL_KEYS: tuple[str, ...] = (
    "true_peak_channel_dbtp",
    "sample_peak_channel_dbfs",
    "dc_offset_channel_percent",
    "effective_bits_channel",
    "clipped_runs_channel",
)


def decimals_for(key: str | None) -> int:
    if not key:
        return OTHER_DECIMALS
    return PRECISION.get(key.rpartition("_")[2], OTHER_DECIMALS)


def _rounded(value: float, places: int) -> Any:
    """A finite float's cell (number's last steps): rounded, whole values as ints."""
    x = round(value, places)
    if x == 0:
        return 0
    if places == 0 or x.is_integer():
        return int(x)
    return x


def number(value: Any, key: str | None = None, decimals: int | None = None) -> Any:
    """One numeric cell: ints stay ints, whole floats become ints, others are rounded."""
    if type(value) is float and value - value == 0.0:  # finite: most cells of a report
        return _rounded(value, decimals_for(key) if decimals is None else decimals)
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return value
    if isinstance(value, int):
        return value
    if math.isnan(value):
        return None
    if math.isinf(value):
        return value
    places = decimals_for(key) if decimals is None else decimals
    x = round(value, places)
    if x == 0:
        return 0
    if places == 0 or float(x).is_integer():
        return int(x)
    return x


def channel_column(key: str, n: int) -> str:
    """``true_peak_channel_dbtp``, 1 -> ``true_peak_ch1_dbtp``."""
    return key.replace("_channel", f"_ch{n}", 1)


def _item(value: Any, key: str | None) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        x = number(value, key)
        if isinstance(x, float) and math.isinf(x):
            return "-inf" if x < 0 else "inf"
        return str(x)
    return str(value)


def list_cell(key: str, value: list | tuple) -> str:
    """A list as one text cell; channel pairs ``[i, j, r]`` read ``"1-2: 0.62"``."""
    parts = []
    places = decimals_for(key)
    for item in value:
        if type(item) is float and item - item == 0.0:  # most items: what _item would write
            parts.append(str(_rounded(item, places)))
        elif isinstance(item, (list, tuple)):
            if len(item) >= 2 and all(isinstance(i, int) for i in item[:2]):
                head = f"{item[0] + 1}-{item[1] + 1}"
                rest = [_item(v, None) for v in item[2:]]
                parts.append(head + (": " + ", ".join(rest) if rest else ""))
            else:
                parts.append(", ".join(_item(v, None) for v in item))
        else:
            parts.append(_item(item, key))
    return "; ".join(parts)


def value_cell(key: str, value: Any) -> Any:
    """One measurement cell: numbers rounded by the key's unit, lists as text."""
    kind = type(value)  # the common cases first: a report.csv row has about 130 cells
    if kind is float and value - value == 0.0:
        return _rounded(value, decimals_for(key))
    if kind is str or kind is int or kind is bool or value is None:
        return value
    if isinstance(value, (list, tuple)):
        return list_cell(key, value)
    if isinstance(value, dict):
        return "; ".join(f"{k}={_item(v, k)}" for k, v in value.items())
    return number(value, key)


def channel_cells(key: str, value: Any, count: int) -> dict[str, Any]:
    """``count`` numeric columns for one per-channel list (empty past the file's channels)."""
    items = list(value) if isinstance(value, (list, tuple)) else []
    return {
        channel_column(key, n + 1): (number(items[n], key) if n < len(items) else None)
        for n in range(count)
    }


_TARGET_TEXT = re.compile(
    r"\s*(?:target\s+)?([-+]?\d+(?:\.\d+)?)(?:\s*[A-Za-z]+)?\s*\+-\s*(\d+(?:\.\d+)?)(?:\s*LU)?\s*"
)


def limit_cells(rule: str, limit: Any, unit: str) -> dict[str, Any]:
    """A flag's limit as ``limit_low`` / ``limit_high`` (numbers) and ``limit_text`` (words)."""
    d = BY_KEY.get(rule)
    kind = d.kind if d is not None else None
    key = d.measure if d is not None and isinstance(d.measure, str) else None
    low = high = text = None
    if isinstance(limit, str):
        m = _TARGET_TEXT.fullmatch(limit) if kind in (TARGET, None) else None
        if m:
            centre, tol = float(m.group(1)), float(m.group(2))
            low, high = number(centre - tol, key), number(centre + tol, key)
            text = f"{m.group(1)} +- {m.group(2)}"
        else:
            text = limit
    elif isinstance(limit, bool):
        text = "true" if limit else "false"
    elif isinstance(limit, (int, float)) and kind in (MAX,):
        high = number(limit, key)
    elif isinstance(limit, (int, float)) and kind in (MIN, NO_CUTOFF_BELOW):
        low = number(limit, key)
    elif isinstance(limit, (int, float)):
        text = f"within {_item(limit, key)} {unit}".strip()
    elif isinstance(limit, (list, tuple)):
        if kind is None and len(limit) == 2 and all(isinstance(x, (int, float)) for x in limit):
            low, high = number(limit[0], key), number(limit[1], key)
        else:
            text = "one of " + ", ".join(_item(x, key) for x in limit)
    elif limit is not None:
        text = str(limit)
    return {"limit_low": low, "limit_high": high, "limit_text": text}
