"""Pure evaluation: (Measurement, Profile) -> Verdict. No I/O, no audio.

One Flag per violated limit, with the measured value, the limit, the unit, a
plain-words message, the position in the file where one exists, and the
limit's source. A limited value that is None (or missing) gives an explicit
"could not be measured" flag with the limit's severity, never a pass.

``measurement`` is anything with a ``values`` dict (a Measurement, a stem set's
result) or a plain mapping. Limits whose scope ("file" or "set") does not match
the values are skipped: a stem set's values carry ``set_*`` keys.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from checker.judge.gain import advise, judged_loudness
from checker.judge.wording import (
    _at,
    _cap,
    _flag,
    _present,
    _with_unit,
    fmt,
    position_of,
    unmeasured,
)
from checker.meters.silence import silence_at
from checker.model.units import UNIT_SUFFIXES
from checker.model.verdict import ERROR, PASS, Flag, Verdict, worst_status
from checker.profile.catalogue import (
    ALLOWED,
    DECLARED,
    FILE,
    MAX,
    MIN,
    MUST_BE_TRUE,
    NO_CUTOFF_BELOW,
    ONE_OF,
    PART_MAX,
    PART_TARGET,
    REQUIRED,
    SET,
    TARGET,
    measured_keys,
)
from checker.profile.derived import with_derived
from checker.profile.load import Limit, Profile

#: Comparisons allow this much float slack, so a value exactly at a limit passes.
EPS = 1e-9


def values_of(measurement: Any) -> Mapping[str, Any]:
    if isinstance(measurement, Mapping):
        return measurement
    return measurement.values


def scope_of(values: Mapping[str, Any]) -> str:
    return SET if any(k.startswith("set_") for k in values) else FILE


def evaluate(measurement: Any, profile: Profile, *, scope: str | None = None) -> Verdict:
    """Judge one measurement (or a stem set's values) against a profile."""
    if measurement is None:
        return Verdict(status=ERROR)
    values = values_of(measurement)
    scope = scope or scope_of(values)
    if scope == FILE:
        values = at_silence_threshold(with_derived(values), profile)
    flags: list[Flag] = []
    for lim in profile.limits:
        d = lim.definition
        if d.scope != scope:
            continue
        channels = values.get("channels")
        if d.min_channels > 1 and isinstance(channels, int) and channels < d.min_channels:
            continue
        if d.applies_if is not None and not _present(values.get(d.applies_if)):
            continue
        flag = check_limit(lim, values, profile)
        if flag is not None:
            flags.append(flag)
    status = worst_status(f.severity for f in flags) if flags else PASS
    gain = advise(values, profile) if scope == FILE else None
    return Verdict(status=status, flags=tuple(flags), gain=gain)


def at_silence_threshold(values: Mapping[str, Any], profile: Profile) -> Mapping[str, Any]:
    """Leading and trailing silence at the profile's threshold, read from the measured
    curve (checker.meters.silence.silence_at); measurements stay profile-free."""
    threshold = getattr(profile, "silence_threshold_dbfs", None)
    if threshold is None or values.get("silence_threshold_dbfs") == threshold:
        return values
    got = silence_at(values, threshold)
    if got is None:
        return values
    lead, trail = got
    return {
        **values,
        "leading_silence_s": lead,
        "trailing_silence_s": trail,
        "silence_threshold_dbfs": threshold,
    }


# ---------------------------------------------------------------- the checks


def check_limit(lim: Limit, values: Mapping[str, Any], profile: Profile) -> Flag | None:
    """The Flag for one limit, or None when the values meet it."""
    kind = lim.definition.kind
    return _CHECKS[kind](lim, values, profile)


def _check_max_min(lim: Limit, values, profile) -> Flag | None:
    d = lim.definition
    key = d.measure
    m = values.get(key)
    if not _present(m):
        if _none_is_result(d, values, key):
            return None
        return unmeasured(lim, values, key)
    sign = 1.0 if d.kind == MAX else -1.0
    word = "above" if d.kind == MAX else "below"
    pos = position_of(values, d.position)
    first = isinstance(values.get(d.position or ""), list)
    if sign * (m - lim.value) > EPS:
        limit, severity, level = lim.value, lim.severity, "limit"
    elif lim.warn_value is not None and sign * (m - lim.warn_value) > EPS:
        limit, severity, level = lim.warn_value, "warn", "warning level"
    else:
        return None
    detail = ""
    if d.detail is not None and values.get(d.detail[0]):
        items = values[d.detail[0]]
        items = items if isinstance(items, list) else [items]
        detail = f" ({d.detail[1]}: {', '.join(str(i) for i in items)})"
    if d.advice is not None and severity == lim.severity:
        detail += d.advice(values, m, limit)
    if d.caveat is not None and values.get(d.caveat[0]) is False:
        severity = "warn"
        detail += f" ({d.caveat[1]}: at most a warning)"
    msg = (
        f"{_lead(values, d.lead)}{d.what if d.lead else _cap(d.what)} is "
        f"{_with_unit(m, d.unit)}{_at(pos, first)}, {word} the {level} of "
        f"{_with_unit(limit, d.unit)}{detail}: {d.hint}."
    )
    return _flag(lim, m, limit, msg, pos, severity)


def _lead(values: Mapping[str, Any], key: str | None) -> str:
    note = values.get(key) if key else None
    return f"{_cap(note)}; " if isinstance(note, str) and note else ("" if not key else "The ")


def _none_is_result(d, values: Mapping[str, Any], key: str) -> bool:
    """None is a result, not a failure to measure (see profile.catalogue: none_means_ok, ran)."""
    if not d.none_means_ok or key not in values:
        return False
    return d.ran is None or _present(values.get(d.ran))


def _check_target(lim: Limit, values, profile) -> Flag | None:
    d = lim.definition
    if d.measure == "integrated_lufs":
        m, key, how = judged_loudness(values, profile)
    else:  # speech or anchor loudness: judged as measured
        m, key, how = values.get(d.measure), d.measure, ""
    if not _present(m):
        if _none_is_result(d, values, key):
            return None
        return unmeasured(lim, values, key)
    diff = m - lim.value
    if abs(diff) <= lim.tolerance_lu + EPS:
        return None
    word = "above" if diff > 0 else "below"
    msg = (
        f"{_cap(d.what)} is {_with_unit(m, d.unit)}{how}, {abs(diff):.2f} LU {word} the target "
        f"of {_with_unit(lim.value, d.unit)} (tolerance +- {fmt(float(lim.tolerance_lu))} LU): "
        f"apply {-diff:+.2f} dB of gain"
        + (" (see the gain advice)." if d.measure == "integrated_lufs" else f" ({d.hint}).")
    )
    return _flag(lim, m, lim.text(), msg)


def _check_one_of(lim: Limit, values, profile) -> Flag | None:
    d = lim.definition
    m = values.get(d.measure)
    if not _present(m):
        return unmeasured(lim, values, d.measure)
    if m in lim.value:
        return None
    allowed = ", ".join(str(v) for v in lim.value)
    msg = (
        f"{_cap(d.what)} is {_with_unit(m, d.unit)}, not one of the allowed {allowed}"
        f"{' ' + d.unit if d.unit else ''}: {d.hint}."
    )
    return _flag(lim, m, list(lim.value), msg)


def _channel_words(items: list) -> str:
    """[1] -> "channel 2"; [0, 1] -> "channels 1, 2"; [[0, 1]] -> "channels 1 and 2" (from 1)."""
    if all(isinstance(it, list) for it in items):
        pairs = "; ".join(" and ".join(str(int(i) + 1) for i in it[:2]) for it in items)
        return f"channels {pairs}"
    flat = [str(int(it) + 1) for it in items if not isinstance(it, list)]
    return ("channel " if len(flat) == 1 else "channels ") + ", ".join(flat)


def _check_allowed(lim: Limit, values, profile) -> Flag | None:
    d = lim.definition
    m = values.get(d.measure)
    if not _present(m):
        return unmeasured(lim, values, d.measure)
    if lim.value or not m:
        return None
    msg = f"{_cap(d.what)} found ({_channel_words(list(m))}, counting from 1): {d.hint}."
    return _flag(lim, m, "none", msg)


def carrier_of(declared_key: str) -> str:
    """The metadata carrier a declared_* key comes from (bext keys carry no carrier name)."""
    rest = declared_key.removeprefix("declared_")
    for prefix, name in (("ixml_", "iXML"), ("axml_", "axml"), ("gain_tag_", "gain tag")):
        if rest.startswith(prefix):
            return name
    return "bext"


def _check_declared(lim: Limit, values, profile) -> Flag | None:
    """Every carrier's declared value (all but the last key) against the measured one."""
    d = lim.definition
    *dec_keys, meas_key = measured_keys(d)
    declared = {k: values.get(k) for k in dec_keys if _present(values.get(k))}
    if not declared:
        return None  # absence is judged by declared_loudness_required
    m = values.get(meas_key)
    if not _present(m):
        return unmeasured(lim, values, meas_key)
    parts, worst, worst_diff = [], None, -1.0
    for dec_key, value in declared.items():
        diff = math.inf if isinstance(m, float) and math.isinf(m) else abs(value - m)
        if diff <= lim.value + EPS:
            continue
        if diff > worst_diff:
            worst, worst_diff = value, diff
        unit = UNIT_SUFFIXES[dec_key.rpartition("_")[2]]
        parts.append(
            f"{d.what} ({carrier_of(dec_key)}) is {_with_unit(value, unit)} but "
            f"{_with_unit(m, unit)} was measured ({fmt(diff)} {d.unit} apart, "
            f"tolerance {fmt(float(lim.value))} {d.unit})"
        )
    if not parts:
        return None
    return _flag(lim, worst, lim.value, f"{_cap('; '.join(parts))}: {d.hint}.")


def _check_required(lim: Limit, values, profile) -> Flag | None:
    d = lim.definition
    if not lim.value:
        return None
    missing = [k for k in measured_keys(d) if not _present(values.get(k))]
    if not missing:
        return None
    msg = f"{_cap(d.what)} missing: {', '.join(missing)}: {d.hint}."
    return _flag(lim, missing, "present", msg)


def _check_true(lim: Limit, values, profile) -> Flag | None:
    d = lim.definition
    m = values.get(d.measure)
    if not _present(m):
        if d.none_means_ok and d.measure in values:
            return None  # e.g. a container whose length this reader does not check
        return unmeasured(lim, values, d.measure)
    if not lim.value or m is True:
        return None
    return _flag(lim, m, True, f"{_cap(d.what)}: no: {d.hint}.")


def _check_cutoff(lim: Limit, values, profile) -> Flag | None:
    d = lim.definition
    if d.measure not in values:
        return unmeasured(lim, values, d.measure)
    m = values.get(d.measure)
    if not _present(m) or m >= lim.value - EPS:
        return None  # None: no steep cutoff found
    msg = (
        f"{_lead(values, d.lead)}{d.what} at {m / 1000:.1f} kHz is below the limit of "
        f"{lim.value / 1000:g} kHz: {d.hint}."
    )
    return _flag(lim, m, lim.value, msg)


def _check_parts(lim: Limit, values, profile) -> Flag | None:
    """Per-part limits: one flag naming every part off the limit and its time range. The
    part target is the profile's integrated target, else the programme's own integrated
    loudness (parts consistent with each other)."""
    d = lim.definition
    parts = values.get("parts")
    if not isinstance(parts, list):
        msg = (
            f"{_cap(d.what)} could not be measured: the file was not split into parts (set "
            f"[programme] break_min_s, or --break-min-s); the limit ({lim.text()}) was not checked."
        )
        return _flag(lim, None, lim.value, msg)
    target, against = None, ""
    if d.kind == PART_TARGET:
        target, against = profile.value("integrated_target_lufs"), "the target"
        if target is None:
            target, against = values.get("integrated_lufs"), "the programme's integrated loudness"
        if not _present(target):
            return unmeasured(lim, values, "integrated_lufs")
    off, measured, pos = [], None, None
    for p in parts:
        m = p.get(d.part_field)
        where = f"part {p.get('part')} ({fmt(p.get('start_s'))}-{fmt(p.get('end_s'))} s)"
        if not _present(m):
            off.append(f"{where} not measurable")
        elif (abs(m - target) if target is not None else m) - lim.value > EPS:
            off.append(f"{where} {_with_unit(m, 'LUFS' if target is not None else d.unit)}")
        else:
            continue
        if pos is None:
            measured, pos = m, p.get("start_s")
    if not off:
        return None
    want = (
        f"within +- {fmt(lim.value)} LU of {against} ({_with_unit(target, 'LUFS')})"
        if target is not None
        else f"at most {_with_unit(lim.value, d.unit)}"
    )
    msg = f"{_cap(d.what)} must be {want}; off: {', '.join(off)}: {d.hint}."
    return _flag(lim, measured, lim.text(), msg, pos)


_CHECKS = {
    PART_TARGET: _check_parts,
    PART_MAX: _check_parts,
    MAX: _check_max_min,
    MIN: _check_max_min,
    TARGET: _check_target,
    ONE_OF: _check_one_of,
    ALLOWED: _check_allowed,
    DECLARED: _check_declared,
    REQUIRED: _check_required,
    MUST_BE_TRUE: _check_true,
    NO_CUTOFF_BELOW: _check_cutoff,
}
