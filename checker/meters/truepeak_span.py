"""True-peak span records: in record mode (MeasureOptions.keeps_step_records) each run of
quiet or louder chunks is processed against a running maximum of its own, and the readings of
refined chunk-channels plus each run's maximum are kept, so that span_values() can give the true
peak of any programme span after the pass (to chunk resolution).

One job: the records and the span reading from them. TruePeakMeter
(checker/meters/truepeak.py) inherits these methods (TruePeakSpanRecords).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from checker.dsp.interp import CHUNK_FRAMES
from checker.meters.truepeak_refine import FINE_STEPS, _State
from checker.model.units import amplitude_to_db

#: Span records: a chunk whose samples all stay at or below this is quiet; a change between
#: quiet and louder chunks restarts the running maximum the records are bounded by (project
#: choice: above the -60 dBFS silence threshold, far below any programme peak).
RESET_DBFS = -50.0


class TruePeakSpanRecords:
    """Span-record methods of TruePeakMeter (uses the meter's stream, channels, rate_hz,
    reset_amp and final attributes)."""

    def _by_level(self, st: _State, chunks: list, run) -> None:
        """Span records: runs of quiet chunks (every sample at or below RESET_DBFS) and runs
        of louder ones are processed against a running maximum of their own, started
        afresh at each change (so a louder head or earlier part, which a quiet gap
        separates, cannot hide a quieter part's peak). Each run's own maximum is recorded
        as the bound of its unrefined chunk-channels, then merged into the file's maximum
        (ties keep the earlier position, as without records)."""
        lead = self.stream.lead
        quiet = [
            float(np.abs(w[:, lead : lead + CHUNK_FRAMES]).max(initial=0.0)) <= self.reset_amp
            for _, w in chunks
        ]
        i = 0
        while i < len(chunks):
            k = i
            while k < len(chunks) and quiet[k] == quiet[i]:
                k += 1
            group = chunks[i:k]
            if st.last_quiet is not None and st.last_quiet != quiet[i]:
                st.local = np.zeros(self.channels)
                st.local_index = np.full(self.channels, -1, dtype=np.int64)
            st.last_quiet = quiet[i]
            best, index = st.best, st.best_index
            st.best, st.best_index = st.local.copy(), st.local_index.copy()
            run(group)
            st.local, st.local_index = st.best.copy(), st.best_index.copy()
            st.ranges.append((group[0][0], group[-1][0], float(st.local.max(initial=0.0))))
            keep = best >= st.best
            st.best = np.where(keep, best, st.best)
            st.best_index = np.where(keep, index, st.best_index)
            i = k

    def span_values(self, first_frame: int, stop_frame: int) -> dict[str, Any]:
        """True peak of frames [first_frame, stop_frame) from the records (after result()),
        to chunk resolution: every 4096-frame chunk touching the span counts whole.

        Exact when every chunk-channel of the span that was not refined (skipped, or
        below the running maximum) is bounded by the span's refined maximum; otherwise a
        louder head set the running maximum, and the reading can be low by at most the
        difference, which ``true_peak_note`` states."""
        st = self.final
        if st is None or st.refined is None or st.ranges is None:
            raise RuntimeError("TruePeakMeter.span_values: call result() of a recording meter")
        j0 = first_frame // CHUNK_FRAMES
        j1 = max(stop_frame - 1, first_frame) // CHUNK_FRAMES
        best = np.zeros(self.channels)
        best_index = np.full(self.channels, -1, dtype=np.int64)
        done = set()
        for j, c, value, index in st.refined:
            if j0 <= j <= j1:
                done.add((j, c))
                if value > best[c]:
                    best[c], best_index[c] = value, index
        top = float(best.max(initial=0.0))
        bound = 0.0
        for a, b, level in st.ranges:
            if b < j0 or a > j1 or level <= top:
                continue
            for j in range(max(a, j0), min(b, j1) + 1):
                if any((j, c) not in done for c in range(self.channels)):
                    bound = max(bound, level)
                    break
        time_s = None
        if top > 0.0:
            index = int(best_index[best == top].min())
            time_s = index / (FINE_STEPS * self.rate_hz)
        note = None
        if bound > top:
            note = (
                f"span true peak may read up to {amplitude_to_db(bound) - amplitude_to_db(top):.2f}"
                " dB low: a louder head or tail set the meter's running maximum"
            )
        return {
            "true_peak_dbtp": amplitude_to_db(top),
            "true_peak_time_s": time_s,
            "true_peak_channel_dbtp": [amplitude_to_db(v) for v in best],
            "true_peak_note": note,
        }
