"""Sample-domain levels: sample peak, headroom, DC offset, clipping, bits, RMS, noise floor.

Definitions (project choices unless a source is named):

- Sample peak: largest |sample| per channel, dBFS re full scale 1.0; the time is
  the first frame reaching it. ``headroom_db`` = -sample_peak_dbfs (+inf for digital
  silence).
- DC offset: mean of each channel over the whole file, as a signed percentage of
  full scale per channel; ``dc_offset_percent`` / ``dc_offset_dbfs`` use the channel
  with the largest |mean|. Integer PCM sums the int32 codes exactly.
- Clipping: a run of at least ``options.clip_run_min_samples`` consecutive samples
  of one channel at the same full-scale value: the format's largest or smallest
  code for integer PCM (left-justified int32, so PCM_16 full scale is
  32767 << 16 and -32768 << 16), |x| >= 1.0 for float. Runs spanning blocks count
  once; a run open at the end of the file counts if long enough.
  ``over_full_scale_samples``: float samples with |x| > 1.0 (0 for integer PCM).
- Effective bits per channel: integer PCM: 32 minus the trailing zero bits of the
  OR of every int32 code (a PCM_24 file whose low 8 bits are always 0 carries 16).
  Float: the smallest N such that every sample lies on the N-bit grid k / 2**(N-1),
  when N <= 24; otherwise the format's bits (32/64). Lossy codecs: None. A
  channel that is digital zero throughout: None; ``effective_bits`` is the minimum
  over the other channels.
- RMS: per channel over the whole file, re 1.0 (a full-scale sine reads
  -3.01 dBFS, see checker.model.units.power_to_db); ``rms_dbfs`` is the loudest channel.
- Noise floor (checker/meters/levels_floor.py): the signal is cut into 100 ms
  segments (one record of per-channel sums of squares and a count of all-channel
  digital-zero frames per segment);
  400 ms blocks step by 100 ms. A block's level is the RMS of its loudest channel.
  Every block counts, whatever it holds (programme, room tone, dither, digital
  zero), except those touching the digital-zero padding at either end of the file
  (the zero segments there and the segment where the padding ends, which
  ``leading_digital_zero_s`` / ``trailing_digital_zero_s`` report).
  ``noise_floor_dbfs`` is the 10th percentile (numpy method "lower", i.e. an actual
  block's level) of the block levels: the level of the quietest passages.
  ``noise_floor_kind`` says what they are made of:
  "digital silence" (the level is 0: ``-inf``, there is no noise to measure);
  "dither" (within DITHER_MARGIN_DB of a TPDF dither's RMS for the effective bits:
  LSB/sqrt(6) for the dither alone, LSB/2 with the quantization error,
  docs/standards.md#sample-domain; float files off an integer grid are compared
  with 16- and 24-bit dither); "near silence" (below that: a few stray codes);
  "room tone" (at least ROOM_TONE_GAP_DB below the median block: pauses holding
  steady low-level sound); otherwise "programme" (the file has no quiet passage,
  so the value is the quietest programme, an upper bound on the noise floor).
  ``noise_floor_note`` says the same in words.
- Footroom: noise_floor_dbfs minus checker.model.units.quantization_floor_dbfs(N) for
  N = effective_bits (6.02 N + 1.76 dB rule). None for float files that are not on
  an integer grid (no fixed quantization floor) and for lossy files.
- Non-finite samples (NaN/Inf, float files only) are counted and treated as 0 by
  every sample-domain meter (checker.meters.samples.finite_x), so no NaN reaches any result.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from checker.dsp import native
from checker.io.audio import INT32_SCALE, MAX_SAMPLE_MAGNITUDE, Block, StreamInfo
from checker.io.layout import Layout
from checker.meters.base import MeasureOptions
from checker.meters.blockstats import piece_squares, sample_stats, segment_cuts, segment_frames
from checker.meters.levels_floor import MAX_GRID_BITS, LevelsNoiseFloor
from checker.meters.samples import _EMPTY, channels_first, find_runs, finite_x, keep_first
from checker.meters.steprecords import StepRecorder
from checker.model.units import amplitude_to_db, power_to_db, quantization_floor_dbfs

#: Finite float samples beyond MAX_SAMPLE_MAGNITUDE (about +602 dBFS), counted with NaN/Inf.
OUT_OF_RANGE = "Out-of-range (beyond +-2**100, about +602 dBFS)"
_KINDS = ("NaN", "Inf", OUT_OF_RANGE)


def _kind_order(item: tuple[str, Any]) -> int:
    return _KINDS.index(item[0])


#: Per-segment records are joined into one array once this many pieces have piled up
#: (a numpy array costs ~100 bytes of bookkeeping: 3 hours of 1 s blocks would add ~20 MB).
COMPACT_AFTER = 64


def integer_full_scale_codes(info: StreamInfo) -> tuple[int, int]:
    """(largest, smallest) int32 code of the format, left-justified."""
    bits = info.format_bits or 32
    shift = 32 - bits
    return ((1 << (bits - 1)) - 1) << shift, -(1 << (bits - 1)) << shift


def trailing_zero_bits(code: int) -> int:
    """Trailing zero bits of a nonzero 32-bit two's complement code."""
    v = code & 0xFFFFFFFF
    return (v & -v).bit_length() - 1


