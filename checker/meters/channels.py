"""Channel relations: correlation per pair, identical and inverted channels, silent channels.

Definitions (project choices):

- Silent channel: its sample peak stays below ``SILENT_CHANNEL_PEAK_DBFS`` = -80 dBFS
  over the whole file (digital zero included). -80 dBFS is a project choice, not a
  standard: it is about 3 LSB of 16-bit audio, so a 16-bit channel carrying only
  dither counts as silent.
- Pairs: every pair (i < j) for up to ``MAX_ALL_PAIRS_CHANNELS`` = 8 channels; above
  that only neighbouring pairs (i, i + 1), and ``correlation_note`` says so.
- Correlation: Pearson r over the whole file from streamed sums (sum x, sum y,
  sum x^2, sum y^2, sum xy), clipped to [-1, 1]. None for a pair with a silent or
  constant channel; ``min_correlation`` is the minimum over defined pairs, None for
  mono or when no pair is defined (reason in ``correlation_note``).
- Identical pair: x_i == x_j for every sample; inverted pair: x_i == -x_j for every
  sample (exact comparison of the decoded values). Pairs with a silent channel are
  never reported as identical or inverted.

NaN/Inf samples count as 0 (see checker.meters.samples.finite_x).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from checker.dsp import native
from checker.io.audio import Block, StreamInfo
from checker.io.layout import Layout
from checker.meters.base import MeasureOptions
from checker.meters.blockstats import sample_stats, segment_frames
from checker.meters.samples import channels_first, finite_x
from checker.model.units import db_to_amplitude

SILENT_CHANNEL_PEAK_DBFS = -80.0
MAX_ALL_PAIRS_CHANNELS = 8
#: Variance below this fraction of the mean square is treated as a constant channel.
CONSTANT_RELATIVE_VARIANCE = 1e-12


@dataclass(frozen=True)
class ChannelsResult:
    silent_channels: list[int]
    identical_channels: list[list[int]]
    inverted_channels: list[list[int]]
    min_correlation: float | None
    channel_correlations: list[list[Any]]
    correlation_note: str | None

    def to_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def channel_pairs(channels: int) -> list[tuple[int, int]]:
    if channels <= MAX_ALL_PAIRS_CHANNELS:
        return [(i, j) for i in range(channels) for j in range(i + 1, channels)]
    return [(i, i + 1) for i in range(channels - 1)]


def _equal(a: np.ndarray, b: np.ndarray, sign: float = 1.0) -> bool:
    """a == sign * b sample for sample (a short prefix first: most pairs differ at once)."""
    head = min(a.size, 64)
    if not np.array_equal(a[:head], sign * b[:head]):
        return False
    return bool(np.array_equal(a, sign * b))


class ChannelsMeter:
    def __init__(self, info: StreamInfo, layout: Layout, options: MeasureOptions) -> None:
        ch = info.channels
        self.channels = ch
        self.pairs = channel_pairs(ch)
        self.first = np.array([i for i, _ in self.pairs], dtype=np.int64)
        self.second = np.array([j for _, j in self.pairs], dtype=np.int64)
        self.frames = 0
        self.peak = np.zeros(ch)
        self.sums = np.zeros(ch)
        self.squares = np.zeros(ch)
        self.products = np.zeros(len(self.pairs))
        self.identical = np.ones(len(self.pairs), dtype=bool)
        self.inverted = np.ones(len(self.pairs), dtype=bool)
        self.native = native.enabled()
        self.seg_len = segment_frames(info.sample_rate_hz)

    def feed(self, block: Block) -> None:
        if block.frames == 0:
            return
        x = finite_x(block)
        xt = channels_first(x)  # (channels, frames)
        self.frames += xt.shape[1]
        if self.native:  # shared with the levels meter (one pass per block)
            rt = channels_first(block.raw) if block.raw is not None else None
            _, hi, lo, sums, squares, _, _, _ = sample_stats(
                block, xt, rt, self.seg_len, shared=x is block.x
            )
            self.squares += squares.sum(axis=0)
        else:
            hi, lo, sums = xt.max(axis=1), xt.min(axis=1), xt.sum(axis=1)
        self.peak = np.maximum(self.peak, np.maximum(hi, -lo))
        self.sums += sums
        if not self.native and (self.channels < 2 or self.channels > MAX_ALL_PAIRS_CHANNELS):
            self.squares += np.einsum("ij,ij->i", xt, xt)
        if self.channels < 2:
            return
        if self.native:
            products = block.memo.get("pair_products") if x is block.x else None
            if products is None:  # (else: from the reader's fused walk, blockwalk.py)
                products = native.pair_products(xt, self.first, self.second)
            self.products += products
        elif self.channels <= MAX_ALL_PAIRS_CHANNELS:
            gram = xt @ xt.T  # squares on the diagonal, products off it
            self.squares += np.diagonal(gram)
            self.products += gram[self.first, self.second]
        else:
            self.products += np.einsum("ij,ij->i", xt[self.first], xt[self.second])
        for k, (i, j) in enumerate(self.pairs):
            if self.identical[k]:
                self.identical[k] = _equal(xt[i], xt[j])
            if self.inverted[k]:
                self.inverted[k] = _equal(xt[i], xt[j], -1.0)

    def result(self) -> ChannelsResult:
        silent_mask = self.peak < db_to_amplitude(SILENT_CHANNEL_PEAK_DBFS)
        silent = [int(i) for i in np.flatnonzero(silent_mask)]
        n = self.frames
        if self.channels < 2:
            return ChannelsResult(silent, [], [], None, [], "mono: no channel pairs")
        notes = []
        if self.channels > MAX_ALL_PAIRS_CHANNELS:
            notes.append(
                f"more than {MAX_ALL_PAIRS_CHANNELS} channels: only neighbouring pairs compared"
            )
        if n == 0:
            notes.append("no audio frames")
            return ChannelsResult(silent, [], [], None, [], "; ".join(notes))
        mean = self.sums / n
        mean_square = self.squares / n
        var = mean_square - mean * mean
        constant = var <= CONSTANT_RELATIVE_VARIANCE * mean_square
        correlations: list[list[Any]] = []
        identical, inverted = [], []
        skipped = False
        for k, (i, j) in enumerate(self.pairs):
            r = None
            if silent_mask[i] or silent_mask[j] or constant[i] or constant[j]:
                skipped = True
            else:
                cov = self.products[k] / n - mean[i] * mean[j]
                r = float(np.clip(cov / math.sqrt(var[i] * var[j]), -1.0, 1.0))
                if self.identical[k]:
                    identical.append([i, j])
                elif self.inverted[k]:
                    inverted.append([i, j])
            correlations.append([i, j, r])
        defined = [r for _, _, r in correlations if r is not None]
        if skipped:
            notes.append("correlation undefined for pairs with a silent or constant channel")
        return ChannelsResult(
            silent_channels=silent,
            identical_channels=identical,
            inverted_channels=inverted,
            min_correlation=min(defined) if defined else None,
            channel_correlations=correlations,
            correlation_note="; ".join(notes) or None,
        )
