"""True-peak refinement: the running maxima of a TruePeakMeter (its state), the edge rule and
the fine evaluation between grid points around candidate maxima (numpy and compiled twins).

One job: turn a chunk-channel's oversampled grid into the exact reading and its position. The
meter itself (checker/meters/truepeak.py) feeds chunks, decides which are skipped and counts
overs; it inherits these methods (TruePeakRefinement) and owns the attributes they use.

Edges (decision)
----------------
Outside the file the signal is zero, and an interpolated point counts only when
the filter's whole window (32 samples back, 32 ahead) lies inside the file; in
the first and last 32 samples (0.67 ms at 48 kHz) only the samples themselves
count. Reason: a file that starts or stops mid-waveform (as the published EBU
Tech 3341 test tones do) is a step, and any interpolator rings on it; with zero
padding this filter read cases 17 and 18 0.43 and 0.73 dB high, outside the
document's +0.2 dB. With the rule they read within 0.03 dB. The price: a real
inter-sample peak within 0.67 ms of either end is read as its sample value.
``true_peak_at_edge`` is set when the maximum lies within the first or last
5 ms AND exceeds every point in between by more than 0.05 dB (our over-read
bound): a steady tone, whose maximum recurs all through the file, is not an
edge peak even if its first (earliest) maximum falls in the first 5 ms, which
is where ``true_peak_time_s`` then points. Points between are only compared
when they could come within 0.69 dB of the running maximum, which cannot
change the decision. Points in the last 5 ms are held back until result().
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from checker.dsp import native_tp
from checker.dsp.interp import CHUNK_FRAMES, ROW_POSITIONS, refine_peaks

#: Maxima closer than this to either end of the file are flagged as at the edge...
EDGE_S = 0.005
#: Fine evaluation around candidate maxima: steps per input sample (a multiple of 4).
FINE_STEPS = 32
#: Candidate maxima per chunk and channel evaluated finely (best sinusoid-fit estimates).
FINE_CANDIDATES = 4


@dataclass
class _State:
    best: np.ndarray  # per channel, linear
    best_index: np.ndarray  # fine index of each channel's maximum (-1: none)
    best_inner: np.ndarray  # per channel, linear: largest value >= EDGE_S from both ends
    in_run: np.ndarray  # last grid point of the previous chunk was above the ceiling
    overs: int = 0
    over_index: list[int] = field(default_factory=list)  # grid indices of first run starts
    #: Span records (options.keeps_step_records), else None: (chunk, channel, exact
    #: reading, fine index) of every refined chunk-channel, and (first chunk, last chunk,
    #: running maximum after them) per fed block, which bounds every other chunk-channel.
    refined: list[tuple[int, int, float, int]] | None = None
    ranges: list[tuple[int, int, float]] | None = None
    local: np.ndarray | None = None  # per channel: the running maximum of the current run
    local_index: np.ndarray | None = None
    last_quiet: bool | None = None  # was the last chunk quiet (None: no chunk yet)

    def copy(self) -> _State:
        """An independent copy (arrays and lists copied; what copy.deepcopy gave, at a
        fraction of its cost per file)."""

        def arr(a: np.ndarray | None) -> np.ndarray | None:
            return None if a is None else a.copy()

        def seq(v: list | None) -> list | None:
            return None if v is None else list(v)

        return _State(
            best=self.best.copy(),
            best_index=self.best_index.copy(),
            best_inner=self.best_inner.copy(),
            in_run=self.in_run.copy(),
            overs=self.overs,
            over_index=list(self.over_index),
            refined=seq(self.refined),
            ranges=seq(self.ranges),
            local=arr(self.local),
            local_index=arr(self.local_index),
            last_quiet=self.last_quiet,
        )


class TruePeakRefinement:
    """Edge rule and refinement methods of TruePeakMeter (uses the meter's factor, rate_hz,
    interp, interp_taps, fine_taps, refine_* and fine_* attributes)."""

    def _edge_masks(
        self, base: int, lo: int, hi: int, last_frame: int | None
    ) -> tuple[np.ndarray, np.ndarray] | None:
        """(eligible, refinable) over the centres of a chunk touching a file edge, else None.

        Interpolated points count only where the filter window lies inside the file
        (frames back .. last - fwd); samples always count; refinement needs both
        neighbours to be such points."""
        limits = self._edge_limits(base, lo, hi, last_frame)
        if limits is None:
            return None
        first, last = limits
        k = np.arange(base + lo, base + hi, dtype=np.int64)
        eligible = ((k >= first) & (k <= last)) | (k % self.factor == 0)
        refinable = (k - 1 >= first) & (k + 1 <= last)
        return eligible, refinable

    def _edge_limits(
        self, base: int, lo: int, hi: int, last_frame: int | None
    ) -> tuple[int, int] | None:
        """(first, last) file grid indices between which interpolated points count, for
        a chunk touching a file edge (its centres lo..hi-1 from file grid index base);
        None when no centre or neighbour of one lies outside them."""
        half = self.interp_taps // 2
        first = (half - 1) * self.factor
        k0, k1 = base + lo, base + hi - 1
        if last_frame is None:
            if k0 - 1 >= first:
                return None
            return first, k1 + 2
        last = (last_frame - half) * self.factor + self.factor - 1
        if k0 - 1 >= first and k1 + 1 <= last:
            return None
        return first, last

    def _refine_native(self, st, c, win, y, lo, hi, top, base, last_frame=None):
        """Compiled twin of _refine (kernels.c, dc_tp_refine): the same candidates, the
        same float64 arithmetic, the fine sums added in tap order."""
        self.refined += 1
        limits = self._edge_limits(base, lo, hi, last_frame) or (-(2**62), 2**62)
        end_s = math.inf if last_frame is None else last_frame / self.rate_hz - EDGE_S
        # Span records need the chunk's own reading: start from 0 instead of the running
        # maximum, then merge (the chunk's maximum is among the candidates either way).
        own = st.refined is not None
        state = np.array([0.0 if own else st.best[c], st.best_inner[c]])
        index = np.full(1, -1, dtype=np.int64) if own else st.best_index[c : c + 1].copy()
        native_tp.tp_refine(
            win, y, lo, hi, self.factor, base, limits, self.fine_taps, self.interp.history,
            FINE_CANDIDATES, self.refine_cos, self.fine_cos, top, self.refine_bound,
            self.fine_rate_hz, (EDGE_S, end_s), state, index,
        )  # fmt: skip
        st.best_inner[c] = state[1]
        if own:
            chunk = (base // self.factor + ROW_POSITIONS) // CHUNK_FRAMES
            st.refined.append((chunk, c, float(state[0]), int(index[0])))
            if state[0] > st.best[c]:
                st.best[c], st.best_index[c] = state[0], index[0]
            return
        st.best[c] = state[0]
        st.best_index[c] = index[0]

    def _refine(self, st, c, win, y, a, centres, lo, top, base, masks=None, last_frame=None):
        """Update channel c's maximum from this chunk: grid values, plus a fine evaluation
        of the filter around the FINE_CANDIDATES local maxima with the largest
        sinusoid-fit estimates among those that could beat the running maximum."""
        self.refined += 1
        threshold = np.float64(max(st.best[c], top) / self.refine_bound * (1.0 - 1e-9))
        idx = np.flatnonzero(centres >= threshold)  # compared in float64, as kernels.c does
        k = idx + lo
        local = (a[k] >= a[k - 1]) & (a[k] >= a[k + 1])
        if masks is not None:
            local &= masks[1][idx]
        values = centres[idx].astype(np.float64)
        step = FINE_STEPS // self.factor
        fine_pos = k * step
        if local.any():
            cand = np.flatnonzero(local)
            kk = k[cand]
            estimate = refine_peaks(y[kk - 1], y[kk], y[kk + 1], self.refine_omega)
            chosen = cand[np.argsort(-estimate, kind="stable")[:FINE_CANDIDATES]]
            fine_values, fine_at = self._fine(win, k[chosen])
            better = fine_values > values[chosen]
            values[chosen] = np.where(better, fine_values, values[chosen])
            fine_pos[chosen] = np.where(better, fine_at, fine_pos[chosen])
        i = int(np.argmax(values))
        if st.refined is not None:
            chunk = (base // self.factor + ROW_POSITIONS) // CHUNK_FRAMES
            st.refined.append((chunk, c, float(values[i]), base * step + int(fine_pos[i])))
        if values[i] > st.best[c]:
            st.best[c] = values[i]
            st.best_index[c] = base * step + int(fine_pos[i])
        time_s = (base * step + fine_pos) / (FINE_STEPS * self.rate_hz)
        inner = time_s >= EDGE_S
        if last_frame is not None:
            inner &= time_s <= last_frame / self.rate_hz - EDGE_S
        if inner.any():
            st.best_inner[c] = max(st.best_inner[c], float(values[inner].max()))

    def _fine(self, win: np.ndarray, k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Filter output at FINE_STEPS per input sample over +-1 grid step around grid
        points k (window-local); returns each one's largest |value| (refined by a
        three-point sinusoid fit) and its fine index (window-local)."""
        step = FINE_STEPS // self.factor
        offsets = np.arange(-step, step + 1)
        fine = k[:, None] * step + offsets[None, :]
        frame = self.interp.history + fine // FINE_STEPS
        back = self.interp_taps // 2 - 1
        rows = np.lib.stride_tricks.sliding_window_view(win, self.interp_taps)[frame - back]
        v = np.einsum("nft,nft->nf", rows.astype(np.float64), self.fine_taps[fine % FINE_STEPS])
        n = np.arange(k.size)
        at = np.argmax(np.abs(v), axis=1)
        j = np.clip(at, 1, 2 * step - 1)
        peak = refine_peaks(v[n, j - 1], v[n, j], v[n, j + 1], self.fine_omega)
        return np.maximum(peak, np.abs(v[n, at])), fine[n, at]
