"""Plain-words findings of a stem set, with positions (the values come from checker.stems)."""

from __future__ import annotations

from typing import Any

#: Reporting threshold for the plain-words null finding (not a limit; limits are in profiles).
NULL_FINDING_DB = -60.0


def _fmt_db(x) -> str:
    if x is None:
        return "undefined"
    return f"{x:.1f} dB" if x != float("-inf") else "-inf dB"


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
    common = v["set_common_start_s"]
    for n in v["set_slipped_stems"]:
        t = v["set_start_times_s"][names.index(n)]
        rate = v["set_sample_rates_hz"][names.index(n)]
        frames = round((t - common) * rate)
        when = "later" if frames > 0 else "earlier"
        out.append(
            f"stem {n} starts at {t:.6f} s, {abs(frames)} frames {when} than the set's "
            f"common start at {common:.6f} s: slipped?"
        )
    if v.get("sum_clipped_samples"):
        out.append(
            f"the sum of the stems reaches full scale first at {v['sum_first_clip_s']:.6f} s "
            f"({v['sum_clipped_samples']} samples at or above full scale; "
            f"sum sample peak {v['sum_sample_peak_dbfs']:+.2f} dBFS)"
        )
    res = v.get("null_residual_db")
    if res is not None and res > NULL_FINDING_DB:
        text = f"the stems do not rebuild the mix: residual {_fmt_db(res)} relative to the mix"
        if v.get("null_fit_offset_samples") is not None:
            inverted = ", polarity inverted" if v["null_fit_inverted"] else ""
            text += (
                f"; best fit: gain {v['null_fit_gain_db']:+.2f} dB, offset "
                f"{v['null_fit_offset_samples']} samples{inverted} leaves "
                f"{_fmt_db(v['null_fit_residual_db'])}"
            )
        out.append(text)
    return out
