"""The one place that uses private internals of upstream libraries, each behind a public fallback.

Two hot loops go past a library's public API because the public call costs more than the work:

- **soundfile**: ``SoundFile.read(out=...)`` checks the array, calls ``tell()`` and ``seek()``
  around every read. :func:`frame_reader` calls libsndfile's ``sf_readf_int`` /
  ``sf_readf_double`` through soundfile's private ``_snd`` / ``_ffi`` on the handle's private
  ``_file`` pointer instead.
- **scipy**: ``import scipy.signal`` costs about 0.7 s (it pulls in stats, interpolate, optimize)
  and ``sosfilt`` copies its input. :func:`sos_kernel` loads the compiled ``_sosfilt`` extension
  on its own and checks it once against a direct-form recursion.

If a private name is missing, behaves differently or fails its check, the public path is used
and gives the same numbers (tested: ``tests/unit/test_upstream.py`` runs both). Setting the
environment variable ``DELIVERYCHECK_PUBLIC_UPSTREAM=1`` forces the public paths everywhere.
``pyproject.toml`` bounds soundfile and scipy to the releases these paths were tested with.

Imports nothing from the project.
"""

from __future__ import annotations

import importlib.util
import os
import sys
from collections.abc import Callable
from pathlib import Path

import numpy as np

#: Environment variable that turns the private paths off.
PUBLIC_ONLY_ENV = "DELIVERYCHECK_PUBLIC_UPSTREAM"


class UpstreamReadError(Exception):
    """libsndfile reported a decoding error; the message is libsndfile's own words and
    ``frames`` how many frames of this read were decoded before it (0 when unknown)."""

    def __init__(self, message: str, frames: int = 0):
        super().__init__(message)
        self.frames = frames


def private_allowed() -> bool:
    return os.environ.get(PUBLIC_ONLY_ENV, "") in ("", "0")


# -- soundfile ------------------------------------------------------------------------------


def frame_reader(handle, buf: np.ndarray) -> tuple[Callable[[], int], str]:
    """A function that reads up to ``len(buf)`` frames from the open ``soundfile.SoundFile``
    ``handle`` into ``buf`` (C-contiguous (frames, channels), int32 or float64) and returns
    how many it read (0 at the end); it raises UpstreamReadError on a decoding error.
    The second value names the path taken: "private" or "public"."""
    if buf.dtype not in (np.int32, np.float64) or not buf.flags.c_contiguous:
        raise ValueError(f"buf: expected a C-contiguous int32 or float64 array, got {buf.dtype}")
    if private_allowed():
        private = _private_reader(handle, buf)
        if private is not None:
            return private, "private"
    return _public_reader(handle, buf), "public"


def _private_reader(handle, buf: np.ndarray) -> Callable[[], int] | None:
    try:
        from soundfile import _ffi, _snd

        cdata = handle._file
        readf = _snd.sf_readf_int if buf.dtype == np.int32 else _snd.sf_readf_double
        error = _snd.sf_error
        strerror = _snd.sf_strerror
        pointer = _ffi.cast("int *" if buf.dtype == np.int32 else "double *", buf.ctypes.data)
    except (ImportError, AttributeError, TypeError):
        return None
    frames = len(buf)

    def read() -> int:
        n = int(readf(cdata, pointer, frames))
        if error(cdata):
            reason = _ffi.string(strerror(cdata)).decode(errors="replace").strip()
            raise UpstreamReadError(reason, frames=max(n, 0))
        return max(n, 0)

    return read


def _public_reader(handle, buf: np.ndarray) -> Callable[[], int]:
    dtype = "int32" if buf.dtype == np.int32 else "float64"

    def read() -> int:
        try:
            out = handle.read(len(buf), dtype=dtype, out=buf)
        except RuntimeError as exc:  # soundfile.LibsndfileError
            raise UpstreamReadError(str(exc).strip()) from exc
        return len(out)

    return read


# -- scipy ----------------------------------------------------------------------------------

_SOSFILT_MODULE = "scipy.signal._sosfilt"


def sos_kernel() -> tuple[Callable[[np.ndarray, np.ndarray, np.ndarray], None], str]:
    """``kernel(sos, x, zi)``: filter the rows of C-contiguous float64 ``x`` (rows, frames) in
    place through ``sos`` (n, 6), carrying ``zi`` (rows, n, 2) in place; the arithmetic of
    ``scipy.signal.sosfilt``. The second value names the path taken."""
    if private_allowed():
        try:
            kernel = _load_private_sosfilt()
        except Exception:  # another scipy layout: the public function will do
            kernel = None
        if kernel is not None and _self_check(kernel):
            return kernel, "private"
    return _public_sosfilt, "public"


def _load_private_sosfilt() -> Callable | None:
    """scipy's compiled ``_sosfilt`` (what ``sosfilt`` calls after copying its input),
    loaded under its own full name without running ``scipy/signal/__init__.py``."""
    module = sys.modules.get(_SOSFILT_MODULE)
    if module is None:
        import scipy

        folder = Path(scipy.__file__).parent / "signal"
        found = [p for p in sorted(folder.glob("_sosfilt.*")) if p.suffix in (".so", ".pyd")]
        if not found:
            return None
        spec = importlib.util.spec_from_file_location(_SOSFILT_MODULE, found[0])
        if spec is None or spec.loader is None:
            return None
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        sys.modules[_SOSFILT_MODULE] = module  # a later import scipy.signal reuses it
    return getattr(module, "_sosfilt", None)


def _public_sosfilt(sos: np.ndarray, x: np.ndarray, zi: np.ndarray) -> None:
    from scipy.signal import sosfilt

    y, z = sosfilt(sos, x, axis=-1, zi=np.moveaxis(zi, 1, 0))
    x[...] = y
    zi[...] = np.moveaxis(z, 0, 1)


def direct_sosfilt(sos: np.ndarray, x: np.ndarray) -> np.ndarray:
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
    return bool(np.allclose(y, direct_sosfilt(sos, x), rtol=1e-12, atol=1e-12))