def first_peak(row: np.ndarray) -> int:
    """Index of the first sample of largest magnitude, as ``np.abs(row).argmax()`` gives it,
    without the copy: the largest magnitude is the maximum or minus the minimum, and where
    both are equal the earlier of their first positions."""
    i, j = int(row.argmax()), int(row.argmin())
    top, bottom = row[i], -row[j]
    if top > bottom:
        return i
    if bottom > top:
        return j
    return min(i, j)


def _zero_frames(xt: np.ndarray) -> np.ndarray:
    """(frames,) True where every channel is digital zero."""
    if xt.shape[0] == 1:
        return xt[0] == 0.0
    return ~np.any(xt != 0.0, axis=0)


def float_grid_bits(xt: np.ndarray) -> np.ndarray:
    """Per row (channel): smallest N with every sample on the grid k / 2**(N-1); 0 if all zero."""
    mant, exp = np.frexp(xt)
    m = (mant * 2.0**53).astype(np.int64)  # exact: |mant| in [0.5, 1)
    low = m & -m  # lowest set bit (a power of two), 0 for zero samples
    tz = np.frexp(low.astype(np.float64))[1] - 1
    bits = np.where(m != 0, np.maximum(54 - exp - tz, 1), 0)
    return bits.max(axis=1, initial=0)


@dataclass(frozen=True)
class LevelsResult:
    sample_peak_dbfs: float
    sample_peak_time_s: float | None
    sample_peak_channel_dbfs: list[float]
    headroom_db: float
    dc_offset_dbfs: float | None
    dc_offset_percent: float | None
    dc_offset_channel_percent: list[float] | None
    clipped_runs: int
    clipped_run_times_s: list[float]
    clipped_runs_channel: list[int]
    over_full_scale_samples: int
    effective_bits: int | None
    effective_bits_channel: list[int | None]
    effective_bits_note: str | None
    rms_dbfs: float | None
    noise_floor_dbfs: float | None
    noise_floor_kind: str | None
    noise_floor_note: str | None
    footroom_db: float | None
    footroom_note: str | None
    nonfinite_samples: int
    findings: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        d = dict(self.__dict__)
        d.pop("findings")
        return d


