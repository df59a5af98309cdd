"""Stereo fold-down of multichannel files, and the channel order ``check`` is told.

References:
- ITU-R BS.775 fold-down coefficients (from memory; docs/standards.md#programme-structure):
  Lo = L + 0.7071 C + 0.7071 Ls, Ro = R + 0.7071 C + 0.7071 Rs, LFE omitted.
- pyebur128 (libebur128) measures the fold-down that the test computes itself with those
  coefficients: integrated loudness within 0.05 LU (the project's cross-check tolerance).
- Arithmetic for sines: in-phase sines of amplitude A in L, C and Ls give Lo = A (1 + 2 x 0.7071).
- EBU Tech 3341 true-peak tolerance (+0.2 / -0.4 dB) for the fold-down's true peak.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pyebur128
import pytest
from meterkit import run_meter
from numpy.testing import assert_allclose
from signals import programme, sine, write
from test_wavchunks import build

from checker import measure
from checker.cli.main import main
from checker.io.audio import StreamInfo
from checker.io.layout import Layout, default_layout
from checker.judge.rules import evaluate
from checker.meters.base import MeasureOptions
from checker.meters.downmix import NOTE_NOT_MULTICHANNEL, DownmixMeter, fold_matrix
from checker.model.errors import EXIT_FAILED, EXIT_OK, EXIT_USAGE, ProfileError, UsageError
from checker.profile.load import validate_profile_file

C3 = 0.7071  # BS.775 (from memory)


def bs775(x: np.ndarray, labels: tuple[str, ...]) -> np.ndarray:
    """The fold-down written out by hand from the BS.775 equations, for the references."""
    ch = {label: x[:, i] for i, label in enumerate(labels)}
    left = ch["L"] + C3 * ch["C"] + C3 * sum(ch[k] for k in ("Ls", "Lss", "Lrs") if k in ch)
    right = ch["R"] + C3 * ch["C"] + C3 * sum(ch[k] for k in ("Rs", "Rss", "Rrs") if k in ch)
    return np.stack([left, right], axis=1)


def ebur128_integrated(x: np.ndarray, rate: int) -> float:
    state = pyebur128.R128State(2, rate, pyebur128.MeasurementMode.MODE_I)
    buf = np.ascontiguousarray(x, dtype=np.float64).reshape(-1)
    state.add_frames(buf, x.shape[0])
    return pyebur128.get_loudness_global(state)


def info(rate: int, channels: int, frames: int) -> StreamInfo:
    return StreamInfo("mem.wav", "WAV", "DOUBLE", rate, channels, frames)


def test_coefficients_are_bs775():
    matrix, note = fold_matrix(default_layout(6))  # L R C LFE Ls Rs
    assert note is None
    # BS.775 (from memory): rows Lo, Ro; columns L R C LFE Ls Rs.
    assert_allclose(
        matrix,
        [[1, 0, C3, 0, C3, 0], [0, 1, C3, 0, 0, C3]],
        rtol=0,
        atol=0,
    )


@pytest.mark.parametrize(("rate", "channels", "seed"), [(48_000, 6, 3), (44_100, 8, 4)])
def test_fold_down_loudness_and_peaks_match_references(rate, channels, seed):
    x = programme(12.0, rate, channels, seed=seed, level_dbfs=-26.0)
    labels = default_layout(channels).labels
    folded = bs775(x, labels)
    got = run_meter(DownmixMeter, info(rate, channels, len(x)), x, sizes=(12_345,)).to_dict()
    # pyebur128 on the fold-down computed here (stereo, weights 1.0): 0.05 LU.
    assert_allclose(got["downmix_integrated_lufs"], ebur128_integrated(folded, rate), atol=0.05)
    # Sample peak: numpy's max |x| of the same fold-down (float64 sums: 1e-9 dB).
    want_sp = 20 * np.log10(np.abs(folded).max())
    assert_allclose(got["downmix_sample_peak_dbfs"], want_sp, rtol=0, atol=1e-9)
    assert got["downmix_true_peak_dbtp"] >= got["downmix_sample_peak_dbfs"] - 1e-9


def test_sines_fold_to_the_arithmetic_peak():
    rate, amp = 48_000, 0.5
    s = sine(997.0, 20 * np.log10(amp), 3.0, rate)[:, 0]
    x = np.zeros((s.size, 6))
    x[:, 0] = x[:, 2] = x[:, 4] = s  # L, C, Ls in phase
    got = run_meter(DownmixMeter, info(rate, 6, len(x)), x).to_dict()
    want = 20 * np.log10(amp * (1 + 2 * C3))  # arithmetic: 3.62 dBFS
    assert_allclose(got["downmix_sample_peak_dbfs"], want, rtol=0, atol=0.01)
    # EBU Tech 3341 true-peak tolerance: +0.2 / -0.4 dB around the sine's peak.
    assert want - 0.4 <= got["downmix_true_peak_dbtp"] <= want + 0.2


def test_block_size_does_not_matter():
    x = programme(6.0, 48_000, 6, seed=9, level_dbfs=-20.0)
    i = info(48_000, 6, len(x))
    whole = run_meter(DownmixMeter, i, x).to_dict()
    split = run_meter(DownmixMeter, i, x, sizes=(4_801, 1_234, 17)).to_dict()
    for key, value in whole.items():
        if isinstance(value, float):
            assert_allclose(split[key], value, rtol=0, atol=1e-9)
        else:
            assert split[key] == value


def test_stereo_and_unknown_layouts_have_no_fold_down():
    x = programme(1.0, 48_000, 2, seed=1)
    got = run_meter(DownmixMeter, info(48_000, 2, len(x)), x).to_dict()
    assert got["downmix_integrated_lufs"] is None
    assert got["downmix_note"] == NOTE_NOT_MULTICHANNEL
    matrix, note = fold_matrix(Layout(("L", "R", "X"), "assumed"))
    assert matrix is None and "unknown position" in note


PROFILE = """\
name = "fold-test"
title = "fold-down test"
version = "1"
description = "test input, not a published threshold"

