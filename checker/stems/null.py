"""Streaming null test of a stem sum against a reference mix.

Method
------
``m`` is the reference mix, ``s`` the sum of the stems, both (frames,
channels), fed in lockstep. Two things are measured.

1. The plain residual ``r = m - s`` (no gain, no offset) over the longer of
   the two lengths, each taken as zero beyond its end:
   ``null_residual_db = 10 log10(sum r^2 / sum m^2)`` (relative to the mix).

2. The best fit ``m[n] ~ g * s[n - d]`` for offsets ``d`` in
   ``[-max_lag, +max_lag]`` samples (default 4800 = 100 ms at 48 kHz), one
   gain and one offset for all channels. Over the common length ``N`` (the
   shorter of mix and sum; ``s`` is taken as zero outside ``[0, N)``):

   - ``c[d] = sum_n sum_ch m[n] s[n - d]`` (cross-correlation),
   - ``E_s(d) = sum_n sum_ch s[n - d]^2`` (the shifted sum's energy inside
     the window: the whole energy minus the first ``-d`` or last ``d`` frames),
   - least squares for each ``d``: ``g = c[d] / E_s(d)`` and residual energy
     ``E_m - c[d]^2 / E_s(d)``; the best ``d`` is the one that leaves the least.

   The correlation is accumulated block by block with an FFT: the mix is
   processed ``max_lag`` frames behind the read position, so every lag's
   partner samples of ``s`` are already known; the state is the last
   ``max_lag`` frames of the mix, the last ``2 max_lag`` frames of the sum,
   the energy of the sum's first ``max_lag`` frames and ``2 max_lag + 1``
   correlation values. Memory does not grow with length.

   A positive ``null_fit_offset_samples`` means the mix is late relative to the
   stems (delay the stems by ``d`` to match). ``null_fit_gain_db`` is the gain
   to apply to the stem sum; a negative ``g`` (polarity inverted) is reported
   in ``null_fit_inverted``. The fitted residual adds the energy outside the
   common length (mix frames past the sum, or scaled sum frames past the mix).
   Being a difference of energies it has a numerical floor (``FIT_FLOOR_DB``);
   the plain residual is summed directly and has none.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import fft as sfft

from checker.model.units import power_to_db

DEFAULT_MAX_LAG_SAMPLES = 4800

#: The fitted residual is a difference of energies (``E_m - c^2 / E_s``), so
#: float64 round-off limits it to roughly 1e-14 of the mix energy; fitted
#: residuals below this floor are reported as the floor, with a note.
FIT_FLOOR_DB = -140.0


@dataclass(frozen=True)
class NullResult:
    null_residual_db: float | None
    null_fit_gain_db: float | None
    null_fit_offset_samples: int | None
    null_fit_inverted: bool | None
    null_fit_residual_db: float | None
    null_max_lag_samples: int
    null_note: str | None

    def to_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


class NullAccumulator:
    """Accumulates the null test; ``feed(mix_block, sum_block)`` in lockstep.

    Blocks are (frames, channels) float arrays starting at the same frame; a
    block may be shorter (or empty) once one of the two has ended.
    """

    def __init__(self, channels: int, max_lag_samples: int = DEFAULT_MAX_LAG_SAMPLES) -> None:
        if max_lag_samples < 0:
            raise ValueError(f"max_lag_samples = {max_lag_samples} (expected >= 0)")
        self.channels = channels
        self.lag = int(max_lag_samples)
        lag = self.lag
        self._m_hist = np.zeros((lag, channels))
        self._s_hist = np.zeros((2 * lag, channels))
        self._corr = np.zeros(2 * lag + 1)  # index j = L - d
        self._head_energy = np.zeros(lag)  # per-frame energy of the sum's first L frames
        self._common = 0  # frames where both mix and sum exist (a prefix)
        self._common_open = True
        self._mix_energy = 0.0  # whole mix
        self._mix_common_energy = 0.0
        self._sum_common_energy = 0.0
        self._mix_beyond = 0.0
        self._sum_beyond = 0.0
        self._residual = 0.0

    # -- feeding -----------------------------------------------------------
    def feed(self, mix: np.ndarray, total: np.ndarray) -> None:
        n_m, n_s = mix.shape[0], total.shape[0]
        n = max(n_m, n_s)
        if n == 0:
            return
        mix_e = float(np.sum(mix * mix))
        self._mix_energy += mix_e
        # plain residual over the longer length
        if n_m == n_s:
            r = mix - total
            self._residual += float(np.sum(r * r))
        else:
            k = min(n_m, n_s)
            r = mix[:k] - total[:k]
            self._residual += float(np.sum(r * r))
            self._residual += float(np.sum(mix[k:] ** 2)) + float(np.sum(total[k:] ** 2))
        # the fit runs over the common prefix only
        k = min(n_m, n_s) if self._common_open else 0
        if k:
            m, s = mix[:k], total[:k]
            self._accumulate(m, s)
            self._mix_common_energy += float(np.sum(m * m))
            self._sum_common_energy += float(np.sum(s * s))
        self._mix_beyond += float(np.sum(mix[k:] ** 2))
        self._sum_beyond += float(np.sum(total[k:] ** 2))
        if k < n or n_m != n_s:
            self._common_open = False

    def _accumulate(self, m: np.ndarray, s: np.ndarray) -> None:
        lag, b = self.lag, m.shape[0]
        start = self._common
        if start < lag:  # remember the sum's first frames' energy for E_s(d < 0)
            take = min(lag - start, b)
            self._head_energy[start : start + take] = np.sum(s[:take] ** 2, axis=1)
        m_ext = np.concatenate([self._m_hist, m])
        s_ext = np.concatenate([self._s_hist, s])
        self._corr += _xcorr(m_ext[:b], s_ext, 2 * lag + 1)
        self._m_hist = m_ext[b:].copy()
        self._s_hist = s_ext[b:].copy()
        self._common += b

    # -- result --------------------------------------------------------------
    def result(self) -> NullResult:
        lag = self.lag
        note = None
        plain = None
        if self._mix_energy > 0.0:
            plain = power_to_db(self._residual / self._mix_energy)
        else:
            note = "the reference mix is digital silence: no level relative to it"
        # flush the last L mix frames against the sum (zero past the common end)
        corr = self._corr.copy()
        if lag:
            corr += _xcorr(
                self._m_hist,
                np.concatenate([self._s_hist, np.zeros_like(self._m_hist)]),
                2 * lag + 1,
            )
        if plain is None or self._common == 0 or self._sum_common_energy <= 0.0:
            if note is None:
                note = "the stem sum is digital silence where it overlaps the mix: no fit"
            return NullResult(plain, None, None, None, None, lag, note)
        n = self._common
        d = np.arange(lag, -lag - 1, -1)  # d for each index j = L - d
        head_cum = np.concatenate([[0.0], np.cumsum(self._head_energy)])
        tail = np.sum(self._s_hist[lag:] ** 2, axis=1) if lag else np.zeros(0)
        tail_cum = np.concatenate([[0.0], np.cumsum(tail[::-1])])  # energy of the last k frames
        cut = np.minimum(np.abs(d), n)
        e_s = np.full(d.shape, self._sum_common_energy)
        neg, pos = d < 0, d > 0
        e_s[neg] -= head_cum[np.minimum(cut[neg], lag)]
        e_s[pos] -= tail_cum[np.minimum(cut[pos], lag)]
        # guard against round-off making a vanishing energy slightly negative
        scale = self._sum_common_energy * 1e-12
        explained = np.where(e_s > scale, corr**2 / np.where(e_s > scale, e_s, 1.0), 0.0)
        j = int(np.argmax(explained))
        if explained[j] <= 0.0:
            return NullResult(plain, None, None, None, None, lag, "no correlation with the mix")
        g = float(corr[j] / e_s[j])
        resid = max(self._mix_common_energy - float(explained[j]), 0.0)
        resid += self._mix_beyond + g * g * self._sum_beyond
        fit_db = power_to_db(resid / self._mix_energy)
        if fit_db < FIT_FLOOR_DB:
            fit_db = FIT_FLOOR_DB
            note = f"the fitted residual is at or below the method's floor ({FIT_FLOOR_DB:.0f} dB)"
        return NullResult(
            null_residual_db=plain,
            null_fit_gain_db=20.0 * math.log10(abs(g)),
            null_fit_offset_samples=int(d[j]),
            null_fit_inverted=bool(g < 0.0),
            null_fit_residual_db=fit_db,
            null_max_lag_samples=lag,
            null_note=note,
        )


def _xcorr(m: np.ndarray, s_ext: np.ndarray, count: int) -> np.ndarray:
    """``r[j] = sum_i sum_ch m[i] s_ext[i + j]`` for ``j`` in ``[0, count)``.

    ``s_ext`` is at least ``len(m) + count - 1`` frames long; summed over channels. An FFT
    of ``len(s_ext)`` points is enough: every index used, ``i + j < len(m) + count - 1``,
    stays inside ``s_ext``, so nothing wraps around.
    """
    b = m.shape[0]
    if b == 0:
        return np.zeros(count)
    nfft = sfft.next_fast_len(s_ext.shape[0], real=True)
    fs = sfft.rfft(s_ext, n=nfft, axis=0)
    fm = sfft.rfft(m, n=nfft, axis=0)
    spec = np.einsum("kc,kc->k", fs, np.conj(fm))
    return sfft.irfft(spec, n=nfft)[:count]
