"""Sample statistics of a block, computed once and shared by the levels and channels meters.

One pass of the compiled kernel (checker.dsp.native.channel_stats) over a block gives
per channel: maximum, minimum, sum, and the sums of squares per 100 ms segment (segments
aligned to the start of the file), plus all-channel digital-zero frames per segment and,
for integer PCM, the exact sums and the OR of the codes. The levels meter needs all of it;
the channels meter needs maxima, minima, sums and total squares. The first of them to ask
computes it and leaves it in ``block.memo``; the second reads it there.
"""

from __future__ import annotations

import numpy as np

from checker.dsp import native
from checker.io.audio import Block

SEGMENT_S = 0.1


def segment_frames(rate_hz: int) -> int:
    """Frames per 100 ms segment."""
    return max(1, round(rate_hz * SEGMENT_S))


def segment_cuts(start: int, n: int, seg_len: int) -> np.ndarray:
    """Where segments (aligned to frame 0 of the file) end inside a block of n frames starting
    at frame ``start``: the segment in progress first (ends at most at n), then every full
    one; the piece after the last cut is the next segment's beginning (possibly empty)."""
    first = min(n, seg_len - start % seg_len)
    full = (n - first) // seg_len
    return first + seg_len * np.arange(full + 1, dtype=np.int64)


def stats_key(seg_len: int, with_codes: bool) -> tuple:
    """The ``block.memo`` key of a block's shared sample statistics (sample_stats below, or
    the fused walk of checker/meters/blockwalk.py, which fills the same entry)."""
    return ("sample_stats", seg_len, with_codes)


def sample_stats(
    block: Block, xt: np.ndarray, rt: np.ndarray | None, seg_len: int, *, shared: bool
) -> tuple[np.ndarray, ...]:
    """(cuts, max, min, sums, squares (pieces, channels), zero frames per piece, int sums,
    code OR) of xt (channels, frames) and rt (int32 codes or None). ``shared``: xt and rt
    are the block's own samples (not a cleaned copy), so the result may be kept in and
    taken from ``block.memo``."""
    key = stats_key(seg_len, rt is not None)
    if shared and key in block.memo:
        return block.memo[key]
    cuts = segment_cuts(block.start, xt.shape[1], seg_len)
    # Block contract (checker.io.audio): x == raw / 2**31 exactly for integer PCM.
    stats = (cuts, *native.channel_stats(xt, rt, cuts, raw_scaled=True))
    if shared:
        block.memo[key] = stats
    return stats


def piece_squares(
    xt: np.ndarray, zero: np.ndarray, cuts: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """The numpy twin of the pieces part of sample_stats: per piece of xt (channels, frames)
    cut at ``cuts`` (segment_cuts), the sums of squares (pieces, channels) and the count of
    ``zero`` (frames,) frames."""
    ch, n = xt.shape
    first, last = int(cuts[0]), int(cuts[-1])
    full = cuts.size - 1
    squares = np.empty((cuts.size + 1, ch))
    zeros = np.empty(cuts.size + 1, dtype=np.int64)
    for k, part in ((0, slice(0, first)), (cuts.size, slice(last, n))):
        squares[k] = np.einsum("ij,ij->i", xt[:, part], xt[:, part])
        zeros[k] = np.count_nonzero(zero[part])
    if full:
        seg = (last - first) // full
        r = xt[:, first:last].reshape(ch, full, seg)
        squares[1:-1] = np.einsum("csk,csk->cs", r, r).T
        zeros[1:-1] = zero[first:last].reshape(full, seg).sum(axis=1)
    return squares, zeros