[peaks]
true_peak_max_dbtp = {{ value = -1.0, severity = "fail", source = "test input" }}

[downmix]
downmix_true_peak_max_dbtp = {{ value = -1.0, severity = "fail", source = "test input" }}
{extra}
"""


def test_fold_down_over_is_flagged_while_every_channel_fits(tmp_path):
    amp = 10 ** (-4.0 / 20)  # -4 dBFS in each of L, C, Ls: every channel below -1 dBTP
    s = sine(997.0, -4.0, 3.0)[:, 0]
    x = np.zeros((s.size, 6))
    x[:, 0] = x[:, 2] = x[:, 4] = s
    x[:, 1] = x[:, 3] = x[:, 5] = 0.01 * s
    path = write(tmp_path / "five-one.wav", x, subtype="FLOAT")
    prof = tmp_path / "p.toml"
    prof.write_text(PROFILE.format(extra=""))
    m = measure(str(path))
    assert m.true_peak_dbtp < -1.0
    verdict = evaluate(m, validate_profile_file(prof))
    rules = [f.rule for f in verdict.flags]
    assert rules == ["downmix_true_peak_max_dbtp"]
    assert verdict.status == "fail"
    assert m.downmix_sample_peak_dbfs == pytest.approx(20 * np.log10(amp * 2.4142), abs=0.01)
    # A stereo file: the fold-down limit does not apply (nothing to fold).
    stereo = measure(str(write(tmp_path / "st.wav", x[:, :2], subtype="FLOAT")))
    assert evaluate(stereo, validate_profile_file(prof)).status == "pass"


FILM = ("L", "C", "R", "Ls", "Rs", "LFE")


def film_order_file(tmp_path):
    """A 5.1 programme written in film order L C R Ls Rs LFE (no channel mask)."""
    x = programme(8.0, 48_000, 6, seed=21, level_dbfs=-24.0)
    x[:, 1] *= 3.0  # a strong centre, so the order matters for loudness and fold-down
    x[:, 5] *= 2.0  # LFE: must be left out of loudness once the order is known
    folder = tmp_path / "in"
    folder.mkdir()
    write(folder / "film.wav", x, subtype="FLOAT")
    write(folder / "stereo.wav", x[:, :2], subtype="FLOAT")
    return folder, x


def rows_by_name(out):
    with open(out / "report.csv", newline="", encoding="utf-8") as f:
        return {r["path"].rsplit("/", 1)[-1]: r for r in csv.DictReader(f)}


def test_check_with_and_without_layout(tmp_path):
    folder, x = film_order_file(tmp_path)
    smpte = x[:, [0, 2, 1, 5, 3, 4]]  # the same audio in L R C LFE Ls Rs order
    state = pyebur128.R128State(6, 48_000, pyebur128.MeasurementMode.MODE_I)
    roles = ("LEFT", "RIGHT", "CENTER", "UNUSED", "LEFT_SURROUND", "RIGHT_SURROUND")
    for i, role in enumerate(roles):
        state.set_channel(i, getattr(pyebur128.ChannelType, role))
    state.add_frames(np.ascontiguousarray(smpte).reshape(-1), len(smpte))
    want = pyebur128.get_loudness_global(state)

    prof = tmp_path / "p.toml"
    prof.write_text(PROFILE.format(extra=""))
    out_plain, out_given = tmp_path / "plain", tmp_path / "given"
    args = ["check", str(folder), "--profile", str(prof), "--quiet"]
    assert main([*args, "--out", str(out_plain)]) in (EXIT_OK, EXIT_FAILED)
    code = main([*args, "--out", str(out_given), "--layout", " ".join(FILM)])
    assert code in (EXIT_OK, EXIT_FAILED)
    plain, given = rows_by_name(out_plain), rows_by_name(out_given)
    assert "assumed" in plain["film.wav"]["channel_layout"]
    assert given["film.wav"]["channel_layout"] == "L C R Ls Rs LFE (given)"
    assert "assumed" in given["stereo.wav"]["channel_layout"]  # 2 channels: its own layout
    # pyebur128 with the right roles (0.05 LU): only the given order agrees.
    assert_allclose(float(given["film.wav"]["integrated_lufs"]), want, rtol=0, atol=0.05)
    assert abs(float(plain["film.wav"]["integrated_lufs"]) - want) > 0.5
    assert_allclose(
        float(given["film.wav"]["downmix_integrated_lufs"]),
        ebur128_integrated(bs775(smpte, default_layout(6).labels), 48_000),
        rtol=0,
        atol=0.05,
    )


def test_profile_layout_and_mask_disagreement(tmp_path):
    x = programme(2.0, 48_000, 6, seed=5, level_dbfs=-24.0)
    folder = tmp_path / "in"
    folder.mkdir()
    build(folder, "masked.wav", x, mask=0x3F)  # the mask says L R C LFE Ls Rs
    prof = tmp_path / "p.toml"
    prof.write_text(PROFILE.format(extra='\n[format]\nchannel_layout = "L C R Ls Rs LFE"\n'))
    assert validate_profile_file(prof).channel_layout == "L C R Ls Rs LFE"
    out = tmp_path / "out"
    assert main(["check", str(folder), "--profile", str(prof), "--quiet", "--out", str(out)]) in (
        EXIT_OK,
        EXIT_FAILED,
    )
    line = (out / "results.jsonl").read_text(encoding="utf-8").splitlines()[0]
    row = json.loads(line)
    text = json.dumps(row)
    assert "L C R Ls Rs LFE (given)" in text
    assert "channel mask 0x3F says L R C LFE Ls Rs, but the layout given is L C R Ls Rs LFE" in text


def test_bad_layouts_are_usage_and_profile_errors(tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    write(folder / "a.wav", sine(997.0, -20.0, 0.5, channels=2), subtype="PCM_16")
    prof = tmp_path / "p.toml"
    prof.write_text(PROFILE.format(extra=""))
    args = ["check", str(folder), "--profile", str(prof), "--quiet", "--out", str(tmp_path / "o")]
    assert main([*args, "--layout", "L R Q"]) == EXIT_USAGE
    bad = tmp_path / "bad.toml"
    bad.write_text(PROFILE.format(extra='\n[format]\nchannel_layout = "L R Zz"\n'))
    with pytest.raises(ProfileError, match="channel_layout"):
        validate_profile_file(bad)


def test_layout_of_another_channel_count(tmp_path):
    path = str(write(tmp_path / "st.wav", programme(0.5, 48_000, 2, seed=2), subtype="FLOAT"))
    film = " ".join(FILM)
    with pytest.raises(UsageError, match="6 labels for a 2-channel file"):
        measure(path, MeasureOptions(layout=film))  # measure: a usage error
    m = measure(path, MeasureOptions(layout=film, layout_strict=False))  # a batch: not its count
    assert m.channel_layout == "L R (assumed from 2 channels)"
