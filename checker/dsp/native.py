"""The compiled inner loops (``checker/dsp/kernels.c``), with a numpy path behind every one.

``pip install`` compiles kernels.c into ``checker/dsp/_kernels.<platform suffix>`` (setup.py;
optional: an install without a C compiler still works; no Python headers needed). Its
functions are plain C, loaded here with ctypes, which releases the GIL during each call.
Meters ask
:func:`enabled` once, when built, and use their numpy code when it says False: when the
library is missing or from another build (``dc_abi_version``), or when the environment
sets ``DELIVERYCHECK_KERNELS=numpy``. The two paths agree to rounding (tests/unit/test_native.py).

Why compiled code at all: measured with ``make bench``, the numpy/scipy version spent
about 4.7x the decoding time on an hour of stereo (target 3x); the K-weighting recursion
(scipy's sosfilt) and the many small per-block reductions were most of it. Numba would do
the same, but importing it and loading its cached functions costs about 0.3 s per
process, as much as measuring a ten-minute file.

Every wrapper checks dtype, shape and contiguity before handing a pointer to C. The
true-peak routines' wrappers are in checker/dsp/native_tp.py.
"""

from __future__ import annotations

import ctypes
import importlib.machinery
import os
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import numpy as np

ENV = "DELIVERYCHECK_KERNELS"
ABI_VERSION = 13

_P = ctypes.c_void_p
_I = ctypes.c_int64
_D = ctypes.c_double
_F = ctypes.c_float
_SIGNATURES = {
    "dc_abi_version": (_I, []),
    "dc_deinterleave_i32": (None, [_P, _I, _I, _P, _P, _D]),
    "dc_deinterleave_f64": (None, [_P, _I, _I, _P]),
    "dc_kweight_sums": (None, [_P, _I, _P, _I, _P, _P, _P, _P, _I, _P]),
    "dc_channel_stats": (None, [_P, _P, _I, _I, _P, _I, _P, _P, _P, _P, _P, _P, _P, _I]),
    "dc_pair_products": (None, [_P, _I, _P, _P, _I, _P]),
    "dc_frame_scan": (_I, [_P, _I, _I, _D, _P, _P]),
    "dc_running_median": (None, [_P, _I, _I, _P, _P]),
    "dc_walk_i32": (
        _I,
        [_P, _I, _I, _D, _P, _P, _P, _I, _P, _P, _P, _P, _P, _P, _P, _P, _P, _I, _P, _D, _P, _P]
        + [_P, _I, _P, _P, _P, _P, _I, _P],
    ),
    # true peak (section at the end of kernels.c)
    "dc_tp_grid": (None, [_P, _I, _P, _I, _I, _I, _P]),
    "dc_tp_chunks": (
        _I,
        [_P, _I, _I, _I, _I, _I, _I, _I, _I, _P, _I, _I, _I, _P, _D, _D, _D, _F]
        + [_P, _P, _P, _P, _P, _I, _P, _P, _P, _P, _P, _P, _P, _P],
    ),
    "dc_tp_refine": (
        None,
        [_P, _P, _I, _I, _I, _I, _I, _I, _P, _I, _I, _I, _I, _D, _D, _D, _D, _D, _D, _D] + [_P, _P],
    ),
}


def _load() -> tuple[ctypes.CDLL | None, str]:
    """(library, why not) — the library or None with the reason."""
    if os.environ.get(ENV, "").strip().lower() == "numpy":
        return None, f"{ENV}=numpy"
    here = Path(__file__).parent
    found = [here / f"_kernels{suffix}" for suffix in importlib.machinery.EXTENSION_SUFFIXES]
    found = [p for p in found if p.is_file()]
    if not found:
        return None, f"{here}/_kernels*.so was not built (no C compiler at install?)"
    origin = str(found[0])
    try:
        lib = ctypes.CDLL(origin)
        for name, (restype, argtypes) in _SIGNATURES.items():
            fn = getattr(lib, name)
            fn.restype = restype
            fn.argtypes = argtypes
    except (OSError, AttributeError) as exc:
        return None, f"cannot load {origin} ({exc})"
    version = lib.dc_abi_version()
    if version != ABI_VERSION:
        return None, f"{origin}: dc_abi_version = {version} (expected {ABI_VERSION}; rebuild)"
    return lib, ""


_lib, _why = _load()
_off = 0  # depth of disabled() contexts


def enabled() -> bool:
    """True when the compiled kernels are loaded and not switched off."""
    return _lib is not None and _off == 0


def status() -> str:
    """One line for diagnostics: which path the meters take, and why."""
    if _lib is None:
        return f"numpy kernels ({_why})"
    return "compiled kernels" if _off == 0 else "numpy kernels (switched off in this process)"


