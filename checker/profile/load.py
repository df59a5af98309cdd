"""Delivery profiles: our own TOML format -> a validated, frozen Profile.

A profile file (see DEVELOPERS.md and checker/profile/builtin/*.toml)::

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

    [silence]
    silence_threshold_dbfs = { value = -55, source = "house rule" }   # a setting, not a limit

Sections group the limits (format, loudness, peaks, levels, silence, channels,
bandwidth, downmix, metadata, stems); every limit key is listed in checker/profile/catalogue.py.
Settings that are not limits: ``[loudness] mono_loudness``, ``[format] channel_layout``
(the channel order of the delivery's files with as many channels, e.g. "L C R Ls Rs LFE") and
``[silence] silence_threshold_dbfs`` (checker.profile.settings.SETTING_DEFS).
A child inherits its parent's metadata and limits, then overrides them field by
field; changing a value requires a new ``source``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from checker.model.errors import ProfileError
from checker.profile.catalogue import (
    ALLOWED,
    BY_KEY,
    DECLARED,
    MAX,
    MIN,
    NO_CUTOFF_BELOW,
    ONE_OF,
    PART_MAX,
    PART_TARGET,
    TARGET,
    LimitDef,
)
from checker.profile.settings import SETTING_BY_KEY
from checker.profile.syntax import (  # noqa: F401  (re-exported for callers)
    MONO_CONVENTIONS,
    OFF,
    PROGRAMME_SETTINGS,
    SEVERITIES,
    err,
    parse_layer,
    redacted,
)

BUILTIN_DIR = Path(__file__).parent / "builtin"


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
        """The limit in plain words, e.g. "<= -1.0 dBTP" or "target -23.0 LUFS +- 0.5 LU"
        (never starting with a minus sign, which a spreadsheet would read as a formula)."""
        d, u = self.definition, (" " + self.definition.unit).rstrip()
        if d.kind == TARGET:
            return f"target {_num(self.value)} {d.unit} +- {_num(self.tolerance_lu)} LU"
        if d.kind == PART_TARGET:
            return f"each part within +- {_num(self.value)} LU of the integrated target"
        if d.kind == PART_MAX:
            return f"each part <= {_num(self.value)}{u}"
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
    #: head/tail silence threshold (short-time RMS) and its source (checker.profile.catalogue)
    silence_threshold_dbfs: float = SETTING_BY_KEY["silence_threshold_dbfs"].default
    silence_threshold_source: str = SETTING_BY_KEY["silence_threshold_dbfs"].default_source
    #: Channel order of the delivery's files with as many channels ("L C R Ls Rs LFE"), or None.
    channel_layout: str | None = None
    lineage: tuple[str, ...] = field(default_factory=tuple)  # root ancestor first, self last
    #: The encode round trip asked for ([encode] codec, bit_rate_kbps), or None.
    encode: tuple[str, float] | None = None
    #: [programme] settings (checker/analysis/span.py): span = "auto" | "whole_file",
    #: in_point, out_point (seconds or timecode), timecode_fps, break_min_s.
    programme: tuple[tuple[str, Any], ...] = ()

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


def _num(x: Any) -> str:
    return f"{float(x):.1f}" if isinstance(x, float) else str(x)


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


#: The longest ``extends`` chain: the file named plus this many ancestors.
MAX_EXTENDS_DEPTH = 16


def _chain(path: Path) -> list[tuple[Path, dict[str, Any]]]:
    """The file and its ancestors through ``extends``, each parsed: [(path, layer)], the
    file named first. Errors in an ancestor name it but never repeat its contents."""
    chain: list[tuple[Path, dict[str, Any]]] = []
    seen: list[Path] = []
    while True:
        real = path.resolve()
        if real in seen:
            cycle = " -> ".join(str(p) for p in (*seen, real))
            raise ProfileError(
                f"{chain[0][0]}: extends forms a cycle: {cycle} "
                "(expected a chain ending in a profile without extends)"
            )
        if len(chain) > MAX_EXTENDS_DEPTH:
            raise ProfileError(
                f"{chain[0][0]}: extends chain longer than {MAX_EXTENDS_DEPTH} parents "
                f"(expected at most {MAX_EXTENDS_DEPTH}; stopped at {path})"
            )
        seen.append(real)
        try:
            layer = parse_layer(path)
        except ProfileError as exc:
            if not chain:
                raise
            raise _in_parent(chain, exc) from None
        chain.append((path, layer))
        parent = layer["meta"].get("extends")
        if parent is None:
            return chain
        try:
            path = _find(parent, relative_to=path.parent)
        except ProfileError as exc:
            if len(chain) == 1:
                raise ProfileError(
                    f'{path}: extends = "{parent}": parent not found ({exc})'
                ) from None
            raise ProfileError(
                f"{chain[0][0]}: extends (from {path}): parent not found "
                "(expected a built-in profile name or a readable .toml file)"
            ) from None


def _in_parent(chain: list[tuple[Path, dict[str, Any]]], exc: ProfileError) -> ProfileError:
    """An error in an ancestor, told from the file the user named, without the ancestor's
    values (they may be anything: a path can point extends at any file)."""
    child, layer = chain[-1]
    return ProfileError(
        f'{chain[0][0]}: extends = "{layer["meta"]["extends"]}" (from {child}): '
        f"the parent is not a valid profile: {redacted(exc)}"
    )


def _resolve(path: Path) -> tuple[dict, dict, dict, tuple[str, ...]]:
    chain = _chain(path)
    meta: dict[str, Any] = {}
    settings: dict[str, Any] = {}
    limits: dict[str, Any] = {}
    for depth in range(len(chain) - 1, -1, -1):
        layer_path, layer = chain[depth]
        meta = {k: v for k, v in meta.items() if k != "extends"}
        meta.update(layer["meta"])
        settings.update(layer["settings"])
        try:
            limits = _merge(layer_path, layer, limits)
        except ProfileError as exc:
            if depth == 0:
                raise
            raise _in_parent(chain[: depth + 1], exc) from None
    lineage = tuple(layer["meta"]["name"] for _, layer in reversed(chain))
    return meta, settings, limits, lineage


def _merge(path: Path, layer: dict[str, Any], inherited_limits: dict) -> dict:
    """The limits of ``layer`` over the inherited ones."""
    limits = {k: dict(v) for k, v in inherited_limits.items()}
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
                raise err(str(path), f"{section}.{key}", entry, f"a {f} field")
        d = BY_KEY[key]
        if d.kind == TARGET and "tolerance_lu" not in merged:
            raise err(str(path), f"{section}.{key}", entry, "a tolerance_lu field")
        w = merged.get("warn_value")
        if w is not None:
            stricter = w < merged["value"] if d.kind == MAX else w > merged["value"]
            if not stricter or merged["severity"] != "fail":
                raise err(
                    str(path),
                    f"{section}.{key}.warn_value",
                    w,
                    f"a value {'below' if d.kind == MAX else 'above'} value = {merged['value']} "
                    'on a limit with severity = "fail"',
                )
        limits[key] = merged
    return limits


def load_profile(name_or_path: str) -> Profile:
    """A built-in profile by name (e.g. "ebu-r128") or a profile file by path."""
    return _load_path(_find(name_or_path))


def _load_path(path: Path) -> Profile:
    meta, settings, limits, lineage = _resolve(path)
    ordered = tuple(
        Limit(
            key=d.key,
            value=_typed(d, limits[d.key]["value"]),
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
        extends=meta.get("extends"),
        path=str(path),
        limits=ordered,
        mono_loudness=settings.get("mono_loudness", "single_channel"),
        **_silence_setting(settings),
        channel_layout=settings.get("channel_layout"),
        lineage=lineage,
        encode=_encode_request(path, settings, limits),
        programme=tuple(
            (k, settings[k]) for k in PROGRAMME_SETTINGS if settings.get(k) is not None
        ),
    )


def _encode_request(path: Path, settings: dict, limits: dict) -> tuple[str, float] | None:
    codec, rate = settings.get("codec"), settings.get("bit_rate_kbps")
    if (codec is None) != (rate is None):
        raise ProfileError(
            f"{path}: encode = codec {codec!r}, bit_rate_kbps {rate!r} (expected both or neither)"
        )
    if codec is None and "encoded_true_peak_max_dbtp" in limits:
        raise ProfileError(
            f"{path}: encode.encoded_true_peak_max_dbtp without a round trip (expected "
            '[encode] codec = "mp3" and bit_rate_kbps = 128, for example)'
        )
    return None if codec is None else (str(codec), float(rate))


def _silence_setting(settings: dict[str, Any]) -> dict[str, Any]:
    d = SETTING_BY_KEY["silence_threshold_dbfs"]
    got = settings.get(d.key, {"value": d.default, "source": d.default_source})
    return {"silence_threshold_dbfs": got["value"], "silence_threshold_source": got["source"]}


def _typed(d: LimitDef, v: Any) -> Any:
    """Numbers of number-valued limits as float (TOML `-1` and `-1.0` mean the same)."""
    if d.item == "number" and not isinstance(v, (bool, list)):
        return float(v)
    return v


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
