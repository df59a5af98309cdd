"""Where each stem sits in time, estimated from the signal by cross-correlation.

Why not the first non-zero sample: a stem whose first sample happens to be
non-zero (a vocal with room tone from frame 0, a dithered bounce) reads as
starting at 0 and the set's "common start" moves with it, so stems that did
not move get named. The signal itself says where a stem sits.

Method
------
Every stem is cross-correlated, over lags ``d`` in ``[-L, +L]`` frames (the
search window, ``L = round(slip_window_s * rate)``), against a reference:

- **with a usable reference mix**: the mix. ``c_i[d] = sum_n sum_ch m[n] x_i[n - d]``.
  The stem's offset is the ``d`` that maximises ``c_i[d]`` (positive: same
  polarity), reported as ``offset_i = -d`` frames: positive means the stem
  is late against the mix (move it earlier by that many samples).
- **without a mix**: every other stem. Pairwise correlations give
  ``D[i][j]`` (how late stem ``i`` is against stem ``j``); stem ``i``'s
  offset is the median of ``D[i][j]`` over the stems it correlates with,
  counting itself as 0. A slipped stem is late against every other stem and
  gets its slip; a stem that did not move is late against none but the
  slipped one and gets 0. With two stems the pair says only how far apart
  they are: the later one is named (a documented convention; a mix
  settles it).

When every stem is early or late against the mix by the same amount, it is
the mix that moved (``set_mix_offset_samples``, positive: the mix is late),
and no stem is named.

A peak is trusted only when the normalised correlation
``rho = c[d] / sqrt(E_ref E_x)`` reaches ``MIN_RHO`` (otherwise the offset is
None with a note: the stem shares too little with the reference, e.g. drums
against a vocal without a mix). A stem is called moved only when its best
lag is not 0 and beats the correlation at lag 0 by ``MIN_GAIN`` (relative):
for a periodic stem (a held bass note) every period is almost as good as
lag 0, and ties go to "not moved". Both thresholds are heuristics of this
project, not published values.

Streaming, bounded memory: like checker.stems.null, the reference role of
each source runs ``L`` frames behind the read position, so all partner
samples are known; each source keeps ``L`` frames of its reference role and
``2 L`` of its shifted role, one FFT of each per block, and each pair keeps
``2 L + 1`` correlation values. Nothing grows with the length of the set.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import fft as sfft

#: Smallest normalised correlation peak taken as a measurement (heuristic).
MIN_RHO = 0.02
#: A non-zero lag must beat lag 0 by this fraction of the peak to count as a move (heuristic).
MIN_GAIN = 0.05


@dataclass(frozen=True)
class StemOffset:
    offset_frames: int | None  # positive: the stem is late against the reference
    rho: float | None  # normalised correlation at the chosen lag
    note: str | None


class _Role:
    """One source's history for both roles (reference: L behind; shifted: 2 L kept),
    channel-major (channels, frames), the layout the FFTs run along."""

    def __init__(self, lag: int, channels: int) -> None:
        self.ref_hist = np.zeros((channels, lag))
        self.x_hist = np.zeros((channels, 2 * lag))
        self.energy = 0.0


class LagCorrelator:
    """Cross-correlations of chosen pairs of sources over ``[-lag, +lag]`` frames.

    ``feed(blocks)`` takes one (frames, channels) array per source, all of the
    same length (zero-padded where a source has ended). ``pairs`` lists
    ``(ref, x)`` source indices: ``corr(ref, x)[j]`` is ``c[d = lag - j] =
    sum_n sum_ch ref[n] x[n - d]``.
    """

    def __init__(self, sources: int, channels: int, lag: int, pairs: list[tuple[int, int]]):
        if lag < 0:
            raise ValueError(f"lag = {lag} (expected >= 0)")
        self.lag = lag
        self.channels = channels
        self.pairs = list(pairs)
        self._roles = [_Role(lag, channels) for _ in range(sources)]
        self._corr = {p: np.zeros(2 * lag + 1) for p in self.pairs}
        self._flushed = False

    def feed(self, blocks: list[np.ndarray]) -> None:
        b = blocks[0].shape[0]
        if b == 0:
            return
        self._step(blocks, b)

    def _step(self, blocks: list[np.ndarray], b: int) -> None:
        """One block per source. The shifted role's extended block (2 L + b frames) is
        correlated with the reference role's b frames; an FFT of 2 L + b points or more
        holds every lag in [0, 2 L] without wrap-around (index n + k < 2 L + b for n < b,
        k <= 2 L), so no longer transform is needed."""
        lag = self.lag
        nfft = sfft.next_fast_len(2 * lag + b, real=True)
        refs = {i for i, _ in self.pairs}
        xs = {j for _, j in self.pairs}
        f_ref: dict[int, np.ndarray] = {}
        f_x: dict[int, np.ndarray] = {}
        for i, (role, x) in enumerate(zip(self._roles, blocks, strict=True)):
            xt = x.T  # (channels, frames): a view for the reader's blocks
            role.energy += float(np.einsum("cn,cn->", xt, xt))
            r_ext = np.concatenate([role.ref_hist, xt], axis=1)
            s_ext = np.concatenate([role.x_hist, xt], axis=1)
            if i in refs:
                f_ref[i] = np.conj(sfft.rfft(r_ext[:, :b], n=nfft, axis=1))
            if i in xs:
                f_x[i] = sfft.rfft(s_ext, n=nfft, axis=1)
            role.ref_hist = r_ext[:, b:]
            role.x_hist = s_ext[:, b:]
        for i, j in self.pairs:
            spec = np.einsum("ck,ck->k", f_x[j], f_ref[i])
            self._corr[(i, j)] += sfft.irfft(spec, n=nfft)[: 2 * lag + 1]

    def _flush(self) -> None:
        """The last ``lag`` reference frames against the shifted history (zero past the end)."""
        if self._flushed or self.lag == 0:
            self._flushed = True
            return
        self._flushed = True
        zeros = [np.zeros((self.lag, self.channels)) for _ in self._roles]  # (frames, ch)
        # One more step of zeros moves every reference role's remaining frames through.
        energies = [r.energy for r in self._roles]
        self._step(zeros, self.lag)
        for r, e in zip(self._roles, energies, strict=True):
            r.energy = e

    def result(self, i: int, j: int) -> tuple[np.ndarray, float]:
        """(correlation by lag index j = lag - d, sqrt(E_i E_j))."""
        self._flush()
        norm = float(np.sqrt(self._roles[i].energy * self._roles[j].energy))
        return self._corr[(i, j)], norm


def pick_offset(corr: np.ndarray, norm: float, lag: int, reference: str) -> StemOffset:
    """The stem's offset from one correlation (see the module's rules)."""
    if norm <= 0.0:
        return StemOffset(None, None, f"digital silence in the stem or the {reference}")
    rho = corr / norm
    j = int(np.argmax(rho))
    best = float(rho[j])
    if best < MIN_RHO:
        return StemOffset(
            None,
            best,
            f"too little in common with the {reference} (correlation {best:.3f}, "
            f"needs {MIN_RHO}): offset not measurable",
        )
    zero = float(rho[lag])
    if j == lag or best - zero < MIN_GAIN * best:
        return StemOffset(0, zero, None)
    return StemOffset(-(lag - j), best, None)  # d = lag - j; late by -d


def offsets_against_mix(acc: LagCorrelator, mix: int, stems: list[int]) -> list[StemOffset]:
    return [pick_offset(*acc.result(mix, s), acc.lag, "reference mix") for s in stems]


def offsets_among_stems(acc: LagCorrelator, stems: list[int]) -> list[StemOffset]:
    """Median of the pairwise offsets (itself counted as 0); see the module's rules."""
    k = len(stems)
    pair = [[None] * k for _ in range(k)]
    rhos = [[None] * k for _ in range(k)]
    for a in range(k):
        for b in range(a + 1, k):
            one = pick_offset(*acc.result(stems[a], stems[b]), acc.lag, "other stem")
            if one.offset_frames is not None:
                pair[b][a] = one.offset_frames  # stem b late against stem a
                pair[a][b] = -one.offset_frames
                rhos[a][b] = rhos[b][a] = one.rho
    out = []
    for a in range(k):
        known = [pair[a][b] for b in range(k) if b != a and pair[a][b] is not None]
        if not known:
            out.append(StemOffset(None, None, "no other stem shares enough with it (no mix given)"))
            continue
        best_rho = max(r for b, r in enumerate(rhos[a]) if b != a and r is not None)
        if k == 2 or len(known) == 1:
            # A lone pair: the later stem is the one named.
            out.append(StemOffset(max(known[0], 0), best_rho, None))
            continue
        vals = sorted(known + [0])
        out.append(StemOffset(int(vals[(len(vals) - 1) // 2]), best_rho, None))
    return out


def alignment_values(
    names: list[str],
    offsets: list[StemOffset | None],
    rates: list[int | None],
    reference: str | None,
    lag: int,
    note: str | None,
) -> dict[str, Any]:
    """The set's alignment keys (frames, milliseconds, who moved)."""
    frames = [None if o is None else o.offset_frames for o in offsets]
    known = [f for f in frames if f is not None]
    mix_offset = None
    if reference == "reference mix" and known:
        mix_offset = 0
        if len(known) >= 2 and len(set(known)) == 1 and known[0] != 0:
            # Every stem equally early or late: the mix (or the whole set) moved, not a stem.
            mix_offset = -known[0]
            frames = [None if f is None else 0 for f in frames]
    ms = [
        None if f is None or r is None else 1000.0 * f / r
        for f, r in zip(frames, rates, strict=True)
    ]
    moved = [n for n, f in zip(names, frames, strict=True) if f]
    slips_s = [abs(f) / r for f, r in zip(frames, rates, strict=True) if f and r is not None]
    notes = [None if o is None else o.note for o in offsets]
    details = [
        f"{n} {abs(f)} samples ({abs(m):.2f} ms) {'late' if f > 0 else 'early'}"
        for n, f, m in zip(names, frames, ms, strict=True)
        if f and m is not None
    ]
    measured = any(f is not None for f in frames)
    return {
        "set_alignment_reference": reference,
        "set_alignment_window_samples": lag,
        "set_stem_offsets_samples": frames,
        "set_stem_offsets_ms": ms,
        "set_stem_offset_correlations": [None if o is None else o.rho for o in offsets],
        "set_stem_offset_notes": notes,
        "set_slipped_stems": moved,
        "set_slip_details": details,
        "set_mix_offset_samples": mix_offset,
        "set_slip_max_samples": max((abs(f) for f in frames if f), default=0) if measured else None,
        "set_slip_max_s": (max(slips_s) if slips_s else 0.0) if measured else None,
        "set_slip_max_note": None
        if measured
        else (
            note
            or (
                "no stem offset could be measured: the stems share too little with "
                + (
                    "the mix"
                    if reference == "reference mix"
                    else "each other (give the reference mix with --mix)"
                )
            )
        ),
    }


class SetAligner:
    """The lockstep glue: which reference, which pairs, padding of ended files."""

    def __init__(self, correlator: LagCorrelator, with_mix: bool, count: int) -> None:
        self.correlator = correlator
        self.with_mix = with_mix
        self.count = count  # readable stems

    @classmethod
    def make(cls, stems, mix, sum_reason, null_reason, slip_window_s: float):
        """None when no alignment can be measured (see ``values`` for the note)."""
        if sum_reason is not None or not stems:
            return None
        info = stems[0].tracker.info
        lag = max(0, round(slip_window_s * info.sample_rate_hz))
        k = len(stems)
        if null_reason is None and mix is not None:
            pairs = [(k, i) for i in range(k)]
            return cls(LagCorrelator(k + 1, info.channels, lag, pairs), True, k)
        if k < 2:
            return None
        pairs = [(a, b) for a in range(k) for b in range(a + 1, k)]
        return cls(LagCorrelator(k, info.channels, lag, pairs), False, k)

    def feed(self, blocks, mix_block, n: int) -> None:
        """``blocks``: one Block or None per readable stem; ``n`` frames this step."""
        ch = self.correlator.channels
        arrays = [_padded(b, n, ch) for b in blocks]
        if self.with_mix:
            arrays.append(_padded(mix_block, n, ch))
        self.correlator.feed(arrays)

    @staticmethod
    def values(aligner, stems, names, sum_reason, slip_window_s) -> dict[str, Any]:
        """Alignment keys for all stems (None for an unreadable one)."""
        readable = [i for i, s in enumerate(stems) if s is not None]
        rates = [None if s is None else s.tracker.info.sample_rate_hz for s in stems]
        offsets: list[StemOffset | None] = [None] * len(stems)
        if aligner is None:
            note = sum_reason or "one stem and no usable mix: nothing to align against"
            v = alignment_values(names, offsets, rates, None, 0, note)
        else:
            acc = aligner.correlator
            if aligner.with_mix:
                found = offsets_against_mix(acc, aligner.count, list(range(aligner.count)))
            else:
                found = offsets_among_stems(acc, list(range(aligner.count)))
            for i, o in zip(readable, found, strict=True):
                offsets[i] = o
            ref = "reference mix" if aligner.with_mix else "other stems"
            v = alignment_values(names, offsets, rates, ref, acc.lag, None)
        v["set_slip_window_s"] = slip_window_s
        return v


def _padded(block, n: int, channels: int) -> np.ndarray:
    if block is None:
        return np.zeros((n, channels))
    x = block.x
    if x.shape[0] == n:
        return x
    out = np.zeros((n, channels))
    out[: x.shape[0]] = x
    return out
