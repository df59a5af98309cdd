"""Reading and validating one profile file (syntax, keys, types, units).

Every error names the file, the key, the value found and what was expected:
``<file>: <section>.<key> = <value> (expected <constraint>)``; TOML syntax
errors give the line. Merging parents and children lives in checker.profile.load.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from pathlib import Path
from typing import Any

from checker.model.errors import ProfileError
from checker.model.units import UNIT_SUFFIXES
from checker.profile.catalogue import (
    ALLOWED,
    BY_KEY,
    DECLARED,
    ENCODE_BIT_RATES,
    ENCODE_CODECS,
    MAX,
    MIN,
    MUST_BE_TRUE,
    ONE_OF,
    REQUIRED,
    SECTIONS,
    TARGET,
    LimitDef,
)
from checker.profile.settings import SETTING_BY_KEY, SettingDef

META_KEYS = ("name", "title", "version", "description", "extends")
SEVERITIES = ("fail", "warn")
MONO_CONVENTIONS = ("single_channel", "dual_mono")
#: Settings that are not limits: (section, key) -> allowed values.
SETTINGS = {
    ("loudness", "mono_loudness"): MONO_CONVENTIONS,
    ("encode", "codec"): ENCODE_CODECS,
    ("encode", "bit_rate_kbps"): ENCODE_BIT_RATES,
    ("programme", "span"): ("whole_file", "auto"),
}
#: [programme] settings with free values: key -> (type check, expected words).
PROGRAMME_SETTINGS = ("span", "in_point", "out_point", "timecode_fps", "break_min_s")
_FREE_SETTINGS = {
    "in_point": (
        lambda v: isinstance(v, str) and v.strip() != "",
        'seconds or timecode as a string ("12.5", "10:00:00:00")',
    ),
    "out_point": (
        lambda v: isinstance(v, str) and v.strip() != "",
        'seconds or timecode as a string ("12.5", "10:00:00:00")',
    ),
    "timecode_fps": (lambda v: is_number(v) and 1 <= v <= 120, "a frame rate, 1-120"),
    "break_min_s": (lambda v: is_number(v) and 0.1 <= v <= 3600, "seconds, 0.1-3600"),
}
#: The channel order of the delivery's files (a setting, not a limit): "L C R Ls Rs LFE".
LAYOUT_SETTING = ("format", "channel_layout")
#: An entry that drops a limit inherited from the parent.
OFF = "off"


# ---------------------------------------------------------------- helpers


#: Values are shown in messages up to this many characters (a 400-digit number or a deeply
#: nested list is summarised, not echoed).
SHOW_MAX_CHARS = 60
#: Deeper nesting than this in a profile is refused (no limit needs more than a list).
MAX_NESTING = 8
#: Field names a message may repeat from another file (anything else is "a key").
FIELDS = ("value", "severity", "source", "tolerance_lu", "warn_value")


def show_value(v: Any, depth: int = 0) -> str:
    """``v`` as TOML-like text, at most SHOW_MAX_CHARS characters."""
    if depth > MAX_NESTING:
        return "..."
    if isinstance(v, str):
        text = f'"{v}"'
    elif isinstance(v, bool):
        text = "true" if v else "false"
    elif isinstance(v, int) and v.bit_length() > 64:
        text = f"a {len(str(v))}-digit integer"
    elif isinstance(v, dict):
        text = "{" + ", ".join(f"{k} = {show_value(x, depth + 1)}" for k, x in v.items()) + "}"
    elif isinstance(v, list):
        text = "[" + ", ".join(show_value(x, depth + 1) for x in v) + "]"
    else:
        text = str(v)
    if len(text) > SHOW_MAX_CHARS:
        text = f"{text[: SHOW_MAX_CHARS - 20]}... ({len(text)} characters)"
    return text


def err(where: str, key: str, got: Any, expected: str) -> ProfileError:
    exc = ProfileError(f"{where}: {key} = {show_value(got)} (expected {expected})")
    # The same without the value and with unknown key names hidden, for when the file is
    # not the one the user named (a parent reached through extends).
    shown = key if all(_known(part) for part in key.split(".")) else "a key"
    exc.redacted = f"{where}: {shown} is not valid (expected {expected})"
    return exc


def redacted(exc: ProfileError) -> str:
    """The message of ``exc`` without values or key names read from the file."""
    return getattr(exc, "redacted", None) or str(exc)


def _known(part: str) -> bool:
    return (
        part in BY_KEY
        or part in META_KEYS
        or part in SECTIONS
        or part in FIELDS
        or any(part == key for _section, key in SETTINGS)
    )


def is_number(v: Any) -> bool:
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        return False
    try:
        return math.isfinite(float(v))
    except OverflowError:  # an integer beyond the float range
        return False


def _unit_word(d: LimitDef) -> str:
    return f"a number in {d.unit}" if d.unit else "a number"


# ---------------------------------------------------------------- reading one file


def _read_toml(path: Path) -> dict[str, Any]:
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise ProfileError(f"{path}: cannot read profile ({exc.strerror or exc})") from None
    except UnicodeDecodeError:
        raise ProfileError(f"{path}: not UTF-8 text (expected a TOML profile)") from None
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+)", str(exc))
        line = f", line {m.group(1)}" if m else ""
        raise ProfileError(f"{path}{line}: TOML syntax error: {exc}") from None
    except RecursionError:
        raise ProfileError(
            f"{path}: nesting too deep (expected at most {MAX_NESTING} levels of tables and lists)"
        ) from None
    except ValueError as exc:  # e.g. an integer of more than 4300 digits
        raise ProfileError(f"{path}: unreadable value ({_first_words(exc)})") from None
    if _depth(raw) > MAX_NESTING:
        raise ProfileError(
            f"{path}: nesting too deep (expected at most {MAX_NESTING} levels of tables and lists)"
        )
    return raw


def _first_words(exc: BaseException) -> str:
    return str(exc).split(";")[0].split(":")[0].strip() or type(exc).__name__


def _depth(value: Any) -> int:
    """Nesting depth of tables and lists, without recursion (what tomllib parsed)."""
    deepest, stack = 0, [(value, 0)]
    while stack:
        v, d = stack.pop()
        if isinstance(v, dict):
            children = v.values()
        elif isinstance(v, list):
            children = v
        else:
            continue
        deepest = max(deepest, d + 1)
        if d + 1 <= MAX_NESTING:
            stack.extend((c, d + 1) for c in children)
    return deepest


def _unknown_key(where: str, section: str, key: str, got: Any) -> ProfileError:
    dotted = f"{section}.{key}"
    d = BY_KEY.get(key)
    if d is not None:
        return err(where, dotted, got, f"this limit in section [{d.section}]")
    stem, _, suffix = key.rpartition("_")
    if suffix in UNIT_SUFFIXES:
        for other in BY_KEY.values():
            o_stem, _, o_suffix = other.key.rpartition("_")
            if o_stem == stem and o_suffix != suffix:
                return err(
                    where, dotted, got, f"{other.key}: this limit is in {other.unit or 'a count'}"
                )
    close = difflib.get_close_matches(key, list(BY_KEY), n=1)
    hint = f"; did you mean {close[0]}?" if close else ""
    return err(where, dotted, got, f"a known limit key (see `deliverycheck profiles show`){hint}")


def _check_entry(where: str, section: str, key: str, entry: Any) -> dict[str, Any] | str:
    """Validate the fields present in one limit entry (completeness is checked after merging)."""
    dotted = f"{section}.{key}"
    if entry == OFF:
        return OFF
    if not isinstance(entry, dict):
        expected = '{ value = ..., severity = "fail"|"warn", source = "..." } or "off"'
        raise err(where, dotted, entry, expected)
    d = BY_KEY[key]
    allowed = {"value", "severity", "source"}
    if d.kind == TARGET:
        allowed.add("tolerance_lu")
    if d.kind in (MAX, MIN):
        allowed.add("warn_value")
    for f in entry:
        if f not in allowed:
            raise err(where, f"{dotted}.{f}", entry[f], "one of " + ", ".join(sorted(allowed)))
    if "value" in entry:
        _check_value(where, f"{dotted}.value", d, entry["value"])
    if "severity" in entry and entry["severity"] not in SEVERITIES:
        raise err(where, f"{dotted}.severity", entry["severity"], '"fail" or "warn"')
    if "source" in entry and (not isinstance(entry["source"], str) or not entry["source"].strip()):
        raise err(
            where,
            f"{dotted}.source",
            entry["source"],
            'the standard and clause, or "common practice"',
        )
    for f in ("tolerance_lu", "warn_value"):
        if f in entry and not is_number(entry[f]):
            raise err(where, f"{dotted}.{f}", entry[f], _unit_word(d))
    if "tolerance_lu" in entry and entry["tolerance_lu"] < 0:
        raise err(where, f"{dotted}.tolerance_lu", entry["tolerance_lu"], "a number >= 0 in LU")
    return dict(entry)


def _check_value(where: str, dotted: str, d: LimitDef, v: Any) -> None:
    if d.kind in (ALLOWED, REQUIRED, MUST_BE_TRUE):
        if not isinstance(v, bool):
            raise err(where, dotted, v, "true or false")
    elif d.kind == ONE_OF:
        want = int if d.item == "int" else str
        ok = (
            isinstance(v, list)
            and v
            and all(isinstance(x, want) and not isinstance(x, bool) for x in v)
        )
        if not ok:
            words = "integers" if want is int else "strings"
            raise err(
                where,
                dotted,
                v,
                f"a non-empty list of {words}" + (f" in {d.unit}" if d.unit else ""),
            )
    else:
        if not is_number(v):
            raise err(where, dotted, v, _unit_word(d))
        if d.item == "int" and (not isinstance(v, int) or v < 0):
            raise err(where, dotted, v, "a whole number >= 0")
        if d.kind == DECLARED and v < 0:
            raise err(where, dotted, v, f"a tolerance >= 0 in {d.unit}")


def _check_setting(where: str, d: SettingDef, entry: Any) -> dict[str, Any]:
    """A numeric setting: ``{ value = ..., source = "..." }`` within the setting's range."""
    dotted = f"{d.section}.{d.key}"
    if not isinstance(entry, dict):
        raise err(where, dotted, entry, '{ value = ..., source = "..." }')
    for f in entry:
        if f not in ("value", "source"):
            raise err(where, f"{dotted}.{f}", entry[f], "one of source, value")
    v = entry.get("value")
    whole = " whole" if d.whole else ""
    expected = f"a{whole} number in {d.unit} from {d.low:g} to {d.high:g}"
    if not is_number(v) or not d.low <= v <= d.high or (d.whole and v != int(v)):
        raise err(where, f"{dotted}.value", v, expected)
    source = entry.get("source")
    if not isinstance(source, str) or not source.strip():
        raise err(
            where, f"{dotted}.source", source, 'the standard and clause, or "common practice"'
        )
    return {"value": float(v), "source": source}


