"""Generate the demo delivery batch (deterministic: same bytes on every run).

Scenario (see demo/README.md): Tidewell Listening Co., an invented podcast
network, delivers a week of episodes, promos and an ad insert to a
distributor, its narrated series goes to a speech-anchored streaming service, and its
music unit hands stems of a theme tune to a mastering
engineer. Every file is synthesised here; each problem file carries one
realistic problem.

    python demo/generate.py OUT_DIR
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy import signal as sps

sys.path.insert(0, str(Path(__file__).resolve().parent))

from synth import music_like, room_tone, speech_like, stable  # noqa: E402

from checker.io.audio import Block, StreamInfo  # noqa: E402
from checker.io.layout import default_layout  # noqa: E402
from checker.meters.base import MeasureOptions  # noqa: E402
from checker.meters.loudness import LoudnessMeter  # noqa: E402

RATE = 48_000
#: Synthesised narration committed with the tests (espeak-ng, sentences of our own; see
#: tests/fixtures/speech/make_speech_fixtures.py): 16 kHz mono FLAC.
NARRATION = Path(__file__).resolve().parents[1] / "tests" / "fixtures" / "speech"


def lufs(x: np.ndarray, rate: int = RATE) -> float:
    """Integrated loudness with the project's own BS.1770 meter (used only to set demo levels)."""
    x = x if x.ndim == 2 else x[:, None]
    info = StreamInfo("demo", "WAV", "DOUBLE", rate, x.shape[1], x.shape[0])
    meter = LoudnessMeter(info, default_layout(x.shape[1]), MeasureOptions())
    meter.feed(Block(x=np.ascontiguousarray(x, dtype=np.float64), raw=None, start=0))
    return stable(meter.result().to_dict()["integrated_lufs"])


def dc(x: np.ndarray) -> np.ndarray:
    return np.array([stable(m) for m in np.atleast_1d(np.mean(x, axis=0))])


def soft_limit(x: np.ndarray, ceiling_dbfs: float) -> np.ndarray:
    """Leave everything below a knee 4 dB under the ceiling alone; bend peaks above it smoothly."""
    c = 10 ** (ceiling_dbfs / 20)
    k = c * 10 ** (-4 / 20)
    a = np.abs(x)
    over = a > k
    y = x.copy()
    y[over] = np.sign(x[over]) * (k + (c - k) * np.tanh((a[over] - k) / (c - k)))
    return y


def fit(x: np.ndarray, target_lufs: float, ceiling_dbfs: float = -3.0, rate: int = RATE):
    """Gain to target loudness, with a gentle soft limiter keeping peaks near the ceiling."""
    for _ in range(6):
        x = x * 10 ** ((target_lufs - lufs(x, rate)) / 20)
        x = soft_limit(x, ceiling_dbfs)
    return x - dc(x)  # limiting an asymmetric waveform leaves a trace of DC


def stereo(mono: np.ndarray, spread: float = 0.0, seed: int = 0) -> np.ndarray:
    """Mono voice placed in stereo (slightly different room tone per side)."""
    rng = np.random.default_rng(seed)
    side = room_tone(mono.shape[0], RATE, rng, level_dbfs=-70.0) * spread
    return np.stack([mono + side, mono - side], axis=1)


def write(path: Path, x: np.ndarray, subtype: str = "PCM_24", rate: int = RATE) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    sf.write(str(path), x, rate, subtype=subtype, format="WAV")


