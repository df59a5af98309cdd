"""Progress within files: the audio ledger's arithmetic, the progress line with a fake clock,
and measure()'s ``on_frames`` contract (strictly increasing, last call = the file's frames,
whatever the block size, with and without the read-ahead thread).

Expected numbers are arithmetic on the test's own inputs (stated beside each check).
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from signals import sine, write

from checker.analysis.onepass import measure
from checker.meters.base import MeasureOptions
from checker.run.live import outcome_seconds, reporter, takes_on_frames
from checker.run.progress import AudioLedger, Progress


class FakeClock:
    def __init__(self):
        self.t = 0.0

    def __call__(self):
        return self.t


class Reader:
    """Stands in for a worker's shared slot: seconds decoded so far."""

    def __init__(self, value: float = 0.0):
        self.value = value

    def __call__(self) -> float:
        return self.value


# -- the ledger ----------------------------------------------------------------------------


def test_ledger_total_is_unknown_until_a_length_is_known():
    ledger = AudioLedger()
    assert not ledger.planned()
    ledger.plan(0, 1_000)
    ledger.plan(1, 2_000)
    assert ledger.planned()
    assert ledger.total_s() == (None, True)  # no file has a length yet: nothing to scale by
    assert ledger.done_s() == 0.0
    ledger.started(0, None, Reader(3.0))  # a header without a length calibrates nothing
    assert ledger.total_s() == (None, True)
    assert_allclose(ledger.done_s(), 3.0, rtol=0, atol=1e-12)  # but its decoded seconds count


def test_ledger_estimates_waiting_files_from_bytes_and_is_exact_once_all_started():
    ledger = AudioLedger()
    for key, size in enumerate((1_000, 2_000, 3_000)):
        ledger.plan(key, size)
    live0 = Reader(4.0)
    ledger.started(0, 10.0, live0)
    total, estimated = ledger.total_s()
    # 10 s per 1,000 bytes = 0.01 s/byte; 10 + (2,000 + 3,000) x 0.01 = 60 s
    assert estimated and total == pytest.approx(60.0, abs=1e-9)
    assert_allclose(ledger.done_s(), 4.0, rtol=0, atol=1e-12)
    live0.value = 8.0  # the worker decodes on: done moves within the file
    assert_allclose(ledger.done_s(), 8.0, rtol=0, atol=1e-12)
    ledger.finished(0, 10.0)
    assert_allclose(ledger.done_s(), 10.0, rtol=0, atol=1e-12)
    ledger.started(1, 25.0, Reader(5.0))
    ledger.started(2, 30.0, Reader(2.0))
    total, estimated = ledger.total_s()
    assert not estimated  # every unfinished file has a declared length: 10 + 25 + 30
    assert_allclose(total, 65.0, rtol=0, atol=1e-9)
    assert_allclose(ledger.done_s(), 17.0, rtol=0, atol=1e-12)  # 10 + 5 + 2


def test_ledger_counts_a_file_longer_than_declared_and_a_failed_file_by_what_decoded():
    ledger = AudioLedger()
    ledger.plan(0, 1_000)
    ledger.plan(1, 1_000)
    longer = Reader(7.0)
    ledger.started(0, 5.0, longer)  # decodes past its declared 5 s
    ledger.started(1, 20.0, Reader(6.0))
    assert_allclose(ledger.total_s()[0], 27.0, rtol=0, atol=1e-9)  # max(5, 7) + 20
    ledger.finished(1, 6.0, whole=False)  # killed at 6 s (time limit, memory ceiling)
    total, estimated = ledger.total_s()
    assert_allclose(total, 13.0, rtol=0, atol=1e-9)  # 7 + 6: the rest was never measured
    assert not estimated
    ledger.finished(0, 7.0)
    assert ledger.total_s() == (13.0, False)
    assert_allclose(ledger.done_s(), 13.0, rtol=0, atol=1e-12)
    ledger.finished(0, 99.0)  # a second report of the same file changes nothing
    assert_allclose(ledger.done_s(), 13.0, rtol=0, atol=1e-12)


def test_ledger_per_file_only_as_the_dask_pool_reports():
    ledger = AudioLedger()
    ledger.plan("a", 4_000)
    ledger.plan("b", 2_000)
    ledger.finished("a", 40.0)  # never started: only the end is known
    total, estimated = ledger.total_s()
    assert estimated and total == pytest.approx(60.0, abs=1e-9)  # 40 + 2,000 x 40 / 4,000
    ledger.finished("b", None, whole=False)  # failed before decoding anything
    assert ledger.total_s() == (40.0, False)


def test_ledger_ignores_a_reader_that_is_not_a_finite_positive_number():
    ledger = AudioLedger()
    ledger.plan(0, 10)
    ledger.started(0, 1.0, Reader(float("nan")))
    assert ledger.done_s() == 0.0 and ledger.total_s() == (1.0, False)


# -- the line ------------------------------------------------------------------------------