@contextmanager
def disabled() -> Iterator[None]:
    """Meters built inside this context use their numpy code (tests compare the paths)."""
    global _off
    _off += 1
    try:
        yield
    finally:
        _off -= 1


def _need(a: np.ndarray, dtype: type, ndim: int, what: str) -> None:
    """Raise unless ``a`` is C-contiguous ``dtype`` with ``ndim`` dims (``what``: the
    wrapper's name, module included when not this one)."""
    if a.dtype != dtype or a.ndim != ndim or not a.flags.c_contiguous:
        where = what if "." in what else f"native.{what}"
        raise ValueError(
            f"{where}: got {a.dtype} {a.shape} contiguous={a.flags.c_contiguous} "
            f"(expected C-contiguous {np.dtype(dtype)} with {ndim} dims)"
        )


def _ptr(a: np.ndarray | None) -> int | None:
    return None if a is None else a.ctypes.data


def deinterleave_i32(buf: np.ndarray, raw_t: np.ndarray, x_t: np.ndarray, scale: float) -> None:
    """buf (n, ch) int32 -> raw_t (ch, n) int32 and x_t = buf * scale (ch, n) float64."""
    _need(buf, np.int32, 2, "deinterleave_i32")
    n, ch = buf.shape
    _need(raw_t, np.int32, 2, "deinterleave_i32")
    _need(x_t, np.float64, 2, "deinterleave_i32")
    if raw_t.shape != (ch, n) or x_t.shape != (ch, n):
        raise ValueError(
            f"native.deinterleave_i32: outputs {raw_t.shape}, {x_t.shape} for {n}x{ch}"
        )
    _lib.dc_deinterleave_i32(_ptr(buf), n, ch, _ptr(raw_t), _ptr(x_t), scale)


def deinterleave_f64(buf: np.ndarray, x_t: np.ndarray) -> None:
    """buf (n, ch) float64 -> x_t (ch, n)."""
    _need(buf, np.float64, 2, "deinterleave_f64")
    _need(x_t, np.float64, 2, "deinterleave_f64")
    n, ch = buf.shape
    if x_t.shape != (ch, n):
        raise ValueError(f"native.deinterleave_f64: output {x_t.shape} for {n}x{ch}")
    _lib.dc_deinterleave_f64(_ptr(buf), n, ch, _ptr(x_t))


def kweight_sums(
    xt: np.ndarray,
    rows: np.ndarray,
    sos: np.ndarray,
    zi: np.ndarray,
    weights: np.ndarray,
    cuts: np.ndarray,
) -> np.ndarray:
    """K-weighted power sum_r weights[r] * y_r**2 (y_r: row rows[r] of xt through the two
    sections ``sos`` (2, 6), state ``zi`` (len(rows), 2, 2) updated in place; non-finite
    samples count as 0), summed over the pieces [0, cuts[0]), ..., [cuts[-1], n):
    returns len(cuts) + 1 sums."""
    _need(xt, np.float64, 2, "kweight_sums")
    _need(rows, np.int64, 1, "kweight_sums")
    _need(sos, np.float64, 2, "kweight_sums")
    _need(zi, np.float64, 3, "kweight_sums")
    _need(weights, np.float64, 1, "kweight_sums")
    ch, n = xt.shape
    r = rows.size
    if sos.shape != (2, 6) or zi.shape != (r, 2, 2) or weights.size != r:
        raise ValueError(
            f"native.kweight_sums: sos {sos.shape}, zi {zi.shape}, weights {weights.shape} "
            f"(expected (2, 6), ({r}, 2, 2), ({r},))"
        )
    if r and (rows.min() < 0 or rows.max() >= ch):
        raise ValueError(f"native.kweight_sums: rows {rows.tolist()} (expected 0 to {ch - 1})")
    _check_cuts(cuts, n, "kweight_sums")
    out = np.empty(cuts.size + 1)
    _lib.dc_kweight_sums(
        _ptr(xt), n, _ptr(rows), r, _ptr(sos), _ptr(zi), _ptr(weights), _ptr(cuts), cuts.size,
        _ptr(out),
    )  # fmt: skip
    return out


def _check_cuts(cuts: np.ndarray, n: int, what: str) -> None:
    _need(cuts, np.int64, 1, what)
    if cuts.size and (cuts[0] < 0 or cuts[-1] > n or (cuts.size > 1 and (np.diff(cuts) < 0).any())):
        raise ValueError(f"native.{what}: cuts must rise within 0..{n}")