def episodes(out: Path) -> None:
    d = out / "podcast-week"
    voice = [speech_like(24.0, RATE, seed=s, voice_hz=f) for s, f in ((1, 120), (2, 190), (3, 150))]

    # ep101: on spec: -16 LUFS stereo, peaks well below -1 dBTP.
    write(d / "ep101-kelp-forest-hour.wav", fit(stereo(voice[0], 1.0, 1), -16.0))
    # ep102: mixed too quiet (-21 LUFS): plain gain fixes it.
    write(d / "ep102-quiet-engines.wav", fit(stereo(voice[1], 1.0, 2), -21.0))
    # ep103: mixed too loud (-12 LUFS), hard against the ceiling: needs turning down.
    write(d / "ep103-night-ferry-stories.wav", fit(stereo(voice[2], 1.0, 3), -12.0, -1.2))
    # ep104: a bright mix peak-normalised to 0 dBFS: the samples stop at full scale, but the
    # waveform between them goes over (inter-sample overs). Loudness stays on target.
    x = stereo(voice[0], 1.0, 4)
    x = x + 0.5 * sps.sosfilt(sps.butter(2, 9000, "high", fs=RATE, output="sos"), x, axis=0)
    t = np.arange(x.shape[0]) / RATE
    burst = (t > 11.0) & (t < 11.02)
    level = -16.0
    for _ in range(3):
        y = fit(x, level, -1.0)
        y[burst] += 0.3 * np.sin(2 * np.pi * 11_997 * t[burst] + 0.7)[:, None]
        y = y / np.max(np.abs(y))  # sample peak exactly 0 dBFS
        level += -16.0 - lufs(y)
    write(d / "ep104-tide-tables-peak-normalised.wav", y)
    # ep105: upsampled from 22.05 kHz material: no content above ~10 kHz.
    x = fit(stereo(voice[1], 1.0, 5), -16.0)
    x = sps.sosfiltfilt(sps.cheby2(10, 90, 10_200, fs=RATE, output="sos"), x, axis=0)
    x = x * 10 ** (
        (-16.0 - lufs(x)) / 20
    )  # plain gain: no limiter, so nothing new above the cutoff
    write(d / "ep105-lighthouse-letters-upsampled.wav", x)
    # ep106: 7 s of near-silence (faint hiss, -80 dBFS RMS) before the first word.
    pad = room_tone(7 * RATE, RATE, np.random.default_rng(6), level_dbfs=-80.0)
    x = np.concatenate([np.stack([pad, pad], 1), fit(stereo(voice[2], 1.0, 6), -16.0)])
    write(d / "ep106-harbour-walk-long-head.wav", x)
    # ep107: an editing slip left 250 ms of digital zero in the middle.
    x = fit(stereo(voice[0], 1.0, 7), -16.0)
    x[int(12.3 * RATE) : int(12.55 * RATE)] = 0.0
    write(d / "ep107-salt-and-steam-dropout.wav", x)
    # ep108: a mono interview delivered as a true mono file at -19 LUFS (podcast mono practice).
    write(d / "ep108-dockside-interview-mono.wav", fit(voice[1][:, None], -19.0))
    # ep109: the same mono interview as two identical channels at -16 LUFS.
    m = fit(np.stack([voice[1], voice[1]], 1), -16.0)
    write(d / "ep109-dockside-interview-dual-mono.wav", m)

    # promo-a: DC offset from a faulty interface (1.5 % of full scale).
    x = fit(stereo(voice[2], 1.0, 8), -16.0) + 0.015
    write(d / "promo-a-dc-offset.wav", x, "PCM_16")
    # promo-b: a music bed at the right loudness, but a hot fill at 6 s clipped in the bounce.
    x = music_like(20.0, RATE, seed=9)
    x = (x - dc(x)) * 10 ** ((-16.5 - lufs(x)) / 20)
    x[6 * RATE : int(6.5 * RATE)] *= 4.0
    write(d / "promo-b-clipped-bed.wav", np.clip(x, -1.0, 1.0), "PCM_16")
    # promo-c: a 5.1 promo (with LFE) sent to a stereo podcast feed.
    mus = fit(music_like(20.0, RATE, seed=10), -24.0)
    vo = fit(voice[0][: 20 * RATE], -22.0)
    lfe = sps.sosfilt(sps.butter(4, 100, fs=RATE, output="sos"), mus[:, 0]) * 2.0
    six = np.stack([mus[:, 0], mus[:, 1], vo, lfe, mus[:, 0] * 0.3, mus[:, 1] * 0.3], 1)
    six = six * 10 ** ((-16.0 - lufs(six)) / 20)  # on the podcast target; only the layout is wrong
    write(d / "promo-c-surround-5-1.wav", six)
    # ad-insert: 16-bit material padded into a 24-bit file.
    x = fit(stereo(voice[2][: 15 * RATE], 1.0, 11), -16.0)
    x16 = np.round(x * 32767) / 32768
    write(d / "ad-insert-16-bit-in-24.wav", x16, "PCM_24")
    # ep110: the upload was cut off: the header promises 24 s, 9 s arrived.
    full = d / "ep110-cut-off-upload.wav"
    write(full, fit(stereo(voice[2], 1.0, 12), -16.0))
    data = full.read_bytes()
    full.write_bytes(data[: 44 + 9 * RATE * 2 * 3])
    # show-notes: a text file that was named like audio.
    (d / "ep111-show-notes.wav").write_text("Episode 111 show notes: see the website.\n")


def narration(name: str) -> np.ndarray:
    """A committed narration at 48 kHz (16 kHz FLAC, resampled 3:1)."""
    x, rate = sf.read(str(NARRATION / f"{name}.flac"), dtype="float64")
    assert rate == 16_000, f"{name}.flac: rate = {rate} Hz (expected 16000 Hz)"
    return sps.resample_poly(x, 3, 1)


