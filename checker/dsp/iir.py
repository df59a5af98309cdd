"""Second-order-section IIR filtering in place, without importing all of scipy.signal.

``import scipy.signal`` costs about 0.7 s on the project machines (it pulls in
scipy.stats, scipy.interpolate, scipy.optimize...), more than measuring a
two-minute file. The filter itself lives in scipy's compiled module
``scipy/signal/_sosfilt*.so`` (``_sosfilt(sos, x, zi)``: filters the rows of a
C-contiguous ``x`` in place, direct form II transposed, updating ``zi``), which
is what ``scipy.signal.sosfilt`` calls after copying its input. This module
loads that extension under its own full name without running
``scipy/signal/__init__.py`` (registered in ``sys.modules``, so a later
``import scipy.signal`` reuses it), checks it once against a direct-form
recursion on a short signal, and falls back to the public
``scipy.signal.sosfilt`` if anything about it differs (another scipy layout).
"""

from __future__ import annotations

import importlib.util
import sys
from collections.abc import Callable
from pathlib import Path

import numpy as np

_MODULE = "scipy.signal._sosfilt"
_kernel: Callable[[np.ndarray, np.ndarray, np.ndarray], None] | None = None


def _load_private() -> Callable | None:
    module = sys.modules.get(_MODULE)
    if module is None:
        import scipy

        folder = Path(scipy.__file__).parent / "signal"
        found = sorted(folder.glob("_sosfilt.*"))
        found = [p for p in found if p.suffix in (".so", ".pyd")]
        if not found:
            return None
        spec = importlib.util.spec_from_file_location(_MODULE, found[0])
        if spec is None or spec.loader is None:
            return None
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        sys.modules[_MODULE] = module
    return getattr(module, "_sosfilt", None)


def _public(sos: np.ndarray, x: np.ndarray, zi: np.ndarray) -> None:
    from scipy.signal import sosfilt

    y, z = sosfilt(sos, x, axis=-1, zi=np.moveaxis(zi, 1, 0))
    x[...] = y
    zi[...] = np.moveaxis(z, 0, 1)


def _direct(sos: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Reference: the biquad recursion, sample by sample (short test signals only)."""
    y = np.array(x, dtype=np.float64)
    for b0, b1, b2, _, a1, a2 in sos:
        out = np.zeros_like(y)
        for t in range(y.shape[-1]):
            acc = b0 * y[..., t]
            if t >= 1:
                acc = acc + b1 * y[..., t - 1] - a1 * out[..., t - 1]
            if t >= 2:
                acc = acc + b2 * y[..., t - 2] - a2 * out[..., t - 2]
            out[..., t] = acc
        y = out
    return y


def _self_check(kernel: Callable) -> bool:
    sos = np.array([[0.5, -0.3, 0.2, 1.0, -0.4, 0.1], [1.0, -2.0, 1.0, 1.0, -1.9, 0.905]])
    x = np.array([[1.0, 0.0, -0.5, 0.25, 0.0, 0.0, 0.75, -1.0], [0.0, 1.0, 0, 0, 0, 0, 0, 0]])
    y = x.copy()
    zi = np.zeros((2, 2, 2))
    try:
        kernel(sos, y, zi)
    except Exception:
        return False
    return bool(np.allclose(y, _direct(sos, x), rtol=1e-12, atol=1e-12))


def sosfilt_rows(sos: np.ndarray, x: np.ndarray, zi: np.ndarray) -> None:
    """Filter each row of ``x`` (C-contiguous float64, (rows, frames)) in place through
    the sections ``sos`` (n, 6), carrying the state ``zi`` (rows, n, 2, float64,
    C-contiguous; updated in place). Same arithmetic as ``scipy.signal.sosfilt``."""
    global _kernel
    if _kernel is None:
        try:
            kernel = _load_private()
        except Exception:  # another scipy layout: the public function will do
            kernel = None
        _kernel = kernel if kernel is not None and _self_check(kernel) else _public
    _kernel(sos, x, zi)
