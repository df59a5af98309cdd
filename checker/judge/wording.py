"""How a flag reads: values with their units, positions in the file, "could not be measured"
notes, and the Flag record built from a limit.

One job: the wording and the Flag construction used by checker/judge/rules.py's checks.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from checker.model.units import UNIT_SUFFIXES
from checker.model.verdict import Flag
from checker.profile.load import Limit


def fmt(x: Any) -> str:
    if x is None:
        return "-"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, float):
        if math.isinf(x):
            return "-inf" if x < 0 else "inf"
        return f"{x:.2f}"
    return str(x)


def _with_unit(x: Any, unit: str) -> str:
    if isinstance(x, float) and x == -math.inf:
        return f"-inf {unit} (digital silence)".replace("  ", " ")
    if unit == "s" and isinstance(x, float) and 0.0 < abs(x) < 0.1:
        return f"{x:.6f} s"  # sub-100 ms offsets: keep sample-level detail
    return f"{fmt(x)} {unit}" if unit else fmt(x)


def _cap(s: str) -> str:
    return s[:1].upper() + s[1:]


def position_of(values: Mapping[str, Any], key: str | None) -> float | None:
    if key is None:
        return None
    p = values.get(key)
    if isinstance(p, list):
        p = p[0] if p else None
    if isinstance(p, bool) or not isinstance(p, (int, float)):
        return None
    p = float(p)
    return p if math.isfinite(p) else None


def _at(pos: float | None, first: bool = False) -> str:
    if pos is None:
        return ""
    return f" (first at {pos:.2f} s)" if first else f" at {pos:.2f} s"


def _present(x: Any) -> bool:
    return x is not None and not (isinstance(x, float) and math.isnan(x))


def _note_for(values: Mapping[str, Any], key: str) -> str:
    stem, _, suffix = key.rpartition("_")
    base = stem if suffix in UNIT_SUFFIXES else key
    for cand in (f"{base}_note", f"{base.split('_')[0]}_note"):
        note = values.get(cand)
        if isinstance(note, str) and note:
            return f" ({note})"
    if key not in values:
        return " (not in this measurement)"
    if values.get("is_silent") is True:
        return " (the file is silent)"
    return ""


def _flag(lim: Limit, measured: Any, limit: Any, message: str, pos=None, severity=None) -> Flag:
    return Flag(
        rule=lim.key,
        severity=severity or lim.severity,
        measured=measured,
        limit=limit,
        unit=lim.unit,
        message=message,
        position_s=pos,
        source=lim.source,
    )


def unmeasured(lim: Limit, values: Mapping[str, Any], key: str) -> Flag:
    d = lim.definition
    msg = (
        f"{_cap(d.what)} could not be measured{_note_for(values, key)}; "
        f"the limit ({lim.text()}) was not checked."
    )
    return _flag(lim, None, lim.value, msg)