def channel_stats(
    xt: np.ndarray, raw_t: np.ndarray | None, cuts: np.ndarray, *, raw_scaled: bool = False
) -> tuple[np.ndarray, ...]:
    """Per channel of xt (ch, n), n >= 1: max, min, sum; per piece ([0, cuts[0]), ..., [cuts[-1], n)) and
    channel: sum of squares (pieces, ch); per piece: all-channel zero frames; with raw_t
    (ch, n) int32: exact int64 sums and the OR of the codes (else None, None).
    ``raw_scaled``: the caller promises xt == raw_t / 2**31 exactly (as the reader's blocks
    are), so the exact integer sums come from the float sums (see kernels.c)."""
    _need(xt, np.float64, 2, "channel_stats")
    ch, n = xt.shape
    if n < 1:
        raise ValueError("native.channel_stats: n = 0 (expected at least one frame)")
    if raw_t is not None:
        _need(raw_t, np.int32, 2, "channel_stats")
        if raw_t.shape != xt.shape:
            raise ValueError(f"native.channel_stats: raw {raw_t.shape} vs x {xt.shape}")
    _check_cuts(cuts, n, "channel_stats")
    pieces = cuts.size + 1
    mx, mn, sm = np.empty(ch), np.empty(ch), np.empty(ch)
    sq = np.empty((pieces, ch))
    zero = np.empty(pieces, dtype=np.int64)
    isum = np.empty(ch, dtype=np.int64) if raw_t is not None else None
    ors = np.empty(ch, dtype=np.int32) if raw_t is not None else None
    _lib.dc_channel_stats(
        _ptr(xt), _ptr(raw_t), ch, n, _ptr(cuts), cuts.size,
        _ptr(mx), _ptr(mn), _ptr(sm), _ptr(sq), _ptr(zero), _ptr(isum), _ptr(ors), int(raw_scaled),
    )  # fmt: skip
    return mx, mn, sm, sq, zero, isum, ors


def frame_scan(
    xt: np.ndarray, threshold: float, zero_mask: np.ndarray
) -> tuple[int, int, int, int, int]:
    """Over the frames of xt (ch, n): (zero frames, first loud, last loud, first non-zero,
    last non-zero), -1 where none; loud = some |x| >= threshold. When some frame is all
    zero, zero_mask[:n] (uint8) is set to 1 on those frames and 0 elsewhere; else untouched."""
    _need(xt, np.float64, 2, "frame_scan")
    _need(zero_mask, np.uint8, 1, "frame_scan")
    ch, n = xt.shape
    if zero_mask.size < n:
        raise ValueError(f"native.frame_scan: zero_mask holds {zero_mask.size} < {n} frames")
    out = np.empty(4, dtype=np.int64)
    zeros = _lib.dc_frame_scan(_ptr(xt), ch, n, threshold, _ptr(out), _ptr(zero_mask))
    return int(zeros), int(out[0]), int(out[1]), int(out[2]), int(out[3])


def running_median(x: np.ndarray, size: int) -> np.ndarray:
    """Median of every ``size`` (odd) consecutive points of finite 1-D float64 ``x``, the ends
    padded with the end values (bandwidth.median_filter_nearest's compiled twin)."""
    _need(x, np.float64, 1, "running_median")
    if size < 1 or size % 2 == 0:
        raise ValueError(f"native.running_median: size = {size} (expected an odd number)")
    out = np.empty_like(x)
    work = np.empty(size)
    _lib.dc_running_median(x.ctypes.data, x.size, size, work.ctypes.data, out.ctypes.data)
    return out


def pair_products(xt: np.ndarray, first: np.ndarray, second: np.ndarray) -> np.ndarray:
    """Sums of xt[first[k]] * xt[second[k]] over the frames, per pair k."""
    _need(xt, np.float64, 2, "pair_products")
    _need(first, np.int64, 1, "pair_products")
    _need(second, np.int64, 1, "pair_products")
    ch, n = xt.shape
    if first.size != second.size or (
        first.size and (min(first.min(), second.min()) < 0 or max(first.max(), second.max()) >= ch)
    ):
        raise ValueError(f"native.pair_products: pairs outside 0..{ch - 1}")
    out = np.empty(first.size)
    _lib.dc_pair_products(_ptr(xt), n, _ptr(first), _ptr(second), first.size, _ptr(out))
    return out


#: Most channels, K-weighting rows and pairs one walk_i32 takes (WALK_MAX_* in kernels.c).
WALK_MAX_CHANNELS = 8
WALK_MAX_ROWS = 6
WALK_MAX_PAIRS = 28


