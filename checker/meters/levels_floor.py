"""Noise floor of the levels meter: the 10th percentile of the 400 ms block levels and what
the quietest passages are made of (digital silence, dither, near silence, room tone,
programme); the definitions are in checker/meters/levels.py's docstring.

One job: noise_floor_dbfs, noise_floor_kind and noise_floor_note from the per-segment records.
LevelsMeter inherits these methods (LevelsNoiseFloor) and owns the records they read
(seg_sums, seg_zeros, seg_len, info).
"""

from __future__ import annotations

import numpy as np

from checker.model.units import power_to_db

NOISE_BLOCK_SEGMENTS = 4  # 400 ms blocks, 100 ms step
NOISE_FLOOR_PERCENTILE = 10.0
#: A floor within this of a TPDF dither's RMS is dither (issue 16; project choice).
DITHER_MARGIN_DB = 1.0
#: A floor at least this far below the median 400 ms block is room tone, not programme
#: (project choice: speech pauses sit 30-50 dB below the speech).
ROOM_TONE_GAP_DB = 20.0
#: 20 log10(2): the RMS of N-bit TPDF dither with quantization is LSB/2 = 2**-N of full scale.
DB_PER_BIT = 6.020599913279624
#: 20 log10(sqrt(6) / 2): dither alone (LSB/sqrt 6) lies this far below LSB/2.
DITHER_ALONE_BELOW_DB = 1.760912590556812
#: Float files finer than this grid report their format's bits.
MAX_GRID_BITS = 24


class LevelsNoiseFloor:
    """Noise-floor methods of LevelsMeter."""

    def _noise_floor(self, bits: int | None) -> tuple[float | None, str | None, str | None]:
        """(noise_floor_dbfs, noise_floor_kind, noise_floor_note); see the module doc."""
        short = (None, None, "shorter than one 400 ms block")
        if not self.seg_sums:
            return short
        sums = np.concatenate(self.seg_sums)
        zeros = np.concatenate(self.seg_zeros)
        k = sums.shape[0] - NOISE_BLOCK_SEGMENTS + 1
        if k < 1:
            return short
        power = sum(sums[i : i + k] for i in range(NOISE_BLOCK_SEGMENTS))
        level = power.max(axis=1) / (NOISE_BLOCK_SEGMENTS * self.seg_len)
        signal = np.flatnonzero(zeros < self.seg_len)  # segments not wholly digital zero
        if signal.size == 0:
            return -np.inf, "digital silence", "digital zero throughout"
        first, last = int(signal[0]), int(signal[-1])
        first += int(first > 0 and zeros[first] > 0)  # the segment where the padding ends
        last -= int(last < zeros.size - 1 and zeros[last] > 0)
        start = np.arange(k)
        keep = level[(start >= first) & (start + NOISE_BLOCK_SEGMENTS - 1 <= last)]
        if keep.size == 0:  # all blocks touch the padding: judge the ones with signal
            keep = level[level > 0.0]
        p = float(np.percentile(keep, NOISE_FLOOR_PERCENTILE, method="lower"))
        if p == 0.0:
            return (
                -np.inf,
                "digital silence",
                "the quietest 10 % of the file is digital zero: no noise to measure "
                "(room tone or dither would show here)",
            )
        floor = power_to_db(p)
        kind_note = self._dither(floor, bits)
        if kind_note is None:
            gap = power_to_db(float(np.median(keep))) - floor
            if gap >= ROOM_TONE_GAP_DB:
                kind_note = (
                    "room tone",
                    f"the quietest passages, {gap:.0f} dB below the median 400 ms block: "
                    "room tone or other background noise",
                )
            else:
                kind_note = (
                    "programme",
                    f"no quiet passage (the quietest 10 % is only {gap:.0f} dB below the median "
                    "400 ms block): the quietest programme, an upper bound on the noise floor",
                )
        return floor, *kind_note

    def _dither(self, floor: float, bits: int | None) -> tuple[str, str] | None:
        """("dither" | "near silence", note) when the floor is at or below a TPDF dither's
        level for the effective bits (16 and 24 for float files off an integer grid)."""
        if self.info.is_float:
            depths = (bits,) if bits is not None and bits <= MAX_GRID_BITS else (16, 24)
        elif self.info.is_integer_pcm and bits is not None:
            depths = (bits,)
        else:
            return None
        for n in depths:
            with_q = -DB_PER_BIT * n  # LSB/2, textbook
            alone = with_q - DITHER_ALONE_BELOW_DB  # LSB/sqrt(6), textbook
            if alone - DITHER_MARGIN_DB <= floor <= with_q + DITHER_MARGIN_DB:
                return (
                    "dither",
                    f"the level of {n}-bit TPDF dither ({alone:.1f} dBFS RMS alone, "
                    f"{with_q:.1f} dBFS with its quantization): the quietest parts are dither",
                )
        if floor < -DB_PER_BIT * depths[0] - DITHER_ALONE_BELOW_DB - DITHER_MARGIN_DB:
            return "near silence", f"below {depths[0]}-bit dither: only a few non-zero codes"
        return None
