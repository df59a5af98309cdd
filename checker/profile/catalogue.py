"""The catalogue of every limit a profile may set: one table entry per limit.

Each entry says which profile key sets the limit, which measured value it
judges, how (``kind``), in which unit, in which profile section it lives, where
in the file the violation is (``position``), and what to do about it (``hint``).
Adding a simple min/max limit on any flat measured value is one entry here;
profile/syntax.py validates it and judge/rules.py evaluates it without further code.

Kinds:
  max / min      measured <= value / measured >= value (optional ``warn_value``)
  target         |measured - value| <= tolerance_lu (integrated loudness)
  one_of         measured is one of a list (format)
  allowed        value = false: the measured list (e.g. silent channels) must be empty
  declared       |declared - measured| <= value, for every carrier's declared key (all
                 keys but the last; the last is the measured one)
  required       value = true: every listed measured key must be present (not None)
  must_be_true   value = true: the measured flag must be True (stem sets)
  no_cutoff_below  a steep cutoff, if found, must not lie below value

``ran``: with ``none_means_ok``, None is a result only when this measured key is
present (the speech gate ran: too little speech is a result, a missing detector is
"could not be measured").

Scope: "file" limits judge one file; "set" limits judge a stem set's values.
``applies_if`` names a measured key that must be present for the limit to apply
(the null test only when a reference mix was given). ``none_means_ok``: None is
a result, not a failure to measure (no steep cutoff found; too little broadband
content to judge the bandwidth, which the meter's note says), while a key
missing from the values is still "could not be measured".
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

MAX = "max"
MIN = "min"
TARGET = "target"
ONE_OF = "one_of"
ALLOWED = "allowed"
DECLARED = "declared"
REQUIRED = "required"
MUST_BE_TRUE = "must_be_true"
NO_CUTOFF_BELOW = "no_cutoff_below"
#: Per part (checker/analysis/span.py ``parts``): every part's integrated loudness within
#: value LU of the profile's integrated target / every part's ``part_field`` <= value.
PART_TARGET = "part_target"
PART_MAX = "part_max"

FILE = "file"
SET = "set"

SECTIONS = (
    "format",
    "loudness",
    "peaks",
    "levels",
    "silence",
    "channels",
    "bandwidth",
    "downmix",
    "metadata",
    "stems",
    "encode",
    "speech",
    "programme",
)

#: The encode round trip a profile may ask for ([encode] codec, bit_rate_kbps): the
#: codecs libsndfile writes and the bit rates offered (kbit/s).
ENCODE_CODECS = ("mp3", "vorbis", "opus")
ENCODE_BIT_RATES = (32, 48, 64, 80, 96, 112, 128, 160, 192, 224, 256, 320)


DECLARED_KEYS = (
    "declared_integrated_lufs",
    "declared_loudness_range_lu",
    "declared_true_peak_dbtp",
    "declared_max_momentary_lufs",
    "declared_max_short_term_lufs",
)


@dataclass(frozen=True)
class LimitDef:
    key: str  # the profile key, e.g. "true_peak_max_dbtp"
    kind: str
    measure: str | tuple[str, ...]  # the measured key(s) judged
    unit: str  # shown to people: "dBTP", "LU", "" for counts and ratios
    what: str  # plain words for the measured quantity
    section: str
    position: str | None = None  # measured key holding the position (float or list of floats)
    hint: str = ""  # what to do about a violation
    scope: str = FILE
    min_channels: int = 1  # the limit applies only to files with at least this many channels
    none_means_ok: bool = False  # None is a result ("no cutoff found"), not "unmeasured"
    item: str = "number"  # value type: number | int | str | bool (lists for one_of)
    applies_if: str | None = None  # judged only when this measured key is present (not None)
    detail: tuple[str, str] | None = None  # (measured key, label) listed in the message
    lead: str | None = None  # measured key of a plain-words note that opens the message
    #: (bool key, words): when the measured flag is False the value is unreliable, so a
    #: violation is at most a warning and the words say why
    caveat: tuple[str, str] | None = None
    #: (values, measured, limit) -> words appended to a max/min violation (gain advice)
    advice: Callable[[Mapping[str, Any], float, float], str] | None = None
    ran: str | None = None  # see the module doc
    part_field: str | None = None  # PART_TARGET / PART_MAX: the key judged in each part


def _d(key, kind, measure, unit, what, section, **kw) -> LimitDef:
    return LimitDef(key, kind, measure, unit, what, section, **kw)


_LOWER = "lower the level or use a true-peak limiter"
_REWRITE = "rewrite the declared loudness from the measurement"


def _encode_advice(values: Mapping[str, Any], measured: float, limit: float) -> str:
    """ "lower by 0.8 dB to keep -1.0 dBTP after 128 kbit/s MP3" (the encoded true peak
    moves with the master's gain, so the excess is the gain to take off)."""
    excess = math.ceil((measured - limit) * 10 - 1e-9) / 10
    codec = {"mp3": "MP3", "vorbis": "Ogg Vorbis", "opus": "Opus"}.get(
        str(values.get("encoded_codec")), str(values.get("encoded_codec"))
    )
    rate = values.get("encoded_bit_rate_kbps")
    after = f"{rate:g} kbit/s {codec}" if isinstance(rate, (int, float)) else codec
    encoder = values.get("encoded_encoder") or "libsndfile's encoder"
    return (
        f" (lower the master by {excess:.1f} dB, or limit its true peak that much lower, "
        f"to keep {limit:.1f} dBTP after {after}; measured with {encoder} through "
        "libsndfile: one encoder's behaviour, an estimate for others)"
    )


def _carriers(quantity: str) -> tuple[str, ...]:
    """The declared_* keys of one quantity: bext's, then iXML's and axml's."""
    return tuple(f"declared_{c}{quantity}" for c in ("", "ixml_", "axml_"))


# fmt: off
CATALOGUE: tuple[LimitDef, ...] = (
    # format
    _d("sample_rates_hz", ONE_OF, "sample_rate_hz", "Hz", "sample rate", "format", item="int",
       hint="resample or re-export at an allowed rate"),
    _d("bit_depths", ONE_OF, "format_bits", "bits", "bit depth", "format", item="int",
       hint="re-export at an allowed bit depth"),
    _d("subtypes", ONE_OF, "subtype", "", "sample format", "format", item="str",
       hint="re-export in an allowed sample format"),
    _d("channel_counts", ONE_OF, "channels", "", "channel count", "format", item="int",
       hint="re-export with an allowed channel count"),
    _d("containers", ONE_OF, "container", "", "file type", "format", item="str",
       hint="re-export in an allowed file type"),
    _d("codecs", ONE_OF, "codec", "", "codec", "format", item="str",
       hint="encode again from the master with an allowed codec"),
    _d("bit_rate_min_kbps", MIN, "bit_rate_kbps", "kbit/s", "bit rate", "format",
       none_means_ok=True,  # None: a lossless file (FLAC) has no nominal bit rate
       hint="encode again from the master (never from a lossy file) at a higher bit rate"),
    _d("duration_min_s", MIN, "duration_s", "s", "duration", "format",
       hint="check the export range: the file is too short"),
    _d("duration_max_s", MAX, "duration_s", "s", "duration", "format",
       hint="check the export range: the file is too long"),
    _d("truncation_max_frames", MAX, "missing_frames", "",
       "number of frames the header promises but the file lacks", "format", item="int",
       none_means_ok=True,
       hint="the file was cut off (an interrupted copy or upload): send it again"),
    _d("container_intact_required", MUST_BE_TRUE, "container_ok", "",
       "file complete by its container (no chunk or page cut off, no audio past the "
       "declared length)", "format", item="bool", none_means_ok=True,
       hint="the file was cut off, or its header misstates its length (players that trust "
            "it stop early): export or copy it again"),
    # loudness
    _d("integrated_target_lufs", TARGET, "integrated_lufs", "LUFS", "integrated loudness",
       "loudness", hint="apply the gain in the advice"),
    _d("loudness_range_min_lu", MIN, "loudness_range_lu", "LU", "loudness range", "loudness",
       caveat=("loudness_range_stable", "loudness range is not stable under 60 s (EBU Tech 3342)"),
       hint="the programme is more compressed than allowed"),
    _d("loudness_range_max_lu", MAX, "loudness_range_lu", "LU", "loudness range", "loudness",
       caveat=("loudness_range_stable", "loudness range is not stable under 60 s (EBU Tech 3342)"),
       hint="reduce the dynamics (compression or mix rides); gain alone cannot fix this"),
    _d("momentary_max_lufs", MAX, "max_momentary_lufs", "LUFS", "maximum momentary loudness",
       "loudness", position="max_momentary_time_s", hint="tame the loudest moment"),
    _d("short_term_max_lufs", MAX, "max_short_term_lufs", "LUFS",
       "maximum short-term loudness", "loudness", position="max_short_term_time_s",
       hint="tame the loudest passage"),
    # peaks
    _d("true_peak_max_dbtp", MAX, "true_peak_dbtp", "dBTP", "true peak", "peaks",
       position="true_peak_time_s", hint=_LOWER),
    _d("sample_peak_max_dbfs", MAX, "sample_peak_dbfs", "dBFS", "sample peak", "peaks",
       position="sample_peak_time_s", hint="lower the level"),
    _d("sample_peak_min_dbfs", MIN, "sample_peak_dbfs", "dBFS", "sample peak", "peaks",
       position="sample_peak_time_s", hint="the level is lower than this delivery expects"),
    _d("clipped_runs_max", MAX, "clipped_runs", "", "number of clipped runs", "peaks",
       item="int", position="clipped_run_times_s",
       hint="the audio was clipped: re-export from the source at a lower level"),
    _d("over_full_scale_samples_max", MAX, "over_full_scale_samples", "",
       "number of samples beyond full scale", "peaks", item="int",
       hint="float samples above 1.0 clip when converted to fixed point: lower the level"),
    _d("nonfinite_samples_max", MAX, "nonfinite_samples", "", "number of NaN, Inf or out-of-range samples",
       "peaks", item="int", hint="the file holds invalid samples: re-export it"),
    # levels
    _d("dc_offset_max_dbfs", MAX, "dc_offset_dbfs", "dBFS", "DC offset", "levels",
       hint="remove the DC offset (high-pass filter)"),
    _d("effective_bits_min", MIN, "effective_bits", "bits", "effective bit depth", "levels",
       item="int", hint="the audio was made at a lower resolution than the file claims"),
    _d("unused_low_bits_max", MAX, "unused_low_bits", "bits",
       "number of unused low bits (file bit depth minus effective bits)", "levels", item="int",
       none_means_ok=True,
       hint="the audio was made at a lower bit depth and padded: re-export from the source"),
    _d("rms_min_dbfs", MIN, "rms_dbfs", "dBFS", "RMS level", "levels", hint="raise the level"),
    _d("rms_max_dbfs", MAX, "rms_dbfs", "dBFS", "RMS level", "levels", hint="lower the level"),
    _d("noise_floor_max_dbfs", MAX, "noise_floor_dbfs", "dBFS", "noise floor", "levels",
       hint="reduce the background noise"),
    _d("footroom_min_db", MIN, "footroom_db", "dB", "footroom", "levels",
       hint="the quietest content sits too close to the noise floor"),
    # silence
    _d("leading_silence_min_s", MIN, "leading_silence_s", "s", "leading silence", "silence",
       hint="add room tone or silence at the start"),
    _d("leading_silence_max_s", MAX, "leading_silence_s", "s", "leading silence", "silence",
       hint="trim the start"),
    _d("trailing_silence_min_s", MIN, "trailing_silence_s", "s", "trailing silence", "silence",
       hint="add room tone or silence at the end"),
    _d("trailing_silence_max_s", MAX, "trailing_silence_s", "s", "trailing silence", "silence",
       hint="trim the end"),
    _d("dropouts_max", MAX, "dropouts", "", "number of dropouts", "silence", item="int",
       position="dropout_times_s", hint="listen at the position: audio drops to digital zero"),
    # channels
    _d("correlation_min", MIN, "min_correlation", "", "lowest inter-channel correlation",
       "channels", min_channels=2, hint="check for phase problems between channels"),
    _d("silent_channels_allowed", ALLOWED, "silent_channels", "", "silent channels",
       "channels", item="bool", hint="a channel carries no audio: check the routing"),
    _d("identical_channels_allowed", ALLOWED, "identical_channels", "", "identical channels",
       "channels", item="bool", min_channels=2,
       hint="channels carry the same audio: check the routing (or deliver mono)"),
    _d("inverted_channels_allowed", ALLOWED, "inverted_channels", "",
       "polarity-inverted channel pairs", "channels", item="bool", min_channels=2,
       hint="one channel is the inverse of another: fix the polarity"),
    # bandwidth
    _d("bandwidth_fraction_min", MIN, "bandwidth_fraction", "", "effective bandwidth "
       "(fraction of the Nyquist frequency)", "bandwidth", none_means_ok=True,
       lead="bandwidth_note",
       hint="the content stops well below the Nyquist frequency"),
    _d("steep_cutoff_min_hz", NO_CUTOFF_BELOW, "steep_cutoff_hz", "Hz", "steep cutoff",
       "bandwidth", none_means_ok=True, lead="bandwidth_note",
       hint="a brick-wall cutoff is typical of a lossy source or a resampler"),
    # downmix: the stereo fold-down of a multichannel file (checker/meters/downmix.py);
    # judged only where a fold-down exists (mono and stereo files have none)
    _d("downmix_true_peak_max_dbtp", MAX, "downmix_true_peak_dbtp", "dBTP",
       "true peak of the stereo fold-down", "downmix", position="downmix_true_peak_time_s",
       applies_if="downmix_method",
       hint="the fold-down overloads although each channel fits: lower the centre and "
            "surrounds, or the whole mix"),
    _d("downmix_sample_peak_max_dbfs", MAX, "downmix_sample_peak_dbfs", "dBFS",
       "sample peak of the stereo fold-down", "downmix", position="downmix_sample_peak_time_s",
       applies_if="downmix_method",
       hint="the fold-down clips although each channel fits: lower the centre and surrounds, "
            "or the whole mix"),
    _d("downmix_short_term_max_lufs", MAX, "downmix_max_short_term_lufs", "LUFS",
       "maximum short-term loudness of the stereo fold-down", "downmix",
       applies_if="downmix_method",
       hint="the fold-down is louder than allowed: check the centre and surround levels"),
    # metadata: declared loudness in bext (EBU Tech 3285 v2), iXML and axml (ADM
    # loudnessMetadata), each carrier checked; gain tags (R128 in Opus, ReplayGain)
    _d("declared_integrated_tolerance_lu", DECLARED,
       (*_carriers("integrated_lufs"), "integrated_lufs"), "LU",
       "declared integrated loudness", "metadata", hint=_REWRITE),
    _d("declared_loudness_range_tolerance_lu", DECLARED,
       (*_carriers("loudness_range_lu"), "loudness_range_lu"), "LU", "declared loudness range",
       "metadata", hint=_REWRITE),
    _d("declared_true_peak_tolerance_db", DECLARED,
       (*_carriers("true_peak_dbtp"), "true_peak_dbtp"), "dB", "declared true peak", "metadata",
       hint=_REWRITE),
    _d("declared_momentary_tolerance_lu", DECLARED,
       (*_carriers("max_momentary_lufs"), "max_momentary_lufs"), "LU",
       "declared maximum momentary loudness", "metadata", hint=_REWRITE),
    _d("declared_short_term_tolerance_lu", DECLARED,
       (*_carriers("max_short_term_lufs"), "max_short_term_lufs"), "LU",
       "declared maximum short-term loudness", "metadata", hint=_REWRITE),
    _d("gain_tag_tolerance_lu", DECLARED,
       ("declared_gain_tag_integrated_lufs", "integrated_lufs"), "LU",
       "integrated loudness implied by the track gain tag", "metadata",
       hint="rewrite the gain tag from the measurement: players apply it as it is"),
    _d("declared_loudness_required", REQUIRED, DECLARED_KEYS, "", "bext loudness fields",
       "metadata", item="bool", hint="write a version 2 bext chunk with all five loudness values"),
    # encode round trip (only measured when the profile's [encode] section asks for it)
    _d("encoded_true_peak_max_dbtp", MAX, "encoded_true_peak_dbtp", "dBTP",
       "true peak after the encode round trip", "encode", advice=_encode_advice,
       hint="leave more headroom for the codec"),
    # speech (checker/meters/speech.py): judged on the speech-gated values
    _d("speech_target_lufs", TARGET, "speech_lufs", "LUFS", "speech loudness", "speech",
       none_means_ok=True, ran="speech_detector", lead="speech_note",
       hint="or rebalance the voice in the mix"),
    _d("anchor_target_lufs", TARGET, "anchor_lufs", "LUFS",
       "anchor loudness (speech, or the whole programme where too little speech was found)",
       "speech", hint="the anchor is the dialogue where there is enough of it"),
    _d("speech_share_min", MIN, "speech_share", "", "share of speech in the programme",
       "speech", lead="speech_note",
       hint="this delivery expects a spoken-word programme: check the file or the profile"),
    _d("speech_to_programme_min_lu", MIN, "speech_to_programme_lu", "LU",
       "speech loudness relative to the programme", "speech", none_means_ok=True,
       ran="speech_detector",
       hint="music or effects are much louder than the voice: lower them or raise the voice"),
    _d("speech_to_programme_max_lu", MAX, "speech_to_programme_lu", "LU",
       "speech loudness relative to the programme", "speech", none_means_ok=True,
       ran="speech_detector",
       hint="the voice stands far above the rest of the programme: check the balance"),
    # programme structure (checker/analysis/span.py): line-up tone in the head, head length,
    # per-part limits (parts exist when [programme] break_min_s is set)
    _d("lineup_tone_min_dbfs", MIN, "lineup_tone_dbfs", "dBFS", "line-up tone level",
       "programme", hint="the line-up tone is quieter than this delivery's line-up level"),
    _d("lineup_tone_max_dbfs", MAX, "lineup_tone_dbfs", "dBFS", "line-up tone level",
       "programme", hint="the line-up tone is louder than this delivery's line-up level"),
    _d("lineup_tone_min_hz", MIN, "lineup_tone_hz", "Hz", "line-up tone frequency",
       "programme", hint="use the line-up tone frequency this delivery asks for"),
    _d("lineup_tone_max_hz", MAX, "lineup_tone_hz", "Hz", "line-up tone frequency",
       "programme", hint="use the line-up tone frequency this delivery asks for"),
    _d("head_min_s", MIN, "programme_start_s", "s", "head length (line-up tone and silence "
       "before the programme)", "programme", hint="lengthen the head before the programme"),
    _d("head_max_s", MAX, "programme_start_s", "s", "head length (line-up tone and silence "
       "before the programme)", "programme", hint="shorten the head before the programme"),
    _d("part_integrated_tolerance_lu", PART_TARGET, "parts", "LU",
       "integrated loudness of each part", "programme", part_field="integrated_lufs",
       hint="bring the part to the target (gain on that part alone)"),
    _d("part_true_peak_max_dbtp", PART_MAX, "parts", "dBTP", "true peak of each part",
       "programme", part_field="true_peak_dbtp", hint=_LOWER),
    _d("part_short_term_max_lufs", PART_MAX, "parts", "LUFS",
       "maximum short-term loudness of each part", "programme",
       part_field="max_short_term_lufs", hint="tame the loudest passage of the part"),
    # stem sets (issue 8): judged on the set-level values, not on each stem
    _d("formats_must_match", MUST_BE_TRUE, "set_formats_match", "", "stem formats match",
       "stems", item="bool", scope=SET,
       hint="re-export every stem with the same rate, sample format and channel count"),
    _d("length_mismatch_max_frames", MAX, "set_length_mismatch_frames", "frames",
       "stem length mismatch", "stems", item="int", scope=SET,
       hint="re-export every stem over the same range"),
    _d("start_offset_max_s", MAX, "set_start_offset_max_s", "s",
       "spread of the stems' content starts", "stems", scope=SET,
       hint="the stems start at different points (a late entry can be arrangement)"),
    _d("slip_max_s", MAX, "set_slip_max_s", "s", "largest stem slip", "stems", scope=SET,
       detail=("set_slip_details", "slipped"),
       hint="a stem slipped against the others: re-export it from the session start"),
    _d("sum_clipped_samples_max", MAX, "sum_clipped_samples", "",
       "number of summed samples at or above full scale", "stems", item="int", scope=SET,
       position="sum_first_clip_s",
       hint="the stems clip when summed: lower every stem by the same amount"),
    _d("sum_true_peak_max_dbtp", MAX, "sum_true_peak_dbtp", "dBTP", "true peak of the stem sum",
       "stems", scope=SET, position="sum_true_peak_time_s",
       hint="the summed stems leave too little headroom: lower every stem by the same amount"),
    _d("sum_sample_peak_max_dbfs", MAX, "sum_sample_peak_dbfs", "dBFS",
       "sample peak of the stem sum", "stems", scope=SET, position="sum_sample_peak_time_s",
       hint="the summed stems leave too little headroom: lower every stem by the same amount"),
    _d("null_residual_max_db", MAX, "null_residual_db", "dB",
       "null-test residual (mix minus stem sum, relative to the mix)", "stems", scope=SET,
       applies_if="set_mix_length_frames", detail=("set_slip_details", "moved against the mix"),
       hint="the stems do not rebuild the reference mix: move any stem named here back into "
            "place, else check for missing or changed stems"),
)
# fmt: on

BY_KEY: dict[str, LimitDef] = {d.key: d for d in CATALOGUE}


#: Measured keys only the speech gate gives (MeasureOptions.speech).
SPEECH_KEYS = ("speech_lufs", "speech_share", "speech_to_programme_lu", "anchor_lufs")


def limits_any(profile: Any, keys: tuple[str, ...]) -> bool:
    """True when a profile has a limit on any of these measured keys."""
    for lim in getattr(profile, "limits", ()) or ():
        d = BY_KEY.get(getattr(lim, "key", ""))
        if d is not None and any(k in keys for k in measured_keys(d)):
            return True
    return False


def needs_speech(profile: Any) -> bool:
    """True when a profile has a limit on a speech value (so the speech gate must run)."""
    return limits_any(profile, SPEECH_KEYS)


#: Measured keys only span detection gives (MeasureOptions.span = "auto").
LINEUP_KEYS = ("lineup_tone_dbfs", "lineup_tone_hz", "programme_start_s")


def needs_lineup(profile: Any) -> bool:
    """True when a profile limits the line-up tone or the head (so the head must be found)."""
    return limits_any(profile, LINEUP_KEYS)


def measured_keys(d: LimitDef) -> tuple[str, ...]:
    return d.measure if isinstance(d.measure, tuple) else (d.measure,)
