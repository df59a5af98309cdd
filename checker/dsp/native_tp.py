"""Wrappers of the true-peak routines of checker/dsp/kernels.c (its last section): the
oversampled grid, the block routine (skip test, grid, maxima, overs and refinement) and
the refinement of one chunk-channel. Loaded, versioned and switched off with the other
kernels (checker/dsp/native.py); like them, every wrapper checks dtype, shape and
contiguity before handing a pointer to C. The meters call these only when
``native.enabled()``; their numpy twins are in checker/meters/truepeak.py and
truepeak_refine.py.
"""

from __future__ import annotations

import numpy as np

# The library and the argument checks are native.py's (one load, one ABI check).
from checker.dsp.native import _lib, _need, _ptr


def _need_taps(taps: np.ndarray, factor: int, what: str) -> int:
    _need(taps, np.float32, 2, what)
    if factor not in (1, 2, 3, 4) or taps.shape[0] != factor - 1 or taps.shape[1] < 1:
        raise ValueError(
            f"{what}: taps {taps.shape} for factor {factor} "
            "(expected (factor - 1, taps per phase), factor 1 to 4)"
        )
    return taps.shape[1]


def tp_grid(window: np.ndarray, positions: int, taps: np.ndarray, factor: int) -> np.ndarray:
    """Oversampled grid of ``positions`` positions (``positions * factor`` values, time
    order) from ``window`` (float32, ``positions + T - 1`` samples; position i's sample is
    window[i + T // 2 - 1]); ``taps`` (factor - 1, T) float32 holds phases 1..factor-1."""
    ntaps = _need_taps(taps, factor, "native_tp.tp_grid")
    _need(window, np.float32, 1, "native_tp.tp_grid")
    if positions < 0 or window.size != positions + ntaps - 1:
        raise ValueError(
            f"native_tp.tp_grid: window of {window.size} samples for {positions} positions "
            f"(expected {positions + ntaps - 1})"
        )
    out = np.empty(positions * factor, dtype=np.float32)
    _lib.dc_tp_grid(_ptr(window), positions, _ptr(taps), factor, ntaps, ntaps // 2 - 1, _ptr(out))
    return out


def tp_chunks(
    buf: np.ndarray,
    hop: int,
    nchunks: int,
    window: int,
    lead: int,
    positions: int,
    taps: np.ndarray,
    factor: int,
    bound: np.ndarray,
    fine_gain: float,
    refine_bound: float,
    ceiling: float,
    best: np.ndarray,
    in_run: np.ndarray,
    cap: int,
    edge: tuple[int, int, int] = (0, -(2**62), 2**62),
    refine: TpRefine | None = None,
) -> tuple[int, np.ndarray, int, list[list[int]]]:
    """True-peak work on ``nchunks`` chunks of every row of ``buf`` (channels, frames)
    float32, rows contiguous (any row stride): chunk j's window is
    ``buf[:, j * hop :][:, :window]``, its centres the
    grid of ``positions`` positions from window sample ``lead``. Skip test with
    ``bound`` (sum |taps|, dc gain, steps, margin; see kernels.c) against ``best``
    (float64 per row, raised in place to each computed chunk's top) and ``ceiling``;
    inside a computed chunk, blocks of positions whose own bound times ``refine_bound``
    (>= 1) is at most ``best`` are left out too, so top is exact wherever
    ``top * refine_bound > best`` and a lower bound elsewhere (kernels.c says why).
    ``in_run`` (uint8 per row) carries over runs. Returns (chunk-rows computed, top
    (nchunks, rows) float32 with -1 where skipped, overs counted, each row's first ``cap``
    over starts as grid indices from chunk 0's first centre).

    ``edge`` (origin, first, last): the file grid index of chunk 0's first centre, and the
    file grid indices between which interpolated points count (the edge rule of
    truepeak_refine.py; samples always count). ``refine``: refine in place, in chunk order,
    every chunk-channel whose top times ``refine_bound`` exceeds ``best`` (then the
    running maximum itself, with ``refine.best_index`` and ``refine.best_inner``), as
    dc_tp_refine does after dc_tp_grid; None: ``best`` is only raised to the tops."""
    ntaps = _need_taps(taps, factor, "native_tp.tp_chunks")
    if buf.dtype != np.float32 or buf.ndim != 2 or buf.strides[1] != 4 or buf.strides[0] % 4:
        raise ValueError(
            f"native_tp.tp_chunks: buf {buf.dtype} {buf.shape} strides {buf.strides} "
            "(expected float32 (channels, frames) with contiguous rows)"
        )
    _need(bound, np.float64, 1, "native_tp.tp_chunks")
    _need(best, np.float64, 1, "native_tp.tp_chunks")
    _need(in_run, np.uint8, 1, "native_tp.tp_chunks")
    ch, frames = buf.shape
    back = ntaps // 2 - 1
    last = (nchunks - 1) * hop + window
    if (
        nchunks < 1
        or hop < 1
        or last > frames
        or bound.size != 4
        or not refine_bound >= 1.0
        or best.size != ch
        or in_run.size != ch
        or lead < back
        or lead + positions + ntaps - 1 - back > window
        or cap < 0
    ):
        raise ValueError(
            f"native_tp.tp_chunks: {nchunks} chunks by {hop}, window {window}, lead "
            f"{lead}, {positions} positions, {ntaps} taps over {ch}x{frames} frames, "
            f"refine_bound {refine_bound} (expected windows inside the buffer, centres "
            "inside the windows, refine_bound >= 1)"
        )
    top = np.empty((nchunks, ch), dtype=np.float32)
    overs = np.zeros(1, dtype=np.int64)
    starts = np.empty((ch, max(cap, 1)), dtype=np.int64)
    nstarts = np.zeros(ch, dtype=np.int64)
    edges = np.array(edge, dtype=np.int64)
    if refine is None:
        extra = (None,) * 6
    else:
        extra = refine.pointers(ch, hop, window, lead, positions, ntaps, factor)
    computed = _lib.dc_tp_chunks(
        _ptr(buf), ch, buf.strides[0] // 4, 0, hop, nchunks, window, lead, positions,
        _ptr(taps), factor, ntaps, back, _ptr(bound), fine_gain, refine_bound, ceiling,
        np.float32(ceiling),
        _ptr(best), _ptr(in_run), _ptr(top), _ptr(overs), _ptr(starts), cap, _ptr(nstarts),
        _ptr(edges), *extra,
    )  # fmt: skip
    found = [starts[c, : nstarts[c]].tolist() for c in range(ch)]
    return int(computed), top, int(overs[0]), found


#: Most candidates dc_tp_refine evaluates finely per call (TP_MAX_CANDIDATES in kernels.c).
TP_MAX_CANDIDATES = 16


class TpRefine:
    """The refinement arguments of :func:`tp_chunks` (those of :func:`tp_refine` that do not
    change from chunk to chunk): ``fine_taps`` (fine steps, T) float64, the window's
    ``history``, ``before`` grid positions computed either side of the centres (the grid
    dc_tp_grid gives), ``candidates``, the cosines, ``fine_rate``, ``edge_s`` (the times
    between which a point is inner); ``best_index`` (int64) and ``best_inner`` (float64), one
    per row, are updated in place with ``best``."""

    def __init__(
        self,
        fine_taps: np.ndarray,
        history: int,
        before: int,
        candidates: int,
        cos_refine: float,
        cos_fine: float,
        fine_rate: float,
        edge_s: tuple[float, float],
        best_index: np.ndarray,
        best_inner: np.ndarray,
    ) -> None:
        self.fine_taps, self.history, self.before = fine_taps, history, before
        self.candidates, self.best_index, self.best_inner = candidates, best_index, best_inner
        self.dargs = np.array([cos_refine, cos_fine, fine_rate, edge_s[0], edge_s[1]])

    def pointers(
        self, ch: int, hop: int, window: int, lead: int, positions: int, ntaps: int, factor: int
    ) -> tuple:
        """The six trailing pointer arguments of dc_tp_chunks, after checking them."""
        _need(self.fine_taps, np.float64, 2, "native_tp.tp_chunks")
        _need(self.best_index, np.int64, 1, "native_tp.tp_chunks")
        _need(self.best_inner, np.float64, 1, "native_tp.tp_chunks")
        steps = self.fine_taps.shape[0]
        step = steps // factor if factor in (1, 2, 4) else 0
        back = ntaps // 2 - 1
        if (
            step < 1
            or steps > 64
            or self.fine_taps.shape[1] != ntaps
            or not 0 <= self.candidates <= TP_MAX_CANDIDATES
            or self.best_index.size != ch
            or self.best_inner.size != ch
            or self.before < 1
            or lead - self.before < back
            or lead + positions + self.before + ntaps - 1 - back > window
            or self.history < back
            or self.history + self.before + positions - back + ntaps > window  # last fine row
            or hop != positions
        ):
            raise ValueError(
                f"native_tp.tp_chunks: refinement with {steps}x{self.fine_taps.shape[1]} fine taps, "
                f"factor {factor}, {self.before} positions either side from lead {lead}, "
                f"history {self.history}, window {window}, {self.candidates} candidates "
                "(expected every grid and fine row inside the window, hop = positions)"
            )
        iargs = np.array([self.history, steps, self.candidates, self.before, 0], dtype=np.int64)
        grid = np.empty(
            (positions + 2 * self.before) * factor + (factor - 1) * positions, np.float32
        )
        self.iargs, self._grid = iargs, grid  # alive for the call; iargs[4]: refined
        return (
            _ptr(self.fine_taps), _ptr(iargs), _ptr(self.dargs), _ptr(self.best_index),
            _ptr(self.best_inner), _ptr(grid),
        )  # fmt: skip


def tp_refine(
    window: np.ndarray,
    grid: np.ndarray,
    lo: int,
    hi: int,
    factor: int,
    base: int,
    limits: tuple[int, int],
    fine_taps: np.ndarray,
    history: int,
    candidates: int,
    cos_refine: float,
    cos_fine: float,
    top: float,
    refine_bound: float,
    fine_rate: float,
    edge_s: tuple[float, float],
    state: np.ndarray,
    best_index: np.ndarray,
) -> None:
    """The true-peak refinement of one chunk-channel (numpy twin: TruePeakMeter._refine).
    ``window`` float32 input window, ``grid`` its oversampled grid (float32), centres
    ``grid[lo:hi]``; ``limits`` (first, last): file grid indices where interpolated
    points count (``base``: file grid index of grid[0]); ``fine_taps`` (fine steps, T)
    float64; ``edge_s``: the times between which a point is inner. ``state`` = [best,
    best_inner] (float64) and ``best_index`` (int64, 1 value) are updated in place."""
    for a, dtype, ndim in (
        (window, np.float32, 1),
        (grid, np.float32, 1),
        (fine_taps, np.float64, 2),
        (state, np.float64, 1),
        (best_index, np.int64, 1),
    ):
        _need(a, dtype, ndim, "native_tp.tp_refine")
    steps, ntaps = fine_taps.shape
    step = steps // factor if factor in (1, 2, 4) else 0
    back = ntaps // 2 - 1
    if (
        step < 1
        or steps > 64
        or not 1 <= lo < hi < grid.size
        or history < back
        or history + (hi * step) // steps - back + ntaps > window.size  # the last fine row
        or not 0 <= candidates <= TP_MAX_CANDIDATES
        or state.size != 2
        or best_index.size != 1
    ):
        raise ValueError(
            f"native_tp.tp_refine: centres {lo}..{hi} of a grid of {grid.size}, factor {factor}, "
            f"{steps}x{ntaps} fine taps, window {window.size} from history {history}, "
            f"{candidates} candidates (expected centres and fine rows inside the buffers)"
        )
    _lib.dc_tp_refine(
        _ptr(window), _ptr(grid), lo, hi, factor, base, limits[0], limits[1], _ptr(fine_taps),
        ntaps, history, steps, candidates, cos_refine, cos_fine, top, refine_bound, fine_rate,
        edge_s[0], edge_s[1], _ptr(state), _ptr(best_index),
    )  # fmt: skip
