"""Second-order-section IIR filtering in place, without importing all of scipy.signal.

The kernel comes from :func:`checker.upstream.sos_kernel`: scipy's compiled ``_sosfilt`` loaded on
its own (``import scipy.signal`` costs about 0.7 s, more than measuring a two-minute file),
checked once against a direct-form recursion, else the public ``scipy.signal.sosfilt``.
Either way the arithmetic is scipy's (direct form II transposed), bit for bit.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from checker import upstream

_kernel: Callable[[np.ndarray, np.ndarray, np.ndarray], None] | None = None


def sosfilt_rows(sos: np.ndarray, x: np.ndarray, zi: np.ndarray) -> None:
    """Filter each row of ``x`` (C-contiguous float64, (rows, frames)) in place through
    the sections ``sos`` (n, 6), carrying the state ``zi`` (rows, n, 2, float64,
    C-contiguous; updated in place). Same arithmetic as ``scipy.signal.sosfilt``."""
    global _kernel
    if _kernel is None:
        _kernel, _ = upstream.sos_kernel()
    _kernel(sos, x, zi)
