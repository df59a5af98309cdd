"""Progress within one file, through real worker processes: the seconds a worker has decoded
reach the parent while the file is still being measured (--jobs 1 and 2, with the read-ahead
thread), a file stopped part-way (killed, over its time limit, out of memory) counts with what
it had decoded, and `deliverycheck check` in a pipe prints a line with seconds of audio before
its one file finishes.

No timing: a worker is held after its first block until the test creates a release file (the
measuring doubles below; for the command line, DELIVERYCHECK_HOLD_UNTIL, checker/run/live.py).
Expected seconds are arithmetic on the generated files (frames / 48,000 Hz). The doubles live
at module level so worker processes can import them.
"""

from __future__ import annotations

import functools
import os
import re
import selectors
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from signals import sine, write

from checker.analysis.onepass import measure
from checker.meters.base import MeasureOptions
from checker.run.live import HOLD_ENV
from checker.run.progress import AudioLedger
from checker.run.workers import LocalPool, Task

ROOT = Path(__file__).resolve().parents[2]
RATE = 48_000
ONE_BLOCK = MeasureOptions(block_frames=RATE)  # the first report is 1.0 s exactly
WAIT_S = 60.0  # a bound against hanging, never reached when the code works


def _release(path: str) -> Path:
    return Path(path).with_suffix(".go")


def _wait_for(path: Path) -> None:
    deadline = time.monotonic() + WAIT_S
    while not path.exists() and time.monotonic() < deadline:
        time.sleep(0.01)


def _held(path, options, on_frames=None, read_ahead=False):
    """measure(), waiting after every reported block until the file's release exists."""

    def report(frames, rate):
        on_frames(frames, rate)
        _wait_for(_release(path))

    return measure(path, options, read_ahead=read_ahead, on_frames=report)