class LevelsMeter(LevelsNoiseFloor):
    #: measure() feeds this meter the untouched block so it can count NaN/Inf samples;
    #: the other meters see those samples as 0.
    sees_nonfinite = True

    def __init__(self, info: StreamInfo, layout: Layout, options: MeasureOptions) -> None:
        self.info = info
        self.options = options
        ch = info.channels
        self.rate = info.sample_rate_hz
        self.frames = 0
        self.peak = np.zeros(ch)
        self.peak_frame = np.full(ch, -1, dtype=np.int64)
        self.dc_int = [0] * ch  # exact sums of int32 codes (integer PCM)
        self.dc_float = np.zeros(ch)
        self.sumsq = np.zeros(ch)
        # Clipping: open run start per (channel, sign), counts, first starts.
        self.clip_open: list[list[int | None]] = [[None, None] for _ in range(ch)]
        self.clip_counts = np.zeros(ch, dtype=np.int64)
        self.clip_first = _EMPTY
        if info.is_integer_pcm:
            self.clip_hi, self.clip_lo = integer_full_scale_codes(info)
        self.overs = 0
        # Effective bits.
        self.code_or = np.zeros(ch, dtype=np.int32)
        self.grid_bits = np.zeros(ch, dtype=np.int64)
        # Non-finite samples.
        self.nonfinite: dict[str, list[int]] = {}  # "NaN"/"Inf" -> [count, first frame]
        # 100 ms segments for the noise floor.
        self.seg_len = segment_frames(self.rate)
        self.seg_sums: list[np.ndarray] = []
        self.seg_zeros: list[np.ndarray] = []
        self.part_sum = np.zeros(ch)
        self.part_zeros = 0
        self.part_frames = 0
        self.native = native.enabled()
        #: Per-100 ms records for a programme span or parts (checker/meters/steprecords.py).
        self.steps = (
            StepRecorder(self.rate, ch, tone=options.span == "auto")
            if options.keeps_step_records
            else None
        )

    # ------------------------------------------------------------------ feed
    def prepare(self, block: Block) -> None:
        """Compute the block's shared sample statistics (checker.meters.blockstats) as soon as
        it is decoded (measure() may run this in the read-ahead thread); integer PCM only,
        whose samples are always finite."""
        if self.native and block.raw is not None and block.frames:
            sample_stats(block, block.xt, channels_first(block.raw), self.seg_len, shared=True)

    def feed(self, block: Block) -> None:
        n = block.frames
        if n == 0:
            return
        raw = block.raw
        x = block.x
        if raw is None and self.info.is_float:
            x = self._count_nonfinite(x, block.start)
        elif raw is None:
            x = finite_x(block)
        xt = channels_first(x)
        rt = channels_first(raw) if raw is not None else None
        if self.native:  # shared with the channels meter (one pass per block)
            cuts, hi, lo, float_sums, squares, zeros, int_sums, code_or = sample_stats(
                block, xt, rt, self.seg_len, shared=x is block.x
            )
        else:
            hi, lo = xt.max(axis=1), xt.min(axis=1)
            float_sums = int_sums = code_or = None
            cuts = segment_cuts(block.start, n, self.seg_len)
            squares, zeros = piece_squares(xt, _zero_frames(xt), cuts)
        m = np.maximum(hi, -lo)
        better = m > self.peak
        if better.any():
            self.peak = np.where(better, m, self.peak)
            for c in np.flatnonzero(better):
                self.peak_frame[c] = block.start + first_peak(xt[c])
        if rt is not None:
            if int_sums is None:
                int_sums = rt.sum(axis=1, dtype=np.int64)
                code_or = np.bitwise_or.reduce(rt, axis=1)
            self.dc_int = [a + int(b) for a, b in zip(self.dc_int, int_sums, strict=True)]
            self.code_or |= code_or
            # Full-scale codes only where the block reaches them (or a run is still open).
            reach = (hi >= self.clip_hi * INT32_SCALE) | (lo <= self.clip_lo * INT32_SCALE)
            if reach.any() or any(s is not None for state in self.clip_open for s in state):
                self._clip(rt == self.clip_hi, rt == self.clip_lo, block.start)
        else:
            self.dc_float += xt.sum(axis=1) if float_sums is None else float_sums
            if self.info.is_float:
                if (m >= 1.0).any() or any(s is not None for st in self.clip_open for s in st):
                    self._clip(xt >= 1.0, xt <= -1.0, block.start)
                if (m > 1.0).any():
                    self.overs += int(np.count_nonzero(xt > 1.0) + np.count_nonzero(xt < -1.0))
                active = self.grid_bits <= MAX_GRID_BITS
                if active.any():
                    bits = float_grid_bits(xt[active])
                    self.grid_bits[active] = np.maximum(self.grid_bits[active], bits)
        self._add_pieces(squares, zeros, cuts, n)
        self.frames += n
        if self.steps is not None:
            self.steps.feed(xt)

    def _count_nonfinite(self, x: np.ndarray, start: int) -> np.ndarray:
        """NaN, Inf and samples beyond MAX_SAMPLE_MAGNITUDE counted, returned as 0."""
        finite = np.abs(x) <= MAX_SAMPLE_MAGNITUDE  # False for NaN, Inf and huge values
        if finite.all():
            return x
        nan = np.isnan(x)
        inf = np.isinf(x)
        huge = ~finite & ~nan & ~inf
        for kind, mask in (("NaN", nan), ("Inf", inf), (OUT_OF_RANGE, huge)):
            count = int(np.count_nonzero(mask))
            if count:
                first = start + int(np.flatnonzero(mask.any(axis=1))[0])
                self.nonfinite.setdefault(kind, [0, first])[0] += count
        return np.where(finite, x, 0.0)

    def _clip(self, hi: np.ndarray, lo: np.ndarray, start: int) -> None:
        """hi, lo: (channels, frames) masks of samples at positive / negative full scale."""
        minimum = self.options.clip_run_min_samples
        any_hi = hi.any(axis=1)
        any_lo = lo.any(axis=1)
        found = []
        for c, state in enumerate(self.clip_open):
            for s, (mask, any_) in enumerate(((hi, any_hi), (lo, any_lo))):
                if not any_[c] and state[s] is None:
                    continue
                starts, ends, state[s] = find_runs(mask[c], start, state[s])
                long = starts[(ends - starts) >= minimum]
                if long.size:
                    self.clip_counts[c] += long.size
                    found.append(long)
        if found:
            self.clip_first = keep_first(
                self.clip_first, np.concatenate(found), self.options.max_positions
            )

    def _add_pieces(self, squares: np.ndarray, zeros: np.ndarray, cuts: np.ndarray, n: int) -> None:
        """Sums of squares per 100 ms segment (and in total, from the same sums) from the
        squares (pieces, ch) and zero-frame counts per piece cut at ``cuts``
        (checker.meters.blockstats.segment_cuts)."""
        self.sumsq += squares.sum(axis=0)
        self.part_sum = self.part_sum + squares[0]
        self.part_zeros += int(zeros[0])
        self.part_frames += int(cuts[0])
        if self.part_frames == self.seg_len:
            self.seg_sums.append(self.part_sum[None, :])
            self.seg_zeros.append(np.array([self.part_zeros]))
            self.part_sum = np.zeros_like(self.part_sum)
            self.part_zeros = 0
            self.part_frames = 0
        if cuts.size > 1:
            self.seg_sums.append(squares[1:-1].copy())
            self.seg_zeros.append(zeros[1:-1].copy())
        if len(self.seg_sums) > COMPACT_AFTER:
            self.seg_sums = [np.concatenate(self.seg_sums)]
            self.seg_zeros = [np.concatenate(self.seg_zeros)]
        self.part_sum = self.part_sum + squares[-1]
        self.part_zeros += int(zeros[-1])
        self.part_frames += n - int(cuts[-1])

    # ---------------------------------------------------------------- result
    def result(self) -> LevelsResult:
        rate = self.rate
        frames = self.frames
        peak_db = [amplitude_to_db(p) for p in self.peak]
        top = float(self.peak.max(initial=0.0))
        peak_time = None
        if top > 0.0:
            peak_time = float(self.peak_frame[self.peak == top].min()) / rate
        dc_pct = dc_db = dc_channel = None
        if frames:
            if self.info.is_integer_pcm:
                means = np.array([s / frames for s in self.dc_int]) / 2.0**31
            else:
                means = self.dc_float / frames
            dc_channel = [float(100.0 * v) for v in means]
            worst = float(np.abs(means).max())
            dc_pct, dc_db = 100.0 * worst, amplitude_to_db(worst)
        counts = self.clip_counts.copy()
        first = self.clip_first
        for c, state in enumerate(self.clip_open):  # runs still open at the end count
            for s in state:
                if s is not None and frames - s >= self.options.clip_run_min_samples:
                    counts[c] += 1
                    first = keep_first(first, np.array([s]), self.options.max_positions)
        bits, bits_channel, bits_note = self._bits()
        rms = None
        if frames:
            rms = power_to_db(float(self.sumsq.max()) / frames)
        floor, floor_kind, floor_note = self._noise_floor(bits)
        footroom, footroom_note = None, None
        if floor is None:
            footroom_note = "no noise floor"
        elif floor == -np.inf:
            footroom_note = "the quietest parts are digital zero: no noise floor to compare"
        elif bits is None:
            footroom_note = f"no effective bit depth ({bits_note})"
        elif self.info.is_float and bits > MAX_GRID_BITS:
            footroom_note = "float samples are not on an integer grid: no fixed quantization floor"
        else:
            footroom = floor - quantization_floor_dbfs(bits)
        return LevelsResult(
            sample_peak_dbfs=amplitude_to_db(top),
            sample_peak_time_s=peak_time,
            sample_peak_channel_dbfs=peak_db,
            headroom_db=0.0 - amplitude_to_db(top),
            dc_offset_dbfs=dc_db,
            dc_offset_percent=dc_pct,
            dc_offset_channel_percent=dc_channel,
            clipped_runs=int(counts.sum()),
            clipped_run_times_s=[float(f) / rate for f in first],
            clipped_runs_channel=[int(c) for c in counts],
            over_full_scale_samples=self.overs,
            effective_bits=bits,
            effective_bits_channel=bits_channel,
            effective_bits_note=bits_note,
            rms_dbfs=rms,
            noise_floor_dbfs=floor,
            noise_floor_kind=floor_kind,
            noise_floor_note=floor_note,
            footroom_db=footroom,
            footroom_note=footroom_note,
            nonfinite_samples=sum(c for c, _ in self.nonfinite.values()),
            findings=self._findings(),
        )

    def _bits(self) -> tuple[int | None, list[int | None], str | None]:
        info = self.info
        ch = info.channels
        if info.is_integer_pcm:
            per: list[int | None] = [
                None if int(v) == 0 else 32 - trailing_zero_bits(int(v)) for v in self.code_or
            ]
        elif info.is_float:
            fmt = info.format_bits or 32
            per = [
                None if g == 0 else (int(g) if g <= MAX_GRID_BITS else fmt) for g in self.grid_bits
            ]
        else:
            return None, [None] * ch, f"lossy codec ({info.subtype}): no fixed bit depth"
        used = [b for b in per if b is not None]
        if not used:
            return None, per, "every channel is digital zero"
        note = None
        if len(used) < ch:
            note = "digital-zero channels have no bits in use and are left out"
        return min(used), per, note

    def _findings(self) -> tuple[str, ...]:
        return tuple(
            f"{kind} samples: {count}, first at {first / self.rate:.3f} s "
            "(treated as 0 by the sample-domain meters)"
            for kind, (count, first) in sorted(self.nonfinite.items(), key=_kind_order)
        )
