"""Delivery profiles: our own TOML format -> a validated, frozen Profile.

A profile file (see DEVELOPERS.md and checker/profiles/*.toml)::

    name = "my-show"
    title = "My show, stereo delivery"
    version = "2"
    description = "One line shown by `deliverycheck profiles`."
    extends = "ebu-r128"            # a built-in name or a path to another .toml

    [loudness]
    mono_loudness = "dual_mono"     # or "single_channel": how mono files are judged
    integrated_target_lufs = { value = -23.0, tolerance_lu = 0.5, severity = "fail", source = "..." }

    [peaks]
    true_peak_max_dbtp = { value = -2.0, severity = "fail", source = "house rule" }
    sample_peak_max_dbfs = "off"    # drop a limit inherited from the parent

Sections group the limits (format, loudness, peaks, levels, silence, channels,
bandwidth, metadata, stems); every limit key is listed in checker/limitdefs.py.
A child inherits its parent's metadata and limits, then overrides them field by
field; changing a value requires a new ``source``.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from checker.errors import ProfileError
from checker.limitdefs import (
    ALLOWED,
    BY_KEY,
    DECLARED,
    MAX,
    MIN,
    MUST_BE_TRUE,
    NO_CUTOFF_BELOW,
    ONE_OF,
    REQUIRED,
    SECTIONS,
    TARGET,
    UNIT_SUFFIXES,
    LimitDef,
)

BUILTIN_DIR = Path(__file__).parent / "profiles"
META_KEYS = ("name", "title", "version", "description", "extends")
SEVERITIES = ("fail", "warn")
MONO_CONVENTIONS = ("single_channel", "dual_mono")
#: Settings that are not limits: (section, key) -> allowed values.
SETTINGS = {("loudness", "mono_loudness"): MONO_CONVENTIONS}
OFF = "off"
_FIELDS = ("value", "severity", "source", "tolerance_lu", "warn_value")


@dataclass(frozen=True)
class Limit:
    key: str
    value: Any
    severity: str
    source: str
    tolerance_lu: float | None = None  # target kind only
    warn_value: float | None = None  # max/min only: a warning starts here

    @property
    def definition(self) -> LimitDef:
        return BY_KEY[self.key]

    @property
    def unit(self) -> str:
        return self.definition.unit

    def text(self) -> str:
        """The limit in plain words, e.g. "<= -1.0 dBTP" or "-23.0 +- 0.5 LU"."""
        d, u = self.definition, (" " + self.definition.unit).rstrip()
        if d.kind == TARGET:
            return f"{_num(self.value)} {d.unit} +- {_num(self.tolerance_lu)} LU"
        if d.kind in (MAX, MIN):
            op = "<=" if d.kind == MAX else ">="
            warn = f" (warn beyond {_num(self.warn_value)})" if self.warn_value is not None else ""
            return f"{op} {_num(self.value)}{u}{warn}"
        if d.kind == ONE_OF:
            return "one of " + ", ".join(str(v) for v in self.value) + u
        if d.kind == DECLARED:
            return f"within {_num(self.value)}{u} of the measurement"
        if d.kind == NO_CUTOFF_BELOW:
            return f"none below {_num(self.value)}{u}"
        if d.kind == ALLOWED:
            return "allowed" if self.value else "none"
        return "required" if self.value else "not required"


@dataclass(frozen=True)
class Profile:
    name: str
    title: str
    version: str
    description: str
    extends: str | None
    path: str
    limits: tuple[Limit, ...] = ()
    mono_loudness: str = "single_channel"
    lineage: tuple[str, ...] = field(default_factory=tuple)  # root ancestor first, self last

    def limit(self, key: str) -> Limit | None:
        for lim in self.limits:
            if lim.key == key:
                return lim
        return None

    def value(self, key: str) -> Any:
        lim = self.limit(key)
        return None if lim is None else lim.value

    @property
    def true_peak_ceiling_dbtp(self) -> float | None:
        """The ceiling measure() should count true-peak overs against."""
        v = self.value("true_peak_max_dbtp")
        return None if v is None else float(v)

    @property
    def integrated_target_lufs(self) -> float | None:
        v = self.value("integrated_target_lufs")
        return None if v is None else float(v)

    def limits_table(self) -> list[dict[str, Any]]:
        """One plain dict per limit, in catalogue order (reports and the run header)."""
        return [
            {
                "key": lim.key,
                "value": lim.value,
                "unit": lim.unit,
                "severity": lim.severity,
                "source": lim.source,
                "text": lim.text(),
                "tolerance": lim.tolerance_lu,
                "warn_value": lim.warn_value,
                "section": lim.definition.section,
                "scope": lim.definition.scope,
            }
            for lim in self.limits
        ]


# ---------------------------------------------------------------- helpers


def _num(x: Any) -> str:
    return f"{float(x):.1f}" if isinstance(x, float) else str(x)


def _show(v: Any) -> str:
    if isinstance(v, str):
        return f'"{v}"'
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{k} = {_show(x)}" for k, x in v.items()) + "}"
    if isinstance(v, list):
        return "[" + ", ".join(_show(x) for x in v) + "]"
    return str(v)


def _err(where: str, key: str, got: Any, expected: str) -> ProfileError:
    return ProfileError(f"{where}: {key} = {_show(got)} (expected {expected})")


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


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
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+)", str(exc))
        line = f", line {m.group(1)}" if m else ""
        raise ProfileError(f"{path}{line}: TOML syntax error: {exc}") from None


def _unknown_key(where: str, section: str, key: str, got: Any) -> ProfileError:
    dotted = f"{section}.{key}"
    d = BY_KEY.get(key)
    if d is not None:
        return _err(where, dotted, got, f"this limit in section [{d.section}]")
    stem, _, suffix = key.rpartition("_")
    if suffix in UNIT_SUFFIXES:
        for other in BY_KEY.values():
            o_stem, _, o_suffix = other.key.rpartition("_")
            if o_stem == stem and o_suffix != suffix:
                return _err(
                    where, dotted, got, f"{other.key}: this limit is in {other.unit or 'a count'}"
                )
    close = difflib.get_close_matches(key, list(BY_KEY), n=1)
    hint = f"; did you mean {close[0]}?" if close else ""
    return _err(where, dotted, got, f"a known limit key (see `deliverycheck profiles show`){hint}")


def _check_entry(where: str, section: str, key: str, entry: Any) -> dict[str, Any] | str:
    """Validate the fields present in one limit entry (completeness is checked after merging)."""
    dotted = f"{section}.{key}"
    if entry == OFF:
        return OFF
    if not isinstance(entry, dict):
        expected = '{ value = ..., severity = "fail"|"warn", source = "..." } or "off"'
        raise _err(where, dotted, entry, expected)
    d = BY_KEY[key]
    allowed = {"value", "severity", "source"}
    if d.kind == TARGET:
        allowed.add("tolerance_lu")
    if d.kind in (MAX, MIN):
        allowed.add("warn_value")
    for f in entry:
        if f not in allowed:
            raise _err(where, f"{dotted}.{f}", entry[f], "one of " + ", ".join(sorted(allowed)))
    if "value" in entry:
        _check_value(where, f"{dotted}.value", d, entry["value"])
    if "severity" in entry and entry["severity"] not in SEVERITIES:
        raise _err(where, f"{dotted}.severity", entry["severity"], '"fail" or "warn"')
    if "source" in entry and (not isinstance(entry["source"], str) or not entry["source"].strip()):
        raise _err(
            where,
            f"{dotted}.source",
            entry["source"],
            'the standard and clause, or "common practice"',
        )
    for f in ("tolerance_lu", "warn_value"):
        if f in entry and not _is_number(entry[f]):
            raise _err(where, f"{dotted}.{f}", entry[f], _unit_word(d))
    if "tolerance_lu" in entry and entry["tolerance_lu"] < 0:
        raise _err(where, f"{dotted}.tolerance_lu", entry["tolerance_lu"], "a number >= 0 in LU")
    return dict(entry)


def _check_value(where: str, dotted: str, d: LimitDef, v: Any) -> None:
    if d.kind in (ALLOWED, REQUIRED, MUST_BE_TRUE):
        if not isinstance(v, bool):
            raise _err(where, dotted, v, "true or false")
    elif d.kind == ONE_OF:
        want = int if d.item == "int" else str
        ok = (
            isinstance(v, list)
            and v
            and all(isinstance(x, want) and not isinstance(x, bool) for x in v)
        )
        if not ok:
            words = "integers" if want is int else "strings"
            raise _err(
                where,
                dotted,
                v,
                f"a non-empty list of {words}" + (f" in {d.unit}" if d.unit else ""),
            )
    else:
        if not _is_number(v):
            raise _err(where, dotted, v, _unit_word(d))
        if d.item == "int" and (not isinstance(v, int) or v < 0):
            raise _err(where, dotted, v, "a whole number >= 0")
        if d.kind == DECLARED and v < 0:
            raise _err(where, dotted, v, f"a tolerance >= 0 in {d.unit}")


def _parse_layer(path: Path) -> dict[str, Any]:
    """One file -> {"meta": {...}, "settings": {...}, "limits": {key: entry | OFF}}."""
    raw = _read_toml(path)
    where = str(path)
    meta: dict[str, Any] = {}
    settings: dict[str, Any] = {}
    limits: dict[str, Any] = {}
    for top, v in raw.items():
        if top in META_KEYS:
            if not isinstance(v, str) or not v.strip():
                raise _err(where, top, v, "a non-empty string")
            meta[top] = v
        elif top in SECTIONS:
            if not isinstance(v, dict):
                raise _err(where, top, v, f"a table [{top}]")
            for key, entry in v.items():
                if (top, key) in SETTINGS:
                    if entry not in SETTINGS[(top, key)]:
                        choices = " or ".join(f'"{c}"' for c in SETTINGS[(top, key)])
                        raise _err(where, f"{top}.{key}", entry, choices)
                    settings[key] = entry
                elif key in BY_KEY and BY_KEY[key].section == top:
                    limits[key] = _check_entry(where, top, key, entry)
                else:
                    raise _unknown_key(where, top, key, entry)
        else:
            close = difflib.get_close_matches(top, list(META_KEYS) + list(SECTIONS), n=1)
            hint = f"; did you mean {close[0]}?" if close else ""
            raise _err(where, top, v, "one of " + ", ".join(META_KEYS + SECTIONS) + hint)
    if "name" not in meta:
        raise ProfileError(f'{where}: name is missing (expected name = "...")')
    return {"meta": meta, "settings": settings, "limits": limits}


# ---------------------------------------------------------------- resolving


def _find(name_or_path: str, relative_to: Path | None = None) -> Path:
    s = str(name_or_path)
    looks_like_path = s.endswith(".toml") or "/" in s or "\\" in s
    if looks_like_path:
        p = Path(s).expanduser()
        if not p.is_absolute() and relative_to is not None:
            p = relative_to / p
        if not p.is_file():
            raise ProfileError(f"{s}: profile file not found (expected a readable .toml file)")
        return p
    p = BUILTIN_DIR / f"{s}.toml"
    if p.is_file():
        return p
    names = ", ".join(sorted(x.stem for x in BUILTIN_DIR.glob("*.toml")))
    raise ProfileError(f'profile = "{s}" (expected a built-in profile: {names}; or a .toml path)')


def _resolve(path: Path, seen: tuple[Path, ...]) -> tuple[dict, dict, dict, tuple[str, ...]]:
    real = path.resolve()
    if real in seen:
        chain = " -> ".join(str(p) for p in (*seen, real))
        raise ProfileError(
            f"{path}: extends forms a cycle: {chain} (expected a chain ending in a profile without extends)"
        )
    layer = _parse_layer(path)
    meta, settings, limits = {}, {}, {}
    lineage: tuple[str, ...] = ()
    parent = layer["meta"].get("extends")
    if parent is not None:
        try:
            ppath = _find(parent, relative_to=path.parent)
        except ProfileError as exc:
            raise ProfileError(f'{path}: extends = "{parent}": parent not found ({exc})') from None
        meta, settings, limits, lineage = _resolve(ppath, (*seen, real))
        meta = {k: v for k, v in meta.items() if k != "extends"}
    meta.update(layer["meta"])
    settings.update(layer["settings"])
    limits = {k: dict(v) for k, v in limits.items()}
    for key, entry in layer["limits"].items():
        section = BY_KEY[key].section
        if entry == OFF:
            limits.pop(key, None)
            continue
        inherited = limits.get(key)
        changes_value = any(f in entry for f in ("value", "tolerance_lu", "warn_value"))
        if inherited is not None and changes_value and "source" not in entry:
            raise ProfileError(
                f"{path}: {section}.{key} changes the inherited value without a source "
                f'(expected source = "..." for the new value)'
            )
        merged = {**(inherited or {}), **entry}
        for f in ("value", "severity", "source"):
            if f not in merged:
                raise _err(str(path), f"{section}.{key}", entry, f"a {f} field")
        d = BY_KEY[key]
        if d.kind == TARGET and "tolerance_lu" not in merged:
            raise _err(str(path), f"{section}.{key}", entry, "a tolerance_lu field")
        w = merged.get("warn_value")
        if w is not None:
            stricter = w < merged["value"] if d.kind == MAX else w > merged["value"]
            if not stricter or merged["severity"] != "fail":
                raise _err(
                    str(path),
                    f"{section}.{key}.warn_value",
                    w,
                    f"a value {'below' if d.kind == MAX else 'above'} value = {merged['value']} "
                    'on a limit with severity = "fail"',
                )
        limits[key] = merged
    return meta, settings, limits, (*lineage, layer["meta"]["name"])


def load_profile(name_or_path: str) -> Profile:
    """A built-in profile by name (e.g. "ebu-r128") or a profile file by path."""
    return _load_path(_find(name_or_path))


def _load_path(path: Path) -> Profile:
    meta, settings, limits, lineage = _resolve(path, ())
    ordered = tuple(
        Limit(
            key=d.key,
            value=limits[d.key]["value"],
            severity=limits[d.key]["severity"],
            source=limits[d.key]["source"],
            tolerance_lu=_float_or_none(limits[d.key].get("tolerance_lu")),
            warn_value=_float_or_none(limits[d.key].get("warn_value")),
        )
        for d in BY_KEY.values()
        if d.key in limits
    )
    return Profile(
        name=meta["name"],
        title=meta.get("title", meta["name"]),
        version=meta.get("version", "1"),
        description=meta.get("description", ""),
        extends=_own_extends(path),
        path=str(path),
        limits=ordered,
        mono_loudness=settings.get("mono_loudness", "single_channel"),
        lineage=lineage,
    )


def _own_extends(path: Path) -> str | None:
    return _parse_layer(path)["meta"].get("extends")


def _float_or_none(x: Any) -> float | None:
    return None if x is None else float(x)


def validate_profile_file(path) -> Profile:
    """Load a profile file by path, raising ProfileError with file, key, value and expectation."""
    p = Path(path)
    if not p.is_file():
        raise ProfileError(f"{p}: profile file not found (expected a readable .toml file)")
    return _load_path(p)


def list_profiles() -> list[Profile]:
    """Every built-in profile, sorted by name."""
    return sorted((load_profile(p.stem) for p in BUILTIN_DIR.glob("*.toml")), key=lambda p: p.name)