def walk_i32(
    buf: np.ndarray,
    raw_t: np.ndarray,
    x_t: np.ndarray,
    scale: float,
    cuts: np.ndarray,
    first: np.ndarray,
    second: np.ndarray,
    threshold: float,
    zero_mask: np.ndarray,
    kweight: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None,
) -> tuple:
    """One walk over ``buf`` (n, ch) int32, n >= 1, with the results of
    ``deinterleave_i32(buf, raw_t, x_t, scale)``, then ``channel_stats(x_t, raw_t, cuts)``,
    ``pair_products(x_t, first, second)``, ``frame_scan(x_t, threshold, zero_mask)`` (the
    mask written on every frame) and, when ``kweight`` = (rows, sos, zi, weights, kcuts) is
    given, ``kweight_sums(x_t, rows, sos, zi, weights, kcuts)`` (zi updated), bit for bit.
    Returns (mx, mn, sm, sq, zero, isum, ors), products, (zeros, first loud, last loud,
    first non-zero, last non-zero) and the K-weighted pieces (None without ``kweight``)."""
    _need(buf, np.int32, 2, "walk_i32")
    n, ch = buf.shape
    _need(raw_t, np.int32, 2, "walk_i32")
    _need(x_t, np.float64, 2, "walk_i32")
    _need(zero_mask, np.uint8, 1, "walk_i32")
    _need(first, np.int64, 1, "walk_i32")
    _need(second, np.int64, 1, "walk_i32")
    if n < 1 or ch > WALK_MAX_CHANNELS or raw_t.shape != (ch, n) or x_t.shape != (ch, n):
        raise ValueError(
            f"native.walk_i32: {n}x{ch} codes, outputs {raw_t.shape}, {x_t.shape} "
            f"(expected n >= 1, at most {WALK_MAX_CHANNELS} channels, outputs ({ch}, {n}))"
        )
    if zero_mask.size < n:
        raise ValueError(f"native.walk_i32: zero_mask holds {zero_mask.size} < {n} frames")
    if (
        first.size != second.size
        or first.size > WALK_MAX_PAIRS
        or (
            first.size
            and (min(first.min(), second.min()) < 0 or max(first.max(), second.max()) >= ch)
        )
    ):
        raise ValueError(
            f"native.walk_i32: pairs outside 0..{ch - 1} or more than {WALK_MAX_PAIRS}"
        )
    _check_cuts(cuts, n, "walk_i32")
    pieces = cuts.size + 1
    mx, mn, sm = np.empty(ch), np.empty(ch), np.empty(ch)
    sq = np.empty((pieces, ch))
    zero = np.empty(pieces, dtype=np.int64)
    isum = np.empty(ch, dtype=np.int64)
    ors = np.empty(ch, dtype=np.int32)
    prod = np.empty(first.size)
    scan = np.empty(4, dtype=np.int64)
    rows = kcuts = sos = zi = weights = kout = None
    nrows = nk = 0
    if kweight is not None:
        rows, sos, zi, weights, kcuts = kweight
        _need(rows, np.int64, 1, "walk_i32")
        _need(sos, np.float64, 2, "walk_i32")
        _need(zi, np.float64, 3, "walk_i32")
        _need(weights, np.float64, 1, "walk_i32")
        nrows = rows.size
        if (
            nrows > WALK_MAX_ROWS
            or sos.shape != (2, 6)
            or zi.shape != (nrows, 2, 2)
            or weights.size != nrows
            or (nrows and (rows.min() < 0 or rows.max() >= ch))
        ):
            raise ValueError(
                f"native.walk_i32: rows {rows.tolist()}, sos {sos.shape}, zi {zi.shape}, "
                f"weights {weights.shape} (expected at most {WALK_MAX_ROWS} rows in 0..{ch - 1}, "
                f"(2, 6), ({nrows}, 2, 2), ({nrows},))"
            )
        _check_cuts(kcuts, n, "walk_i32")
        nk = kcuts.size
        kout = np.empty(nk + 1)
    zeros = _lib.dc_walk_i32(
        _ptr(buf), n, ch, scale, _ptr(raw_t), _ptr(x_t), _ptr(cuts), cuts.size,
        _ptr(mx), _ptr(mn), _ptr(sm), _ptr(sq), _ptr(zero), _ptr(isum), _ptr(ors),
        _ptr(first), _ptr(second), first.size, _ptr(prod), threshold, _ptr(scan),
        _ptr(zero_mask), _ptr(rows), nrows, _ptr(sos), _ptr(zi), _ptr(weights), _ptr(kcuts),
        nk, _ptr(kout),
    )  # fmt: skip
    found = (int(zeros), int(scan[0]), int(scan[1]), int(scan[2]), int(scan[3]))
    return (mx, mn, sm, sq, zero, isum, ors), prod, found, kout