def _check_layout(where: str, dotted: str, v: Any) -> str:
    from checker.io.layout import SPEAKERS, layout_labels

    labels = layout_labels(v) if isinstance(v, str) else ()
    if not labels or any(label not in SPEAKERS for label in labels):
        raise err(
            where,
            dotted,
            v,
            'channel labels such as "L R C LFE Ls Rs" (known: ' + ", ".join(sorted(SPEAKERS)) + ")",
        )
    return " ".join(labels)


def parse_layer(path: Path) -> dict[str, Any]:
    """One file -> {"meta": {...}, "settings": {...}, "limits": {key: entry | OFF}}."""
    raw = _read_toml(path)
    where = str(path)
    meta: dict[str, Any] = {}
    settings: dict[str, Any] = {}
    limits: dict[str, Any] = {}
    for top, v in raw.items():
        if top in META_KEYS:
            if not isinstance(v, str) or not v.strip():
                raise err(where, top, v, "a non-empty string")
            meta[top] = v
        elif top in SECTIONS:
            if not isinstance(v, dict):
                raise err(where, top, v, f"a table [{top}]")
            for key, entry in v.items():
                if (top, key) == LAYOUT_SETTING:
                    settings[key] = _check_layout(where, f"{top}.{key}", entry)
                elif (top, key) in SETTINGS:
                    if entry not in SETTINGS[(top, key)]:
                        choices = " or ".join(f'"{c}"' for c in SETTINGS[(top, key)])
                        raise err(where, f"{top}.{key}", entry, choices)
                    settings[key] = entry
                elif top == "programme" and key in _FREE_SETTINGS:
                    ok, words = _FREE_SETTINGS[key]
                    if not ok(entry):
                        raise err(where, f"{top}.{key}", entry, words)
                    settings[key] = entry
                elif key in SETTING_BY_KEY and SETTING_BY_KEY[key].section == top:
                    settings[key] = _check_setting(where, SETTING_BY_KEY[key], entry)
                elif key in BY_KEY and BY_KEY[key].section == top:
                    limits[key] = _check_entry(where, top, key, entry)
                else:
                    raise _unknown_key(where, top, key, entry)
        else:
            close = difflib.get_close_matches(top, list(META_KEYS) + list(SECTIONS), n=1)
            hint = f"; did you mean {close[0]}?" if close else ""
            raise err(where, top, v, "one of " + ", ".join(META_KEYS + SECTIONS) + hint)
    if "name" not in meta:
        raise ProfileError(f'{where}: name is missing (expected name = "...")')
    return {"meta": meta, "settings": settings, "limits": limits}