def test_line_shows_audio_within_a_file_with_its_total_and_an_eta_by_audio():
    clock, log = FakeClock(), io.StringIO()
    p = Progress(log, clock=clock, heartbeat_s=None, log_every_s=5.0)
    p.start(2)
    p.audio.plan(0, 1_000)
    p.audio.plan(1, 3_000)
    live = Reader(0.0)
    p.audio.started(0, 100.0, live)
    clock.t = 10.0
    live.value = 40.0
    # 40 s decoded in 10 s = 4.0 s/s; total 100 + 3,000 x 0.1 = 400 (estimated: "~");
    # ETA (400 - 40) / 4 = 90 s
    assert p.line() == (
        "checking: 0/2 files, 40 of ~400 s of audio at 4.0 s/s, elapsed 0:00:10, ETA 0:01:30"
    )
    p._draw()  # the heartbeat's call: a whole line in a log once 5 s have passed
    assert log.getvalue().splitlines() == [p.line()]
    p.audio.finished(0, 100.0)
    p.advance(measured=True)
    p.audio.started(1, 300.0, Reader(100.0))
    clock.t = 50.0
    # 200 s in 50 s = 4.0 s/s; exact total 400; ETA (400 - 200) / 4 = 50 s
    assert p.line() == (
        "checking: 1/2 files (measured 1, from the store 0), 200 of 400 s of audio at "
        "4.0 s/s, elapsed 0:00:50, ETA 0:00:50"
    )
    p.audio.finished(1, 300.0)
    p.advance(measured=True)
    clock.t = 100.0  # e.g. stem sets read after the files: not in the files' speed
    p.close()
    # 400 s of audio in the 50 s until the last file = 8.0 s/s; elapsed is the whole 100 s
    assert log.getvalue().splitlines()[-1] == (
        "checked: 2/2 files (measured 2, from the store 0), 400 of 400 s of audio at "
        "8.0 s/s, elapsed 0:01:40"
    )


def test_the_readme_example_line_is_what_the_progress_line_prints():
    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text()
    example = next(x for x in readme.splitlines() if x.startswith("checking: 0/5 files"))
    clock = FakeClock()
    p = Progress(io.StringIO(), clock=clock, heartbeat_s=None)
    p.start(5)
    for key in range(5):
        p.audio.plan(key, 1_000)
    p.audio.started(0, 10_800.0, Reader(1_520.0))  # a three-hour file, 1,520 s decoded
    clock.t = 16.0
    # 1,520 / 16 = 95.0 s/s; 10,800 + 4 x 1,000 bytes x 10.8 s/byte = 54,000 (estimated);
    # ETA (54,000 - 1,520) / 95 = 552 s = 0:09:12
    assert p.line() == example


def test_line_before_any_length_is_known_shows_seconds_without_a_total():
    clock = FakeClock()
    p = Progress(io.StringIO(), clock=clock, heartbeat_s=None)
    p.start(1)
    p.audio.plan(0, 500)
    p.audio.started(0, None, Reader(30.0))
    clock.t = 3.0
    # 30 s in 3 s = 10.0 s/s; no total and no file done: no ETA
    assert p.line() == "checking: 0/1 files, 30 s of audio at 10.0 s/s, elapsed 0:00:03"


def test_quiet_progress_writes_nothing_even_with_audio_moving():
    clock, out = FakeClock(), io.StringIO()
    p = Progress(out, quiet=True, clock=clock, heartbeat_s=None, log_every_s=0.0)
    p.start(1)
    p.audio.plan(0, 10)
    p.audio.started(0, 10.0, Reader(5.0))
    clock.t = 60.0
    p._draw()
    p.close()
    assert out.getvalue() == ""


# -- the callback contract ---------------------------------------------------------------


@pytest.fixture(scope="module")
def wav(tmp_path_factory):
    path = tmp_path_factory.mktemp("onframes") / "tone.wav"
    write(path, sine(997.0, -20.0, 2.5, channels=2))  # 120,000 frames at 48 kHz
    return path


@pytest.mark.parametrize("block_frames", [4_800, 48_000, 50_000, 1_000_000])
@pytest.mark.parametrize("read_ahead", [False, True])
def test_on_frames_strictly_increasing_last_is_the_file_whatever_the_block(
    wav, block_frames, read_ahead
):
    calls = []
    m = measure(
        wav,
        MeasureOptions(block_frames=block_frames),
        read_ahead=read_ahead,
        on_frames=lambda frames, rate: calls.append((frames, rate)),
    )
    frames = [f for f, _ in calls]
    assert all(b > a for a, b in zip(frames, frames[1:], strict=False))
    assert frames[-1] == m.frames == 120_000  # 2.5 s x 48,000 Hz
    assert {r for _, r in calls} == {48_000}
    # one call per block of at most block_frames: ceil(120,000 / block_frames) calls
    assert len(calls) == -(-120_000 // block_frames)
    assert max(np.diff([0, *frames])) <= block_frames


def test_on_frames_leaves_the_measurement_unchanged(wav):
    plain = measure(wav, MeasureOptions(block_frames=48_000))
    seen = measure(wav, MeasureOptions(block_frames=48_000), on_frames=lambda f, r: None)
    assert seen.values == plain.values and seen.findings == plain.findings


def test_on_frames_for_a_file_with_no_frames_is_one_call_with_zero(tmp_path):
    path = tmp_path / "empty.wav"
    write(path, np.zeros((0, 2)))
    calls = []
    m = measure(path, on_frames=lambda frames, rate: calls.append((frames, rate)))
    assert m.frames == 0 and calls == [(0, 48_000)]


def test_the_worker_reporter_writes_seconds_and_takes_on_frames_is_honest():
    class Slot:
        value = -1.0

    slot = Slot()
    report = reporter(slot)
    report(72_000, 48_000)
    assert_allclose(slot.value, 1.5, rtol=0, atol=1e-12)  # 72,000 / 48,000
    report(5, 0)  # no rate: nothing to divide by
    assert slot.value == 0.0
    assert takes_on_frames(measure)
    assert not takes_on_frames(lambda path, options: None)
    assert takes_on_frames(lambda path, options, **kw: None)


def test_outcome_seconds_whole_file_or_what_decoded():
    class M:
        def get(self, key):
            return {"duration_s": 12.5}.get(key)

    assert outcome_seconds(("ok", M()), 3.0) == (12.5, True)
    assert outcome_seconds(("ok", {"no": "duration"}), 3.0) == (3.0, True)
    assert outcome_seconds(("error", "x: died", True), 3.0) == (3.0, False)
