"""Plain-words findings of a stem set, with positions (the values come from checker.stems.sets)."""

from __future__ import annotations

from typing import Any

#: Reporting threshold for the plain-words null finding (not a limit; limits are in profiles).
NULL_FINDING_DB = -60.0


def _fmt_db(x) -> str:
    if x is None:
        return "undefined"
    return f"{x:.1f} dB" if x != float("-inf") else "-inf dB"


def _offset_words(v: dict[str, Any], i: int) -> str:
    """'is 480 samples (10.00 ms) late against the reference mix'."""
    frames = v["set_stem_offsets_samples"][i]
    ms = v["set_stem_offsets_ms"][i]
    when = "late" if frames > 0 else "early"
    ref = v.get("set_alignment_reference") or "other stems"
    against = "the other stems" if ref == "other stems" else f"the {ref}"
    return f"is {abs(frames)} samples ({abs(ms):.2f} ms) {when} against {against}"


def _move_words(v: dict[str, Any], i: int) -> str:
    frames = v["set_stem_offsets_samples"][i]
    where = "earlier" if frames > 0 else "later"
    return f"move {v['set_stem_names'][i]} {abs(frames)} samples {where}"


def findings(v: dict[str, Any], names: list[str]) -> list[str]:
    out: list[str] = []
    if v["set_format_mismatch"]:
        for key, mix_key, label in (
            ("set_sample_rates_hz", "set_mix_sample_rate_hz", "sample rate"),
            ("set_subtypes", "set_mix_subtype", "sample format"),
            ("set_channel_counts", "set_mix_channels", "channel count"),
        ):
            per = {n: x for n, x in zip(names, v[key], strict=True) if x is not None}
            if v[mix_key] is not None:
                per["mix"] = v[mix_key]
            if len(set(per.values())) > 1:
                listing = ", ".join(f"{n} {x}" for n, x in per.items())
                out.append(f"the set differs in {label}: {listing}")
    gap = v["set_length_mismatch_frames"]
    if gap:
        per = {n: x for n, x in zip(names, v["set_length_frames"], strict=True) if x is not None}
        if v["set_mix_length_frames"] is not None:
            per["mix"] = v["set_mix_length_frames"]
        short = min(per, key=per.get)
        long = max(per, key=per.get)
        out.append(
            f"lengths differ by {gap} frames: {short} has {per[short]} frames, "
            f"{long} has {per[long]}"
        )
    if v.get("set_mix_offset_samples"):
        d = v["set_mix_offset_samples"]
        ms = 1000.0 * d / v["set_mix_sample_rate_hz"]
        out.append(
            f"the reference mix is {abs(d)} samples ({abs(ms):.2f} ms) "
            f"{'late' if d > 0 else 'early'} against every stem: the stems agree with each other"
        )
    for n in v["set_slipped_stems"]:
        out.append(f"stem {n} {_offset_words(v, names.index(n))}: slipped?")
    if v.get("sum_clipped_samples"):
        out.append(
            f"the sum of the stems reaches full scale first at {v['sum_first_clip_s']:.6f} s "
            f"({v['sum_clipped_samples']} samples at or above full scale; "
            f"sum sample peak {v['sum_sample_peak_dbfs']:+.2f} dBFS)"
        )
    res = v.get("null_residual_db")
    if res is not None and res > NULL_FINDING_DB:
        text = f"the stems do not rebuild the mix: residual {_fmt_db(res)} relative to the mix"
        moved = v.get("set_slipped_stems") or []
        if moved and v.get("set_alignment_reference") == "reference mix":
            text += "; " + ", ".join(f"{n} {_offset_words(v, names.index(n))}" for n in moved)
            text += ": " + "; ".join(_move_words(v, names.index(n)) for n in moved)
            text += ", then test again"
        elif v.get("null_fit_offset_samples") is not None:
            inverted = ", polarity inverted" if v["null_fit_inverted"] else ""
            text += (
                f"; best fit: gain {v['null_fit_gain_db']:+.2f} dB, offset "
                f"{v['null_fit_offset_samples']} samples{inverted} leaves "
                f"{_fmt_db(v['null_fit_residual_db'])}"
            )
        out.append(text)
    return out
