"""checker.dsp.iir: in-place second-order sections, checked against scipy.signal.sosfilt.

scipy.signal.sosfilt is the reference (its documented direct form II transposed
sections); the fast path must give the same numbers bit for bit, block by block.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
from numpy.testing import assert_allclose, assert_array_equal
from scipy import signal as sps

from checker import upstream
from checker.dsp import iir
from checker.dsp.kweighting import k_weighting_sos


def _signal(frames: int, channels: int, seed: int) -> np.ndarray:
    return np.random.default_rng(seed).standard_normal((channels, frames)) * 0.3


def test_rows_match_scipy_sosfilt_bit_for_bit_in_any_split():
    sos = k_weighting_sos(48_000)
    x = _signal(20_000, 3, seed=1)
    want = sps.sosfilt(sos, x, axis=-1)  # reference: scipy's public function, one call
    for sizes in ((20_000,), (1, 999, 4_000), (7,)):
        zi = np.zeros((3, sos.shape[0], 2))
        got = []
        pos, i = 0, 0
        while pos < x.shape[1]:
            n = min(sizes[i % len(sizes)], x.shape[1] - pos)
            y = np.array(x[:, pos : pos + n], order="C")  # a copy: filtered in place
            iir.sosfilt_rows(sos, y, zi)
            got.append(y)
            pos += n
            i += 1
        assert_array_equal(np.concatenate(got, axis=1), want)


def test_public_fallback_gives_the_same_output_and_state():
    sos = k_weighting_sos(44_100)
    x = _signal(5_000, 2, seed=2)
    a, b = x.copy(), x.copy()
    za, zb = np.zeros((2, 2, 2)), np.zeros((2, 2, 2))
    iir.sosfilt_rows(sos, a, za)
    upstream._public_sosfilt(sos, b, zb)
    assert_array_equal(a, b)
    assert_array_equal(za, zb)


def test_direct_recursion_reference_agrees_with_scipy():
    # The self-check's reference recursion against scipy.signal.sosfilt.
    sos = k_weighting_sos(48_000)
    x = _signal(300, 2, seed=3)
    assert_allclose(
        upstream.direct_sosfilt(sos, x), sps.sosfilt(sos, x, axis=-1), rtol=0, atol=1e-12
    )


def test_a_wrong_kernel_fails_the_self_check():
    def broken(sos, x, zi):
        x *= 0.5

    assert not upstream._self_check(broken)
    assert upstream._self_check(upstream._load_private_sosfilt())


def test_measuring_does_not_import_scipy_signal_or_pandas(tmp_path):
    # Start-up cost: scipy.signal (~0.7 s) and pandas (~0.2 s) stay out of `measure`.
    import soundfile as sf

    path = tmp_path / "t.wav"
    t = np.arange(48_000) / 48_000
    sf.write(str(path), 0.5 * np.sin(2 * np.pi * 997 * t)[:, None], 48_000, subtype="PCM_24")
    code = (
        "import sys; from checker.cli.main import main; "
        f"status = main(['measure', '--json', {str(path)!r}]); "
        "bad = [m for m in ('scipy.signal', 'scipy.ndimage', 'scipy.fft', 'pandas') "
        "if m in sys.modules]; "
        "print('LOADED', bad); sys.exit(status)"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert "LOADED []" in proc.stdout, proc.stdout[-500:]
    assert '"integrated_lufs"' in proc.stdout
