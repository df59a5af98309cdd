"""Effective bandwidth and steep cutoffs from the long-term power spectrum.

A file whose content stops well below its Nyquist frequency was probably made
at a lower rate (upsampled) or from a lossy file (encoders low-pass the audio).
This meter measures where the content ends and whether it ends in a brick wall.

Spectrum (streaming, memory independent of length):
- Frames of ``fft_frames`` = 4096 samples at 48 kHz, scaled with the rate to the
  nearest power of two (4096 at 44.1 kHz, 8192 at 96 kHz), hop = half a frame,
  frame k starting at sample k * hop of the file; the samples of an incomplete
  frame are carried to the next block, the incomplete last frame is dropped.
- Window: Kaiser, beta = 20, not Hann. Hann's side lobes fall only 18 dB per
  octave: behind a flat passband ending in an ideal brick wall its leakage is
  still about -116 dB 100 bins further up (computed), which would hide the empty
  band of a 24-bit or float file. Kaiser beta = 20 leaks below about -160 dB from
  10 bins on (main lobe about +-6.5 bins). The narrow window weights each frame's
  middle most, so with a half-frame hop the spectrum is a systematic sample of
  the file, which is fine for a long-term average.
- Power |FFT|^2 / sum(window^2), averaged over frames and channels: white noise of
  variance s^2 in every channel reads s^2 in every bin ("equivalent white-noise
  level", dBFS re 1.0, so the N-bit quantization floor is
  checker.model.units.quantization_floor_dbfs(N)).

Analysis (project choices; the constants below):
- The averaged spectrum is median-filtered over about 0.8 % of the bins (17 at
  4096): tones narrower than half that window vanish, step edges stay in place.
- Top level: the TOP_PERCENTILE of the smoothed spectrum over the top
  TOP_FRACTION of the band (the peaks of a filter's stopband ripple, not its
  nulls). Edge: the highest frequency where the smoothed spectrum stands
  MARGIN_DB above the top level.
- The band above the edge counts as empty (content ends at the edge) when
  (a) the drop into it is steep (below), or (b) the top level lies within
  FLOOR_ALLOWANCE_DB of the format's quantization floor (the 24-bit floor for
  float and lossy files), or (c) it lies DEEP_GAP_DB or more below the loudest
  part of the smoothed spectrum. Otherwise the content runs to the top: the
  bandwidth is the Nyquist frequency (fraction 1.0), since a gently falling
  spectrum is content, not a cutoff.
- Steep cutoff: passband level = median of the smoothed spectrum over
  PASSBAND_FROM-PASSBAND_TO of the edge frequency (then of the cutoff found, a
  few rounds, so a wide transition band is not taken for passband); cutoff =
  the highest frequency still within CUTOFF_DROP_DB (3 dB) of that level. Steep
  when STEEP_SPAN_FRACTION (20 %, about 0.26 octave) above the cutoff the level
  has fallen STEEP_DROP_DB (30 dB) further: over 110 dB per octave, as after a
  resampler's or lossy encoder's low-pass, far beyond natural roll-off (a 4th-
  order Butterworth falls 24 dB per octave).
- The headline, ``effective_bandwidth_hz`` (and ``bandwidth_fraction`` of the
  Nyquist frequency), is where the content ends: the steep cutoff where there is
  one, else the edge. After a steep cutoff, ``faint_content_top_hz`` is where the
  faint remainder above it (a filter's transition band and stopband residue, a
  lossy encoder's sparse high band) falls STOPBAND_RESIDUE_DB below the passband;
  None without a steep cutoff. (Before issue 16 that figure was the headline:
  noise low-passed at 10 kHz read 13.3 kHz.)
- The note gives the frequency, and a likely cause only when the evidence
  supports one: a steep cutoff below SUGGEST_BELOW_FRACTION of the file's
  Nyquist (above that, a native recording's own anti-alias filter may sit
  there). The cause is the common lower rate whose Nyquist frequency the cutoff
  sits just below (80-101 %: "probably upsampled from"), else "a brick-wall
  low-pass, typical of a lossy encoder or a resampler". A gentle edge into an
  empty band gives the frequency only.
- Cannot judge (values None, ``bandwidth_note`` says why, nothing to flag):
  fewer than MIN_FRAMES spectrum frames; digital silence; long-term level below
  NEAR_SILENCE_DBFS; less than MIN_BROADBAND_SHARE of the power left after the
  median filter (pure tones, tone-only test files).

Cost and sampling: one real FFT per analysed frame and channel. Every frame
starting in the first DENSE_S = 30 s is analysed (about 23 per second per channel
at 48 kHz); after that only every SPARSE_STRIDE = 16th frame by file-wide index,
counted 16 times, a systematic sample of the rest of a long file (about 1.5 frames
per second per channel, 12 % of the audio): analysing every frame costs about as
much as decoding the file. Against analysing every frame, the averaged spectrum of
the ten-minute benchmark programmes moved by 0.13-0.14 dB per bin (median) and
0.8 dB at most, and the result was identical (every 4th frame after 60 s: 0.06 dB
median, 0.29 dB at most). Block-split invariance holds (the choice depends on the
frame's index only). numpy's FFT, not scipy's:
importing scipy.fft costs about 0.3 s per process, which is what a short file's
whole analysis takes.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from checker.dsp import native
from checker.io.audio import Block, StreamInfo
from checker.io.layout import Layout
from checker.meters.base import MeasureOptions
from checker.model.units import power_to_db, quantization_floor_dbfs

FFT_FRAMES_AT_48K = 4096
KAISER_BETA = 20.0
MIN_FRAMES = 8
MEDIAN_FRACTION = 0.008  # of the bins: 17 bins at 4096
TOP_FRACTION = 0.025  # top 2.5 % of the band sets the top level ...
TOP_PERCENTILE = 90.0  # ... as this percentile (the peaks of a filter's stopband ripple)
MARGIN_DB = 10.0
FLOOR_ALLOWANCE_DB = 20.0  # TPDF dither (+4.8 dB) and mild noise shaping
DEEP_GAP_DB = 60.0
STEEP_SPAN_FRACTION = 0.20
CUTOFF_ITERATIONS = 4
STOPBAND_RESIDUE_DB = 60.0
PASSBAND_FROM, PASSBAND_TO = 0.70, 0.85  # of the edge frequency
STEEP_DROP_DB = 30.0
CUTOFF_DROP_DB = 3.0
#: Source-rate guesses and "lossy" wording only for edges below this fraction of
#: Nyquist: a native recording's anti-alias filter ends near 0.9 of it.
SUGGEST_BELOW_FRACTION = 0.85
NEAR_SILENCE_DBFS = -80.0
MIN_BROADBAND_SHARE = 0.01  # -20 dB of the power outside narrow peaks
#: Every spectrum frame starting in the first DENSE_S seconds is analysed; after that,
#: every SPARSE_STRIDE-th frame (by file-wide index), counted SPARSE_STRIDE times.
DENSE_S = 30.0
SPARSE_STRIDE = 16
#: Frames per FFT call (reused buffers of 32 x 4096 x 24 bytes at 48 kHz).
FFT_BATCH_FRAMES = 32
#: Common lower rates, for the plain-words suggestion.
COMMON_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000)


@functools.lru_cache(maxsize=8)
def kaiser_periodic(n: int, beta: float) -> np.ndarray:
    """Periodic Kaiser window (the symmetric one of n + 1 points, last dropped), as
    scipy.signal.windows.kaiser(n, beta, sym=False); numpy's, to keep scipy.signal
    (about 0.7 s of imports) out of the measuring process. Cached per size (about 1.5 ms
    per file otherwise) and read-only, since every meter of that rate shares it."""
    window = np.kaiser(n + 1, beta)[:-1]
    window.flags.writeable = False
    return window


@functools.lru_cache(maxsize=8)
def _window_power(n: int, beta: float) -> float:
    """sum(window**2) of kaiser_periodic(n, beta), once per size."""
    return float(np.sum(kaiser_periodic(n, beta) ** 2))


def median_filter_nearest(x: np.ndarray, size: int) -> np.ndarray:
    """Running median over ``size`` (odd) points, edges padded with the end values
    (scipy.ndimage.median_filter(x, size, mode="nearest") for 1-D x). Compiled where the
    kernels are loaded (about 0.2 ms less per file); the numpy path below is its twin."""
    if size < 1 or size % 2 == 0:
        raise ValueError(f"median_filter_nearest: size = {size} (expected an odd number)")
    if native.enabled() and x.dtype == np.float64 and bool(np.isfinite(x).all()):
        return native.running_median(np.ascontiguousarray(x), size)
    half = size // 2
    padded = np.concatenate((np.full(half, x[0]), x, np.full(half, x[-1])))
    # The middle of each window after a partition: np.median's value for an odd size and
    # finite x, without its NaN check and mean (a third of the time; per file, 2049 bins).
    windows = np.array(sliding_window_view(padded, size))
    windows.partition(half, axis=1)
    return windows[:, half]


def fft_frames_for(rate_hz: int) -> int:
    """4096 at 48 kHz, scaled with the rate to the nearest power of two (>= 256)."""
    return max(256, 2 ** round(math.log2(FFT_FRAMES_AT_48K * rate_hz / 48_000)))


@dataclass(frozen=True)
class BandwidthResult:
    effective_bandwidth_hz: float | None
    bandwidth_fraction: float | None
    steep_cutoff_hz: float | None
    faint_content_top_hz: float | None
    bandwidth_note: str

    def to_dict(self) -> dict:
        return dict(self.__dict__)  # flat fields: asdict's deep copy is not needed


class BandwidthMeter:
    def __init__(
        self,
        info: StreamInfo,
        layout: Layout,
        options: MeasureOptions,
        *,
        dense_s: float = DENSE_S,
    ) -> None:
        self.rate = info.sample_rate_hz
        self.channels = info.channels
        self.n = fft_frames_for(self.rate)
        self.hop = self.n // 2
        self.window = kaiser_periodic(self.n, KAISER_BETA)
        self.window_power = _window_power(self.n, KAISER_BETA)
        self.bits = info.format_bits if info.is_integer_pcm else None
        self.sum_parts = np.zeros(2 * (self.n // 2 + 1))  # sums of re^2 and im^2 per bin
        self.frames = 0  # spectrum frames passed (analysed or represented)
        self.weight = 0.0  # frames the sums stand for: dense 1 each, sparse SPARSE_STRIDE each
        # Dense up to a multiple of the stride, so each sampled frame stands for exactly
        # the SPARSE_STRIDE frames from it on.
        dense = math.ceil(min(dense_s, 1e12) * self.rate / self.hop / SPARSE_STRIDE)
        self.dense_frames = min(2**62, dense * SPARSE_STRIDE)
        self.tail = np.zeros((self.channels, 0))  # channel-major: (channels, frames)
        self.work: np.ndarray | None = None  # windowed frames, then their spectra (_add)
        self.spec: np.ndarray | None = None

    def feed(self, block: Block) -> None:
        if block.frames == 0:
            return
        x = block.xt  # (channels, frames), contiguous rows
        if block.raw is None and not np.isfinite(x).all():
            x = np.where(np.isfinite(x), x, 0.0)
        # Spectrum frames run over tail + x; the tail (< one frame) is not re-copied with
        # the block: frames starting in it are cut from tail + the start of x, the others
        # are views of x.
        n, hop, t = self.n, self.hop, self.tail.shape[1]
        length = t + x.shape[1]
        count = 0 if length < n else (length - n) // hop + 1
        if count:
            first = self.frames
            straddle = min(count, -(-t // hop))  # frames starting inside the tail
            if straddle:
                need = min(x.shape[1], (straddle - 1) * hop + n - t)
                head = np.concatenate([self.tail, x[:, :need]], axis=1)
                self._analyse(sliding_window_view(head, n, axis=1)[:, ::hop][:, :straddle], first)
            if count > straddle:
                offset = straddle * hop - t
                view = sliding_window_view(x[:, offset:], n, axis=1)[:, ::hop]
                self._analyse(view[:, : count - straddle], first + straddle)
            self.frames += count
        cut = count * hop - t  # where the next frame starts, relative to x
        if cut >= 0:
            self.tail = x[:, cut:].copy()
        else:
            self.tail = np.concatenate([self.tail[:, count * hop :], x], axis=1)

    def _analyse(self, view: np.ndarray, first: int) -> None:
        """Add the frames of ``view`` (channels, m, n) that are analysed; frame i of it has
        the file-wide index first + i."""
        end = first + view.shape[1]
        dense_end = min(end, self.dense_frames)
        if first < dense_end:
            self._add(view[:, : dense_end - first], 1.0)
        sparse = max(first, self.dense_frames)
        sparse = -(-sparse // SPARSE_STRIDE) * SPARSE_STRIDE  # first multiple of the stride
        if sparse < end:
            self._add(view[:, sparse - first :: SPARSE_STRIDE], SPARSE_STRIDE)

    def _add(self, frames: np.ndarray, weight: float) -> None:
        """Add the power spectra of ``frames`` (channels, count, n), each counted ``weight`` times."""
        channels, count, n = frames.shape
        if self.work is None:  # reused buffers: fresh large temporaries cost page faults
            rows = max(FFT_BATCH_FRAMES, channels)
            self.work = np.empty((rows, n))
            self.spec = np.empty((rows, n // 2 + 1), dtype=np.complex128)
        step = max(1, self.work.shape[0] // channels)
        for i in range(0, count, step):
            part = frames[:, i : i + step]
            rows = channels * part.shape[1]
            work, spec = self.work[:rows], self.spec[:rows]
            np.multiply(part, self.window, out=work.reshape(part.shape))
            np.fft.rfft(work, axis=-1, out=spec)
            parts = spec.view(np.float64)  # re, im interleaved: |X|^2 = re^2 + im^2
            total = np.einsum("jk,jk->k", parts, parts)
            self.sum_parts += total if weight == 1.0 else weight * total
        self.weight += weight * count

    def spectrum(self) -> np.ndarray:
        """Averaged equivalent white-noise power per bin, 0 Hz to Nyquist (re 1.0)."""
        power = self.sum_parts[0::2] + self.sum_parts[1::2]
        return power / (max(1.0, self.weight * self.channels) * self.window_power)

    def result(self) -> BandwidthResult:
        return analyse(self.spectrum(), self.rate, self.frames, self.bits)


def _none(note: str) -> BandwidthResult:
    return BandwidthResult(None, None, None, None, note)


def analyse(power: np.ndarray, rate_hz: int, frames: int, bits: int | None) -> BandwidthResult:
    """Pure analysis of an averaged power spectrum (bins 0..Nyquist)."""
    nyquist = rate_hz / 2.0
    nbins = power.shape[0]
    if frames < MIN_FRAMES:
        need = (MIN_FRAMES + 1) * (nbins - 1) / rate_hz  # (frames - 1) hops + n, hop = n/2
        return _none(f"cannot judge: too short for a long-term spectrum (needs about {need:.2f} s)")
    band = power[1:]
    mean_power = float(band.mean())
    if mean_power <= 0.0:
        return _none("cannot judge: digital silence")
    level = power_to_db(mean_power)
    if level < NEAR_SILENCE_DBFS:
        return _none(f"cannot judge: near silence (long-term level {level:.1f} dBFS)")
    width = max(5, int(round(MEDIAN_FRACTION * nbins)) | 1)
    smooth_power = median_filter_nearest(power, width)
    share = float(smooth_power[1:].sum() / band.sum())
    if share < MIN_BROADBAND_SHARE:
        return _none(
            "cannot judge: no broadband content (the spectrum is a few narrow tones; "
            f"{100 * share:.2g} % of the power lies outside them)"
        )
    smooth = np.where(smooth_power > 0, 10.0 * np.log10(np.maximum(smooth_power, 1e-300)), -3000)
    hz_per_bin = nyquist / (nbins - 1)
    top_start = int(nbins * (1.0 - TOP_FRACTION))
    top_level = float(np.percentile(smooth[top_start:], TOP_PERCENTILE))
    threshold = top_level + MARGIN_DB
    above = np.nonzero(smooth[1:top_start] > threshold)[0]
    if above.size == 0:
        return BandwidthResult(
            nyquist,
            1.0,
            None,
            None,
            "content runs to the Nyquist frequency (no empty band at the top)",
        )
    edge = int(above[-1]) + 1
    found = _steep(smooth, edge)
    steep = found is not None
    cutoff_bin = None
    if found is not None:
        cutoff_bin, passband = found
        # Past a brick wall, a stopband's faint residue is not content.
        edge = int(np.nonzero(smooth[: edge + 1] >= passband - STOPBAND_RESIDUE_DB)[0][-1])
    floor_ref = quantization_floor_dbfs(bits if bits else 24)
    empty = (
        steep
        or top_level <= floor_ref + FLOOR_ALLOWANCE_DB
        or top_level <= float(smooth[1:].max()) - DEEP_GAP_DB
    )
    if not empty:
        return BandwidthResult(
            nyquist,
            1.0,
            None,
            None,
            "content runs to the Nyquist frequency (gentle roll-off, no floor)",
        )
    edge_hz = edge * hz_per_bin
    if cutoff_bin is None:
        return BandwidthResult(
            edge_hz, edge_hz / nyquist, None, None, _note(edge_hz, None, rate_hz)
        )
    cutoff_hz = cutoff_bin * hz_per_bin
    return BandwidthResult(
        cutoff_hz, cutoff_hz / nyquist, cutoff_hz, edge_hz, _note(cutoff_hz, edge_hz, rate_hz)
    )


def _steep(smooth: np.ndarray, edge: int) -> tuple[int, float] | None:
    """(cutoff bin, passband level) of a brick-wall drop below ``edge``; None if gentle.

    Passband level: median of the smoothed spectrum over PASSBAND_FROM-PASSBAND_TO
    of a reference frequency (first the edge, then the cutoff found, a few times,
    so a wide transition band does not count as passband). Cutoff: the highest bin
    up to the edge still within CUTOFF_DROP_DB of the passband. Steep: at
    (1 + STEEP_SPAN_FRACTION) x the cutoff the level has fallen STEEP_DROP_DB more.
    """
    ref, cutoff, passband = edge, None, 0.0
    for _ in range(CUTOFF_ITERATIONS):
        lo, hi = int(PASSBAND_FROM * ref), int(PASSBAND_TO * ref)
        if hi - lo < 3 or lo < 1:
            break
        passband = float(np.median(smooth[lo : hi + 1]))
        still = np.nonzero(smooth[: edge + 1] >= passband - CUTOFF_DROP_DB)[0]
        if still.size == 0 or int(still[-1]) == cutoff:
            break
        cutoff = ref = int(still[-1])
    if cutoff is None:
        return None
    probe = min(smooth.shape[0] - 1, int(round(cutoff * (1.0 + STEEP_SPAN_FRACTION))))
    if passband - CUTOFF_DROP_DB - float(smooth[probe]) < STEEP_DROP_DB:
        return None
    return cutoff, passband


def _note(end_hz: float, faint_hz: float | None, rate_hz: int) -> str:
    """Plain words: where the content ends (``faint_hz`` given: at a steep cutoff, with
    faint content up to there), and a likely cause only for a steep cutoff well below
    the file's Nyquist frequency."""
    where = f"in a {rate_hz / 1000:g} kHz file"
    if faint_hz is None:
        return f"content fades out near {end_hz / 1000:.1f} kHz {where} (gradual, no brick wall)"
    text = f"content ends near {end_hz / 1000:.1f} kHz {where} (steep cutoff"
    if faint_hz > 1.05 * end_hz:
        text += f"; faint content, 3-60 dB down, to {faint_hz / 1000:.1f} kHz"
    text += ")"
    if end_hz >= SUGGEST_BELOW_FRACTION * rate_hz / 2:
        return text  # where the file's own anti-alias filter may sit: no guess
    source = _likely_source_rate(end_hz, rate_hz)
    if source is not None:
        return text + f": probably upsampled from {source / 1000:g} kHz"
    return text + ": a brick-wall low-pass, typical of a lossy encoder or a resampler"


def _likely_source_rate(edge_hz: float, rate_hz: int) -> int | None:
    """The common lower rate whose Nyquist is nearest the edge, if the edge sits just
    below it (80 % to 101 % of that Nyquist: resampler low-passes end there)."""
    fits = [r for r in COMMON_RATES_HZ if r < rate_hz and 0.80 * r / 2 <= edge_hz <= 1.01 * r / 2]
    return min(fits, key=lambda r: abs(r / 2 - edge_hz)) if fits else None
