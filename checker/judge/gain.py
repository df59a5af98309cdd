"""Gain advice: the plain gain that reaches the profile's level target, and what it breaks.

The target is the integrated loudness target, or, for profiles without one, the
middle of the RMS window (audiobook chapters).

Plain (linear) gain moves every level by the same number of dB, so the true
peak, sample peak and noise floor after the gain are the measured ones plus
the gain. So, approximately, is the true peak after an encode round trip (a codec is
close to linear in level; an estimate). Whether plain gain is enough is judged against
the profile's own limits on those quantities; if not, the advice says how much limiting (peaks)
or what else (noise floor, loudness range) is needed. Pure; no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from checker.model.units import DUAL_MONO_OFFSET_LU
from checker.model.verdict import GainAdvice
from checker.profile.load import Profile

#: Positive gains at or above this get a listening-level caution (our choice:
#: 10 dB is a large jump in monitoring level; no standard sets this).
LARGE_GAIN_DB = 10.0
EPS = 1e-9


def _finite(x: Any) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def judged_loudness(values: Mapping[str, Any], profile: Profile) -> tuple[Any, str, str]:
    """(loudness, key, words) under the profile's mono convention.

    BS.1770 weights a single channel 1.0, so a mono file reads 3.01 LU below the
    same audio on two identical channels. A "dual_mono" profile judges mono files
    as if played on both channels of a stereo pair.
    """
    if values.get("channels") == 1 and profile.mono_loudness == "dual_mono":
        v = values.get("integrated_dual_mono_lufs")
        single = values.get("integrated_lufs")
        if v is None and _finite(single):
            v = single + DUAL_MONO_OFFSET_LU
        return v, "integrated_dual_mono_lufs", " (mono file judged as dual mono)"
    if values.get("channels") == 1:
        return values.get("integrated_lufs"), "integrated_lufs", " (mono file, one channel)"
    return values.get("integrated_lufs"), "integrated_lufs", ""


def _after(x: Any, gain: float) -> Any:
    """A level after plain gain; -inf (silence) and None stay as they are."""
    return x + gain if _finite(x) else x


def _aim(values: Mapping[str, Any], profile: Profile) -> tuple[float, str, str] | str | None:
    """(gain, what it reaches, "" or words saying the level is already acceptable), a reason
    it cannot be computed,
    or None when the profile sets no level to aim at.

    Integrated loudness when the profile has a target; otherwise the middle of an RMS
    window (rms_min_dbfs .. rms_max_dbfs, e.g. audiobook chapters).
    """
    target = profile.integrated_target_lufs
    if target is not None:
        loudness, _, how = judged_loudness(values, profile)
        if not _finite(loudness):
            note = values.get("integrated_note")
            why = f" ({note})" if isinstance(note, str) and note else ""
            return f"No gain advice: integrated loudness could not be measured{why}."
        tol = profile.limit("integrated_target_lufs").tolerance_lu
        gain = target - loudness
        within = "Loudness is within tolerance" if abs(gain) <= tol + EPS else ""
        return gain, f"{target:.1f} LUFS{how}", within
    lo, hi = profile.value("rms_min_dbfs"), profile.value("rms_max_dbfs")
    if lo is None or hi is None:
        return None
    rms = values.get("rms_dbfs")
    if not _finite(rms):
        return "No gain advice: the RMS level could not be measured (or the file is silent)."
    middle = (lo + hi) / 2.0
    within = "The RMS level is within its window" if lo - EPS <= rms <= hi + EPS else ""
    return middle - rms, f"an RMS level of {middle:.1f} dBFS (the middle of {lo} to {hi})", within


def _problems(values, profile: Profile, gain: float, tp, sp, nf) -> tuple[list[str], list[str]]:
    """What plain gain would break (as plain words), and what cannot be judged."""
    problems: list[str] = []
    unknown: list[str] = []
    tp_max = profile.value("true_peak_max_dbtp")
    sp_max = profile.value("sample_peak_max_dbfs")
    nf_max = profile.value("noise_floor_max_dbfs")
    if tp_max is not None:
        if tp is None:
            unknown.append("true peak")
        elif tp > tp_max + EPS:
            problems.append(
                f"the true peak would reach {tp:.2f} dBTP: needs about {tp - tp_max:.1f} dB "
                f"of true-peak limiting (or a remix) to stay at or below {tp_max:.1f} dBTP"
            )
    if sp_max is not None:
        if sp is None:
            unknown.append("sample peak")
        elif sp > sp_max + EPS:
            problems.append(
                f"the sample peak would reach {sp:.2f} dBFS, above {sp_max:.1f} dBFS: needs "
                f"about {sp - sp_max:.1f} dB of peak limiting"
            )
    etp_max = profile.value("encoded_true_peak_max_dbtp")
    etp = _after(values.get("encoded_true_peak_dbtp"), gain)
    if etp_max is not None and _finite(etp) and etp > etp_max + EPS:
        codec, rate = profile.encode or ("the codec", 0.0)
        problems.append(
            f"after the {codec.upper()} round trip at {rate:g} kbit/s the true peak would reach "
            f"about {etp:.2f} dBTP (the measured encoded peak plus the gain; an estimate: one "
            f"encoder's behaviour): needs about {etp - etp_max:.1f} dB more headroom to stay at or "
            f"below {etp_max:.1f} dBTP"
        )
    if tp_max is None and sp_max is None and _finite(sp) and sp > 0.0:
        problems.append(f"the sample peak would reach {sp:+.2f} dBFS and clip: needs limiting")
    if nf_max is not None and _finite(nf) and nf > nf_max + EPS:
        problems.append(
            f"the noise floor would rise to {nf:.1f} dBFS, above the limit of {nf_max:.1f} dBFS: "
            "needs noise reduction or a cleaner source"
        )
    lra, lra_max = values.get("loudness_range_lu"), profile.value("loudness_range_max_lu")
    if _finite(lra) and lra_max is not None and lra > lra_max + EPS:
        problems.append(
            f"gain does not change the loudness range ({lra:.1f} LU > {lra_max:.1f} LU): "
            "needs compression or a remix"
        )
    return problems, unknown


def advise(values: Mapping[str, Any], profile: Profile) -> GainAdvice | None:
    """Gain advice for one file, or None when the profile sets no level to aim at."""
    aim = _aim(values, profile)
    if aim is None:
        return None
    if isinstance(aim, str):
        return GainAdvice(None, None, None, None, aim)
    gain, reaches, within = aim
    tp = _after(values.get("true_peak_dbtp"), gain)
    sp = _after(values.get("sample_peak_dbfs"), gain)
    nf = _after(values.get("noise_floor_dbfs"), gain)
    problems, unknown = _problems(values, profile, gain, tp, sp, nf)
    if within:
        shown = gain if round(gain, 2) != 0 else 0.0  # never "-0.00 dB"
        text = [f"{within}; {shown:+.2f} dB would reach {reaches} exactly."]
    else:
        text = [f"Apply {gain:+.2f} dB to reach {reaches}."]
    if problems:
        enough: bool | None = False
        text.append("Plain gain is not enough: " + "; ".join(problems) + ".")
    elif unknown:
        enough = None
        text.append(f"Cannot tell whether plain gain is enough: {', '.join(unknown)} unknown.")
    else:
        enough = True
        after = f" (true peak becomes {tp:.2f} dBTP)" if _finite(tp) else ""
        text.append(f"Plain gain is enough{after}.")
    if gain >= LARGE_GAIN_DB:
        text.append(
            f"Caution: this raises the level by {gain:.1f} dB; turn the monitoring down "
            "before listening to the result."
        )
    return GainAdvice(
        gain_to_target_db=gain,
        predicted_true_peak_dbtp=tp,
        predicted_noise_floor_dbfs=nf,
        plain_gain_enough=enough,
        advice=" ".join(text),
    )
