"""Stereo fold-down of multichannel files: loudness and peaks of what a stereo listener hears.

A 5.1 programme that passes channel by channel can still overload when a receiver folds it to
two channels: the centre and the surrounds add to the front pair. This meter forms the fold-down
block by block inside the one pass and runs the loudness and true-peak meters on it.

Coefficients (docs/standards.md#programme-structure):
- ITU-R BS.775 (from memory): Lo = L + 0.7071 C + 0.7071 Ls, Ro = R + 0.7071 C + 0.7071 Rs,
  LFE omitted; no overall attenuation (a specification that adds one can be met by the
  profile's limit).
- 7.1 (L R C LFE Lrs Rrs Lss Rss): both surround pairs fold at -3 dB to their side (common
  practice extension of the same equations, from memory).
- A centre surround (Cs, 6.1) goes to both sides at -6 dB (0.5 each: half of its power per side,
  common practice, from memory).
Layouts with channels of unknown position or height channels get no fold-down (None with a
note); mono and stereo files have nothing to fold.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from checker.io.audio import Block, StreamInfo
from checker.io.layout import Layout
from checker.meters.base import MeasureOptions
from checker.meters.loudness import LoudnessMeter
from checker.meters.steprecords import StepRecorder, span_peaks
from checker.meters.truepeak import TruePeakMeter
from checker.model.units import amplitude_to_db

MINUS_3_DB = 0.7071  # BS.775's printed coefficient (from memory)
#: (to Lo, to Ro) for each channel role.
FOLD: dict[str, tuple[float, float]] = {
    "L": (1.0, 0.0),
    "R": (0.0, 1.0),
    "C": (MINUS_3_DB, MINUS_3_DB),
    "LFE": (0.0, 0.0),
    "Ls": (MINUS_3_DB, 0.0),
    "Rs": (0.0, MINUS_3_DB),
    "Lss": (MINUS_3_DB, 0.0),
    "Rss": (0.0, MINUS_3_DB),
    "Lrs": (MINUS_3_DB, 0.0),
    "Rrs": (0.0, MINUS_3_DB),
    "Cs": (0.5, 0.5),
}
METHOD = "ITU-R BS.775: Lo = L + 0.7071 C + 0.7071 Ls, Ro = R + 0.7071 C + 0.7071 Rs, no LFE"
NOTE_NOT_MULTICHANNEL = "nothing to fold: not a multichannel file"


def fold_matrix(layout: Layout) -> tuple[np.ndarray | None, str | None]:
    """The (2, channels) fold-down matrix for ``layout``, or (None, reason)."""
    labels = layout.labels
    if len(labels) <= 2:
        return None, NOTE_NOT_MULTICHANNEL
    if "L" not in labels or "R" not in labels:
        return None, f"no stereo fold-down defined for the layout {' '.join(labels)}"
    unknown = [lab for lab in labels if lab not in FOLD]
    if unknown:
        return None, (
            f"no stereo fold-down defined for channels {' '.join(unknown)} "
            "(unknown position or height)"
        )
    return np.array([FOLD[lab] for lab in labels], dtype=np.float64).T.copy(), None


@dataclass(frozen=True)
class DownmixResult:
    downmix_method: str | None  # present exactly when the file has a fold-down
    downmix_integrated_lufs: float | None
    downmix_max_short_term_lufs: float | None
    downmix_true_peak_dbtp: float | None
    downmix_true_peak_time_s: float | None
    downmix_sample_peak_dbfs: float | None
    downmix_sample_peak_time_s: float | None
    downmix_note: str | None

    def to_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


class DownmixMeter:
    """Folds each block to two channels and feeds loudness and true-peak meters with it."""

    def __init__(self, info: StreamInfo, layout: Layout, options: MeasureOptions) -> None:
        self.rate_hz = info.sample_rate_hz
        self.matrix, self.note = fold_matrix(layout)
        self.peak = 0.0
        self.peak_index: int | None = None
        self.folded: np.ndarray | None = None
        if self.matrix is None:
            return
        stereo = replace(info, channels=2)
        pair = Layout(("L", "R"), "given")
        self.loudness = LoudnessMeter(stereo, pair, options)
        self.truepeak = TruePeakMeter(stereo, pair, options)
        #: Per-100 ms peaks of the fold-down for a programme span (checker/analysis/span.py).
        self.steps = (
            StepRecorder(self.rate_hz, 2, tone=False) if options.keeps_step_records else None
        )

    def feed(self, block: Block) -> None:
        if self.matrix is None or block.frames == 0:
            return
        n = block.frames
        if self.folded is None or self.folded.shape[1] != n:
            self.folded = np.empty((2, n))  # reused: a fresh 2 x n array faults its pages in
        folded = self.folded  # (2, frames), C-contiguous; the sub-meters copy what they keep
        np.matmul(self.matrix, block.xt, out=folded)
        sub = Block(folded.T, None, block.start)
        self.loudness.feed(sub)
        self.truepeak.feed(sub)
        if self.steps is not None:
            self.steps.feed(folded)
        # The block's largest |sample| from each row's extremes (contiguous reductions); the
        # frame holding it is looked for only when it beats the peak so far.
        top = max(float(folded.max(axis=1).max()), -float(folded.min(axis=1).min()))
        if top > self.peak:
            mags = np.abs(folded).max(axis=0)
            i = int(mags.argmax())
            self.peak = float(mags[i])
            self.peak_index = block.start + i

    def result(self) -> DownmixResult:
        if self.matrix is None:
            return DownmixResult(None, None, None, None, None, None, None, self.note)
        loud = self.loudness.result()
        tp = self.truepeak.result()
        peak_time = None if self.peak_index is None else self.peak_index / self.rate_hz
        return DownmixResult(
            downmix_method=METHOD,
            downmix_integrated_lufs=loud.integrated_lufs,
            downmix_max_short_term_lufs=loud.max_short_term_lufs,
            downmix_true_peak_dbtp=tp.true_peak_dbtp,
            downmix_true_peak_time_s=tp.true_peak_time_s,
            downmix_sample_peak_dbfs=amplitude_to_db(self.peak),
            downmix_sample_peak_time_s=peak_time,
            downmix_note=loud.integrated_note,
        )

    def span_values(self, first: int, stop: int, first_frame: int, stop_frame: int) -> dict:
        """The fold-down's keys for 100 ms steps [first, stop) (frames [first_frame,
        stop_frame)), after result(); {} when the file has no fold-down."""
        if self.matrix is None or self.steps is None:
            return {}
        loud = self.loudness.span_values(first, stop)
        tp = self.truepeak.span_values(first_frame, stop_frame)
        peaks = span_peaks(self.steps.records(), first, stop)
        return {
            "downmix_integrated_lufs": loud["integrated_lufs"],
            "downmix_max_short_term_lufs": loud["max_short_term_lufs"],
            "downmix_true_peak_dbtp": tp["true_peak_dbtp"],
            "downmix_true_peak_time_s": tp["true_peak_time_s"],
            "downmix_sample_peak_dbfs": peaks["sample_peak_dbfs"],
            "downmix_sample_peak_time_s": peaks["sample_peak_time_s"],
            "downmix_note": loud["integrated_note"],
        }