def under(voice: np.ndarray, bed_lu: float, seed: int) -> np.ndarray:
    """Stereo voice with a music bed ``bed_lu`` LU relative to the voice under it."""
    v = stereo(voice, 1.0, seed)
    bed = music_like(v.shape[0] / RATE, RATE, seed=seed)[: v.shape[0]]
    bed = bed * 10 ** ((lufs(v) + bed_lu - lufs(bed)) / 20)
    return v + bed


def narrated_series(out: Path) -> None:
    """Episodes of an invented narrated series for a speech-anchored streaming delivery
    (aes-td1008): real (synthesised) speech over music beds."""
    d = out / "narrated-series"
    a, b, c = (narration(n) for n in ("narration_a", "narration_b", "narration_c"))
    gap = np.zeros(int(0.6 * RATE))
    # nr201: the voice on top, a quiet bed (-15 LU) under it: speech and programme at -18.
    x = under(np.concatenate([a, gap, c]), -15.0, 31)
    write(d / "nr201-lamp-room.wav", fit(x, -18.0))
    # nr202: the bed sits only 3 LU under the voice and the music breaks between the
    # passages run 10 LU above it: on programme loudness alone it passes at -17 LUFS, but
    # the voice ends up near -23 LUFS, about 6 LU under the programme.
    voice = [under(a, -3.0, 32), under(b, -3.0, 33)]
    level = lufs(voice[0])
    breaks = []
    for seed in (34, 35, 36):
        m = music_like(8.0, RATE, seed=seed)
        breaks.append(m * 10 ** ((level + 10.0 - lufs(m)) / 20))
    x = np.concatenate([breaks[0], voice[0], breaks[1], voice[1], breaks[2]])
    write(d / "nr202-mill-wheel-loud-breaks.wav", fit(x, -17.0))
    # nr203: a music-only sting: no speech found, so it is judged on programme loudness.
    write(d / "nr203-theme-sting.wav", fit(music_like(12.0, RATE, seed=37), -17.0))


def stem_handoff(out: Path) -> None:
    """Theme-tune stems at 48 kHz / 24 bit plus the approved reference mix.

    The vocal stem slipped by 10 ms (480 samples) in the export, so the set
    does not rebuild the reference mix.
    """
    d = out / "theme-stems"
    n = 20 * RATE
    mus = music_like(20.0, RATE, seed=21)
    drums = np.zeros((n, 2))
    t = np.arange(n) / RATE
    for start in np.arange(0, 20.0, 0.5):
        a = int(start * RATE)
        k = min(n - a, int(0.5 * RATE))  # each hit rings until the next one
        seg = np.arange(k) / RATE
        hit = np.sin(2 * np.pi * (55 + 90 * np.exp(-seg * 35)) * seg) * np.exp(-seg * 14)
        drums[a : a + k] += hit[:, None] * np.array([0.9, 0.9])
    bass = (
        np.stack([np.sin(2 * np.pi * 55 * t) * 0.25] * 2, 1)
        * (0.6 + 0.4 * np.sin(np.pi * t))[:, None]
    )
    keys = mus * 0.8
    vox = np.stack([speech_like(20.0, RATE, seed=22, voice_hz=210)] * 2, 1) * 1.5
    stems = {"drums": drums * 0.35, "bass": bass, "keys": keys, "vocal": vox}
    for name, s in stems.items():
        stems[name] = s / np.max(np.abs(s))
    # Balance the stems, then scale the set so the mix peaks at -4 dBFS.
    balance = {"drums": 0.9, "bass": 0.5, "keys": 0.6, "vocal": 0.8}
    mix = sum(balance[k] * v for k, v in stems.items())
    scale = 10 ** (-4 / 20) / np.max(np.abs(mix))
    # PCM_24, not FLOAT: libsndfile stamps float WAV files with the time of writing (PEAK chunk).
    write(d / "reference-mix.wav", mix * scale, "PCM_24")
    for name, s in stems.items():
        s = s * balance[name] * scale
        if name == "vocal":
            s = np.concatenate([np.zeros((480, 2)), s[:-480]])
        write(d / "stems" / f"theme-{name}.wav", s, "PCM_24")


def main(argv: list[str]) -> int:
    out = Path(argv[1] if len(argv) > 1 else "demo/out")
    episodes(out)
    narrated_series(out)
    stem_handoff(out)
    print(out)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
