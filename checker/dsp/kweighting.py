"""K-weighting (ITU-R BS.1770-4 Annex 1) as two biquads for any sample rate.

BS.1770-4 gives the filter only at 48 kHz (Annex 1, Table 1: the "stage 1"
high-shelf that models the head; Table 2: the "stage 2" RLB high-pass). For
any other rate we redesign both stages from analog parameters fitted to those
tables and map them with the bilinear transform, prewarped at each stage's
corner frequency (``K = tan(pi f0 / fs)``):

- shelf: f0 = 1681.974450955533 Hz, gain 3.999843853973347 dB,
  Q = 0.7071752369554196, mid-band gain ``Vb = Vh ** 0.4996667741545416``;
- high-pass: f0 = 38.13547087602444 Hz, Q = 0.5003270373238773.

These are the full-precision values of the fit (the rounded forms quoted in
docs/standards.md: ~1681.97 Hz, ~3.99984 dB, Q ~0.7072; ~38.135
Hz, Q ~0.5003). At 48 kHz the design reproduces Tables 1 and 2 to about
1e-15 (tested to 1e-8 in tests/conformance/test_loudness_conformance.py).

Drift at other rates (measured with scipy.signal.sosfreqz, gain of the design
at fs minus the gain of the 48 kHz table filter, in dB):

==========  =======  =======  =======  =======  =======  =======  =======
freq        16 kHz   32 kHz   44.1k    88.2k    96k      192k     384k
==========  =======  =======  =======  =======  =======  =======  =======
100 Hz      +0.086   +0.022   +0.004   -0.020   -0.022   -0.033   -0.038
997 Hz      +0.040   +0.014   +0.003   -0.016   -0.017   -0.027   -0.032
3 kHz       +0.148   +0.032   +0.005   -0.025   -0.028   -0.040   -0.046
==========  =======  =======  =======  =======  =======  =======  =======

So a 997 Hz calibration tone reads about 0.017 LU low at 96 kHz and 0.027 LU
low at 192 kHz compared with 48 kHz. This is the same prewarped design the
libebur128 reference uses, so cross-checks against it at 44.1 and 96 kHz agree
to far better than those drifts; the drift is a property of defining the
filter by analog parameters, not a bug in one rate. (At 8 kHz the shelf corner
sits near Nyquist and the error at 3 kHz grows to +0.42 dB: treat loudness of
8 kHz files as approximate.)
"""

from __future__ import annotations

import math

import numpy as np

#: BS.1770-4 Annex 1 Table 1 (stage 1, shelving filter) at 48 kHz: b0, b1, b2, a0, a1, a2.
TABLE1_48K = (
    1.53512485958697,
    -2.69169618940638,
    1.19839281085285,
    1.0,
    -1.69065929318241,
    0.73248077421585,
)
#: BS.1770-4 Annex 1 Table 2 (stage 2, high-pass) at 48 kHz: b0, b1, b2, a0, a1, a2.
TABLE2_48K = (1.0, -2.0, 1.0, 1.0, -1.99004745483398, 0.99007225036621)

SHELF_F0_HZ = 1681.974450955533
SHELF_GAIN_DB = 3.999843853973347
SHELF_Q = 0.7071752369554196
SHELF_VB_EXPONENT = 0.4996667741545416
HIGHPASS_F0_HZ = 38.13547087602444
HIGHPASS_Q = 0.5003270373238773

MIN_RATE_HZ = 8_000
#: Tested from 8 to 384 kHz; the reader accepts up to 768 kHz, so the design does too.
MAX_RATE_HZ = 768_000


def shelf_biquad(sample_rate_hz: float) -> np.ndarray:
    """Stage 1 (high shelf) as one sos row [b0, b1, b2, 1, a1, a2]."""
    k = math.tan(math.pi * SHELF_F0_HZ / sample_rate_hz)
    vh = 10.0 ** (SHELF_GAIN_DB / 20.0)
    vb = vh**SHELF_VB_EXPONENT
    a0 = 1.0 + k / SHELF_Q + k * k
    return np.array(
        [
            (vh + vb * k / SHELF_Q + k * k) / a0,
            2.0 * (k * k - vh) / a0,
            (vh - vb * k / SHELF_Q + k * k) / a0,
            1.0,
            2.0 * (k * k - 1.0) / a0,
            (1.0 - k / SHELF_Q + k * k) / a0,
        ]
    )


def highpass_biquad(sample_rate_hz: float) -> np.ndarray:
    """Stage 2 (RLB high-pass) as one sos row [1, -2, 1, 1, a1, a2]."""
    k = math.tan(math.pi * HIGHPASS_F0_HZ / sample_rate_hz)
    a0 = 1.0 + k / HIGHPASS_Q + k * k
    return np.array(
        [1.0, -2.0, 1.0, 1.0, 2.0 * (k * k - 1.0) / a0, (1.0 - k / HIGHPASS_Q + k * k) / a0]
    )


def k_weighting_sos(sample_rate_hz: float) -> np.ndarray:
    """K-weighting for ``sample_rate_hz`` as scipy second-order sections, shape (2, 6).

    Row 0 is the shelf (Table 1), row 1 the high-pass (Table 2).
    """
    if not MIN_RATE_HZ <= sample_rate_hz <= MAX_RATE_HZ:
        raise ValueError(
            f"k_weighting_sos: sample_rate_hz = {sample_rate_hz} "
            f"(expected {MIN_RATE_HZ} to {MAX_RATE_HZ})"
        )
    return np.vstack([shelf_biquad(sample_rate_hz), highpass_biquad(sample_rate_hz)])
