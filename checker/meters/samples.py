"""Sample helpers shared by the sample-domain meters (levels, silence, channels): finite
samples, channels-first copies and runs of True in a block mask carried across blocks.

One job: the small array operations those meters have in common (no meter state here).
"""

from __future__ import annotations

import numpy as np

from checker.io.audio import Block

_EMPTY = np.empty(0, dtype=np.int64)


def finite_x(block: Block) -> np.ndarray:
    """The block's float samples with NaN/Inf replaced by 0 (a copy only when needed)."""
    x = block.x
    if block.raw is not None:
        return x
    finite = np.isfinite(x)
    if finite.all():
        return x
    return np.where(finite, x, 0.0)


def find_runs(
    mask: np.ndarray, start: int, open_start: int | None
) -> tuple[np.ndarray, np.ndarray, int | None]:
    """Runs of True in a 1-D block mask, continuing a run open since ``open_start``.

    Returns the absolute (starts, ends) of runs that closed inside this block
    (end exclusive; a run still open at block start is included with its old
    start) and the start of the run left open at the block's end, or None.
    """
    n = mask.size
    if n == 0 or (open_start is None and not mask.any()):
        return _EMPTY, _EMPTY, open_start
    m = mask.astype(np.int8)
    d = np.diff(m, prepend=np.int8(open_start is not None))
    starts = np.flatnonzero(d == 1) + start
    ends = np.flatnonzero(d == -1) + start
    if open_start is not None:
        starts = np.concatenate((np.array([open_start], dtype=np.int64), starts))
    new_open = None
    if starts.size > ends.size:
        new_open = int(starts[-1])
        starts = starts[:-1]
    return starts, ends, new_open


def keep_first(kept: np.ndarray, new: np.ndarray, limit: int) -> np.ndarray:
    """The ``limit`` smallest distinct values of kept and new (sorted)."""
    if new.size == 0:
        return kept
    return np.unique(np.concatenate((kept, new)))[:limit]


def channels_first(x: np.ndarray) -> np.ndarray:
    """A contiguous (channels, frames) copy: numpy reduces along the last axis far
    faster than across a short first axis (about 10x for stereo)."""
    return np.ascontiguousarray(x.T)