def _stopped_after_first_block(path, options, on_frames=None):
    """measure() that, after its first reported block, dies, hangs or allocates too much
    (the word in the file's name says which)."""
    name = os.path.basename(path)

    def report(frames, rate):
        on_frames(frames, rate)
        if "crash" in name:
            os.kill(os.getpid(), signal.SIGKILL)
        elif "hang" in name:
            time.sleep(120)
        elif "greedy" in name:
            np.ones(2 * 1024**3 // 8)  # 2 GiB, above the 768 MiB ceiling used below

    return measure(path, options, on_frames=report)


def _files(folder: Path, names_s: dict[str, float]) -> list[Task]:
    folder.mkdir(parents=True, exist_ok=True)
    tasks = []
    for i, (name, seconds) in enumerate(names_s.items()):
        path = write(folder / name, sine(997.0, -20.0, seconds, channels=2))
        tasks.append(Task(i, str(path), path.stat().st_size))
    return tasks


def _run_in_thread(pool: LocalPool, tasks, ledger):
    box: dict = {}
    thread = threading.Thread(
        target=lambda: box.setdefault("out", list(pool.run(tasks, ONE_BLOCK, ledger)))
    )
    thread.start()
    return thread, box


def _poll(ledger: AudioLedger, want_s: float) -> float:
    deadline = time.monotonic() + WAIT_S
    while ledger.done_s() < want_s and time.monotonic() < deadline:
        time.sleep(0.01)
    return ledger.done_s()


@pytest.mark.parametrize(
    ("jobs", "fn"),
    [
        (1, _held),
        pytest.param(2, _held, marks=pytest.mark.slow),  # two workers start: about 7 s here
        (1, functools.partial(_held, read_ahead=True)),
    ],
    ids=["jobs1", "jobs2", "read-ahead"],
)
def test_seconds_decoded_reach_the_parent_while_files_are_measured(tmp_path, jobs, fn):
    tasks = _files(tmp_path, {"a.wav": 3.0, "b.wav": 2.0})
    ledger = AudioLedger()
    thread, box = _run_in_thread(LocalPool(jobs, memory_mb=None, measure_fn=fn), tasks, ledger)
    try:
        # Each worker holds its file after the first 1.0 s block: jobs files in flight,
        # 1.0 s each (48,000 frames / 48,000 Hz), nothing finished yet.
        assert_allclose(_poll(ledger, float(jobs)), float(jobs), rtol=0, atol=1e-12)
        total, estimated = ledger.total_s()
        if jobs == 2:  # both headers known: 3.0 + 2.0 s, exact
            assert (total, estimated) == (5.0, False)
        else:  # b.wav not started: estimated from its size at a.wav's seconds per byte
            assert estimated and total == pytest.approx(5.0, abs=0.01)
    finally:
        for task in tasks:
            _release(task.path).touch()
        thread.join(WAIT_S)
    assert [o[0] for _, o in box["out"]] == ["ok", "ok"]
    assert_allclose(ledger.done_s(), 5.0, rtol=0, atol=1e-12)
    assert ledger.total_s() == (5.0, False)


@pytest.mark.slow  # three workers replaced and a 3 s time limit
def test_a_file_stopped_part_way_counts_with_what_it_decoded(tmp_path):
    tasks = _files(
        tmp_path, {"a-crash.wav": 3.0, "b-hang.wav": 3.0, "c-greedy.wav": 3.0, "d.wav": 2.0}
    )
    ledger = AudioLedger()
    pool = LocalPool(1, memory_mb=768, measure_fn=_stopped_after_first_block, timeout_s=3.0)
    outcomes = {os.path.basename(t.path): o for t, o in pool.run(tasks, ONE_BLOCK, ledger)}
    assert "worker process died" in outcomes["a-crash.wav"][1]
    assert "time limit" in outcomes["b-hang.wav"][1]
    assert "out of memory" in outcomes["c-greedy.wav"][1]
    assert outcomes["d.wav"][0] == "ok"
    # three files stopped after their first 1.0 s block, one measured whole: 3 x 1.0 + 2.0
    assert_allclose(ledger.done_s(), 5.0, rtol=0, atol=1e-12)
    assert ledger.total_s() == (5.0, False)


LINE = re.compile(r"^checking: 0/1 files, ([\d,]+) of (~?)([\d,]+) s of audio at ")


def _check(src: Path, out: Path, release: Path, *extra: str) -> subprocess.Popen:
    argv = [sys.executable, "-m", "checker", "check", str(src), "--profile", "podcast-stereo"]
    env = {**os.environ, HOLD_ENV: str(release)}
    return subprocess.Popen(
        [*argv, "--out", str(out), *extra],
        cwd=ROOT,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )


@pytest.mark.slow  # the first line in a log comes after 5 s, by design
def test_check_in_a_pipe_prints_seconds_of_audio_before_its_one_file_finishes(tmp_path):
    src = tmp_path / "in"
    src.mkdir()
    write(src / "long.wav", sine(997.0, -20.0, 20.0, channels=2))  # 20 s, 960,000 frames
    release = tmp_path / "release"
    proc = _check(src, tmp_path / "out", release)
    lines, seen = [], None
    try:
        sel = selectors.DefaultSelector()
        sel.register(proc.stderr, selectors.EVENT_READ)
        deadline = time.monotonic() + WAIT_S
        while seen is None and time.monotonic() < deadline:
            if not sel.select(timeout=1.0):
                continue
            line = proc.stderr.readline()
            if not line:
                break
            lines.append(line.rstrip("\n"))
            seen = LINE.match(lines[-1])
    finally:
        release.touch()  # let the worker go on either way
    _, rest = proc.communicate(timeout=WAIT_S)
    lines += rest.splitlines()
    assert seen is not None, lines
    done_s, estimated, total_s = int(seen[1].replace(",", "")), seen[2], seen[3]
    # The worker is held after its first block (the engine's block for 48 kHz stereo is
    # 384,000 frames = 8 s, checker.io.audio.auto_block_frames): some audio, not all of it,
    # of a total the header gives exactly.
    assert 0 < done_s < 20 and (estimated, total_s) == ("", "20")
    assert "\r" not in "".join(lines)
    assert lines[-1].startswith("checked: 1/1 files (measured 1, from the store 0), 20 of 20 s")

    quiet = _check(src, tmp_path / "out", release, "--quiet")  # from the store, silently
    _, err = quiet.communicate(timeout=WAIT_S)
    assert "checking" not in err and "checked:" not in err
