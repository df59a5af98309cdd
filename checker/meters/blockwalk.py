"""The fused walk over an integer PCM block: one compiled pass instead of five.

The reader hands each block's interleaved codes to :class:`BlockWalk` (``read_blocks(...,
walk=[...])``), which calls ``native.walk_i32``: deinterleaving, the shared sample
statistics (checker/meters/blockstats.py), the channels meter's pair products, the silence
meter's frame scan and the loudness meter's K-weighting, tile by tile while the tile is in
the first-level cache, with every K-weighting chain in one frame loop. The results go to
``block.memo`` under the keys the meters' prepare and feed steps look for, so a meter
gives the same result with or without the walk (the compiled walk has the same bits as
the separate kernels: tests/unit/test_walk.py; each of those has its numpy twin in
tests/unit/test_native.py).

Only what the meters of the pass ask for is computed; a meter that is absent leaves its
part out. Float and lossy files, and layouts beyond the walk's limits (more than
``native.WALK_MAX_CHANNELS`` channels), keep the separate kernels. Measured (ten-minute
stereo PCM_24 and 5.1 benchmarks; see DEVELOPERS.md, Compiled kernels).
"""

from __future__ import annotations

import numpy as np

from checker.dsp import native
from checker.io.audio import INT32_SCALE, Block, StreamInfo
from checker.meters.blockstats import segment_cuts, segment_frames, stats_key

#: False: the reader keeps the separate kernels (tests compare the two paths).
ENABLED = True

_NONE = np.empty(0, dtype=np.int64)


class BlockWalk:
    """``walk(codes, raw_t, x_t, block)`` for ``read_blocks``, built from the pass's meters."""

    def __init__(self, info: StreamInfo, meters: list) -> None:
        from checker.meters.channels import ChannelsMeter
        from checker.meters.levels import LevelsMeter
        from checker.meters.loudness import LoudnessMeter
        from checker.meters.silence import SilenceMeter

        def find(cls: type):
            return next((m for m in meters if type(m) is cls), None)

        self.seg_len = segment_frames(info.sample_rate_hz)
        self.stats = find(LevelsMeter) is not None or find(ChannelsMeter) is not None
        channels = find(ChannelsMeter)
        self.first = channels.first if channels is not None and info.channels > 1 else _NONE
        self.second = channels.second if channels is not None and info.channels > 1 else _NONE
        silence = find(SilenceMeter)
        self.threshold = silence.threshold if silence is not None else np.inf
        self.scan = silence is not None
        loudness = find(LoudnessMeter)
        self.loudness = (
            loudness
            if loudness is not None
            and loudness.native
            and loudness.rows.size <= native.WALK_MAX_ROWS
            else None
        )

    @staticmethod
    def fits(info: StreamInfo) -> bool:
        """True when the walk can take this stream's blocks."""
        return (
            ENABLED
            and native.enabled()
            and info.is_integer_pcm
            and info.channels <= native.WALK_MAX_CHANNELS
        )

    def __call__(self, codes: np.ndarray, raw_t: np.ndarray, x_t: np.ndarray, block: Block) -> None:
        n, start = codes.shape[0], block.start
        kweight = None
        loud = self.loudness
        if loud is not None:
            last, kcuts = loud.substeps_from(start, n)
            kweight = (loud.rows, loud.sos, loud.zi, loud.weights, kcuts)
        cuts = segment_cuts(start, n, self.seg_len)
        mask = np.empty(n, dtype=np.uint8)
        stats, products, scan, pieces = native.walk_i32(
            codes, raw_t, x_t, INT32_SCALE, cuts, self.first, self.second, self.threshold,
            mask, kweight,
        )  # fmt: skip
        memo = block.memo
        if self.stats:  # blockstats.sample_stats's entry for the reader's own samples
            memo[stats_key(self.seg_len, True)] = (cuts, *stats)
        if self.first.size:
            memo["pair_products"] = products
        if self.scan:
            memo["frame_scan"] = (scan, mask)
        if loud is not None:
            memo["loudness"] = (start, last, kcuts, pieces)
