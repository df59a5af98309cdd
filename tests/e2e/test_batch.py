"""Batch runner: discovery, the worker pool's fault isolation, the cache, and Dask.

Files are tiny generated WAVs (1-2 s). The measuring function can be swapped
(``measure_fn``) for one that hangs, crashes its process or allocates too much
on chosen files, to show that each of those becomes one error row and the rest
of the batch is measured. These doubles must live at module level so worker
processes can import them.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
from signals import sine, write

from checker.analysis.onepass import measure
from checker.io.discover import Discovery, discover
from checker.model.verdict import ERROR, FAIL, PASS, Verdict
from checker.run.batch import Interrupted, run_batch
from checker.run.progress import Progress
from checker.run.store import open_store

# -- helpers -----------------------------------------------------------------------------


class StubProfile:
    """Just what run_batch reads from a profile (the real one: checker.profile.load)."""

    name = "stub"
    title = "stub profile for batch plumbing tests"
    true_peak_ceiling_dbtp = None

    def limits_table(self):
        return []


def duration_rule(m, profile) -> Verdict:
    """A test double for rules.evaluate: files of 2 s or more fail, others pass."""
    return Verdict(status=FAIL if m.get("duration_s") >= 2.0 else PASS)


def _hang_on_name(path, options):
    if "hang" in os.path.basename(path):
        time.sleep(120)
    return measure(path, options)


def _crash_on_name(path, options):
    if "crash" in os.path.basename(path):
        os.kill(os.getpid(), signal.SIGKILL)
    return measure(path, options)


def _greedy_on_name(path, options):
    if "greedy" in os.path.basename(path):
        big = np.ones(2 * 1024**3 // 8)  # 2 GiB, above the 768 MiB ceiling used below
        return big.sum()
    return measure(path, options)


def make_batch(folder, names_seconds):
    folder.mkdir(parents=True, exist_ok=True)
    for name, seconds in names_seconds:
        write(folder / name, sine(1000.0, -20.0, seconds, channels=2))
    return folder


# -- discovery ---------------------------------------------------------------------------


def test_discover_walks_sorted_and_reports_problems(tmp_path):
    root = tmp_path / "in"
    make_batch(root / "b", [("two.wav", 1.0)])
    make_batch(root / "a", [("one.flac", 1.0)])
    write(root / "a" / "one.flac", sine(1000.0, -20.0, 1.0), subtype="PCM_16")
    (root / "notes.txt").write_text("not audio")
    (root / "folder.wav").mkdir()  # a directory named like a file is walked, not measured
    write(root / "folder.wav" / "inside.WAV", sine(1000.0, -20.0, 1.0))
    os.symlink(root, root / "b" / "loop")  # a symlink loop back to the top
    os.symlink(root / "missing.wav", root / "dangling.wav")
    explicit = tmp_path / "take.bin"  # audio by its content: measured whatever its extension
    write(explicit, sine(1000.0, -20.0, 1.0), format="WAV")
    junk = tmp_path / "junk.bin"  # named, but no known content and no audio extension
    junk.write_bytes(b"\x00\x01\x02x")

    found = discover([str(root), str(explicit), str(junk), str(tmp_path / "nope")])

    assert list(found.files) == [
        str(root / "a" / "one.flac"),
        str(root / "b" / "two.wav"),
        str(root / "folder.wav" / "inside.WAV"),
        str(explicit),
    ]
    by_path = {p.path: p for p in found.problems}
    assert "symlink target does not exist" in by_path[str(root / "dangling.wav")].message
    assert by_path[str(root / "dangling.wav")].missed
    assert "does not exist" in by_path[str(tmp_path / "nope")].message
    assert by_path[str(root / "b" / "loop")].missed is False  # a note, nothing was missed
    assert "loop" in by_path[str(root / "b" / "loop")].message
    # A file named on the command line is never "not checked": refused with the reason.
    assert by_path[str(junk)].missed
    assert by_path[str(junk)].message == (
        f"{junk}: not audio: the content matches no audio format (no known signature) "
        "and the name ends in '.bin'"
    )
    # Found in a folder, a text file is listed as not checked, with why.
    assert [(s.path, s.reason) for s in found.not_checked] == [(str(root / "notes.txt"), "text")]
    assert found.remarks == {
        str(explicit): "the file name ends in '.bin', not an audio extension; its content is WAV"
    }
    # The same call again gives the same answer (stable order).
    assert discover([str(root), str(explicit), str(junk), str(tmp_path / "nope")]) == found


def test_discover_same_file_twice_is_one_file(tmp_path):
    make_batch(tmp_path, [("x.wav", 1.0)])
    os.symlink(tmp_path / "x.wav", tmp_path / "y.wav")
    found = discover([str(tmp_path), str(tmp_path / "x.wav")])
    assert list(found.files) == [str(tmp_path / "x.wav")]


def test_discover_unlistable_folder_is_a_problem(tmp_path, monkeypatch):
    # Tests run as root, where chmod 000 does not stop listing: make scandir refuse instead.
    make_batch(tmp_path / "ok", [("a.wav", 1.0)])
    (tmp_path / "locked").mkdir()
    real_scandir = os.scandir

    def scandir(path):
        if os.path.basename(path) == "locked":
            raise PermissionError(13, "Permission denied")
        return real_scandir(path)

    monkeypatch.setattr(os, "scandir", scandir)
    found = discover([str(tmp_path)])
    assert list(found.files) == [str(tmp_path / "ok" / "a.wav")]
    [problem] = found.problems
    assert problem.path == str(tmp_path / "locked") and problem.missed
    assert problem.message == f"{tmp_path / 'locked'}: folder cannot be listed (Permission denied)"


# -- batch: statuses, errors, cache -----------------------------------------------------


def test_file_vanished_after_discovery_is_an_error_row(tmp_path, monkeypatch):
    src = make_batch(tmp_path / "in", [("a.wav", 1.0)])
    gone = str(src / "gone.wav")
    monkeypatch.setattr(
        "checker.run.batch.discover",
        lambda paths: Discovery(files=(str(src / "a.wav"), gone)),
    )
    _, results = run_batch([src], StubProfile(), tmp_path / "out", jobs=1, evaluate=duration_rule)
    assert [(r.path, r.status) for r in results] == [(str(src / "a.wav"), PASS), (gone, ERROR)]
    assert results[1].error.startswith(f"{gone}: file vanished or cannot be read")


def test_batch_statuses_errors_and_cache(tmp_path):
    src = make_batch(tmp_path / "in", [("short.wav", 1.0), ("long.wav", 2.0)])
    (src / "text.wav").write_text("this is not audio\n")
    (src / "empty.wav").write_bytes(b"")
    out = tmp_path / "out"

    run, results = run_batch([src], StubProfile(), out, jobs=2, evaluate=duration_rule)

    status = {os.path.basename(r.path): r.status for r in results}
    assert status == {"empty.wav": ERROR, "long.wav": FAIL, "short.wav": PASS, "text.wav": ERROR}
    errors = {os.path.basename(r.path): r.error for r in results if r.status == ERROR}
    # Refused at intake by its content (checker.io.discover), never handed to the reader.
    assert errors["text.wav"] == (
        f"{src / 'text.wav'}: named like audio ('.wav') but its content is text, not audio"
    )
    assert [r.path for r in results] == sorted(r.path for r in results)
    assert run.finished_at is not None
    # 1 kHz sine written for exactly 1.0 s at 48 kHz: 48000 frames (by construction).
    short = next(r for r in results if r.path.endswith("short.wav"))
    assert short.measurement.frames == 48_000

    # Second run: nothing is read again (measurements and read errors come from the store).
    run2, results2 = run_batch([src], StubProfile(), out, jobs=2, evaluate=duration_rule)
    assert [(r.path, r.status, r.error) for r in results2] == [
        (r.path, r.status, r.error) for r in results
    ]
    with open_store(out) as store:
        assert set(store.measurement_attempts().values()) == {1}
        assert store.counts()["runs"] == 2
        assert store.counts()["errors"] == 1  # empty.wav; text.wav never reached the reader
    # --fresh measures everything again: the attempt counter shows it.
    run_batch([src], StubProfile(), out, jobs=1, fresh=True, evaluate=duration_rule)
    with open_store(out) as store:
        assert set(store.measurement_attempts().values()) == {2}


def test_changed_file_is_measured_again(tmp_path):
    src = make_batch(tmp_path / "in", [("a.wav", 1.0)])
    out = tmp_path / "out"
    _, first = run_batch([src], StubProfile(), out, jobs=1, evaluate=duration_rule)
    write(src / "a.wav", sine(1000.0, -20.0, 2.0, channels=2))  # new size and mtime
    _, second = run_batch([src], StubProfile(), out, jobs=1, evaluate=duration_rule)
    assert first[0].status == PASS and second[0].status == FAIL
    assert second[0].measurement.frames == 96_000  # 2.0 s x 48 kHz


@pytest.mark.slow
def test_hung_worker_becomes_error_row_and_pool_goes_on(tmp_path):
    src = make_batch(
        tmp_path / "in", [("a.wav", 1.0), ("b-hang.wav", 1.0), ("c.wav", 1.0), ("d.wav", 1.0)]
    )
    _, results = run_batch(
        [src],
        StubProfile(),
        tmp_path / "out",
        jobs=2,
        timeout_s=3.0,
        evaluate=duration_rule,
        measure_fn=_hang_on_name,
    )
    status = {os.path.basename(r.path): r.status for r in results}
    assert status == {"a.wav": PASS, "b-hang.wav": ERROR, "c.wav": PASS, "d.wav": PASS}
    hung = next(r for r in results if r.status == ERROR)
    assert "time limit" in hung.error and hung.error.startswith(str(src / "b-hang.wav"))
    # A timeout is worth retrying: the store does not cache it as a final answer.
    with open_store(tmp_path / "out") as store:
        assert store.db.execute("SELECT retry FROM errors").fetchall() == [(1,)]


@pytest.mark.slow
def test_crashed_worker_becomes_error_row_and_pool_goes_on(tmp_path):
    src = make_batch(
        tmp_path / "in", [("a.wav", 1.0), ("b-crash.wav", 1.0), ("c.wav", 1.0), ("d.wav", 2.0)]
    )
    _, results = run_batch(
        [src],
        StubProfile(),
        tmp_path / "out",
        jobs=2,
        evaluate=duration_rule,
        measure_fn=_crash_on_name,
    )
    status = {os.path.basename(r.path): r.status for r in results}
    assert status == {"a.wav": PASS, "b-crash.wav": ERROR, "c.wav": PASS, "d.wav": FAIL}
    crashed = next(r for r in results if r.status == ERROR)
    assert "worker process died" in crashed.error and "SIGKILL" in crashed.error


UNGUARDED_SCRIPT = """\
import json
import os

import checker

# No `if __name__ == "__main__":` guard, a common first script: every worker process imports
# this file again as it starts, and runs the batch below again inside itself.
out = os.path.join({out!r}, str(os.getpid()))
run, results = checker.check([{src!r}], "measure-only", out, jobs=1)
print(json.dumps([[os.path.basename(r.path), r.status, r.error] for r in results]))
"""


@pytest.mark.slow
def test_unguarded_script_gets_the_reason_not_a_crash_row_and_a_worker_per_file(tmp_path):
    # Python's multiprocessing imports the main script in each child it starts this way
    # (its "safe importing of main module" rule); the worker exits before it takes a file.
    src = make_batch(tmp_path / "in", [("a.wav", 1.0), ("b.wav", 1.0), ("c.wav", 1.0)])
    script = tmp_path / "my_check.py"
    script.write_text(UNGUARDED_SCRIPT.format(out=str(tmp_path / "out"), src=str(src)))
    proc = subprocess.run(
        [sys.executable, str(script)], capture_output=True, text=True, timeout=600, cwd=tmp_path
    )
    assert proc.returncode == 0, proc.stderr
    rows = json.loads(proc.stdout.strip().splitlines()[-1])
    assert [(name, status) for name, status, _ in rows] == [
        ("a.wav", ERROR),
        ("b.wav", ERROR),
        ("c.wav", ERROR),
    ]
    for _, _, error in rows:
        assert "worker processes exited while starting, before they took a file" in error
        assert "(exit code 1; 2 times)" in error  # one worker, so it stopped after two
        assert str(script) in error and 'if __name__ == "__main__":' in error
        assert "decoder crash" not in error


STARTS_SCRIPT = """\
import json
import os
import signal

from checker.analysis.onepass import measure

STATE = {state!r}
if __name__ == "__mp_main__":  # a worker starting: the first and the third to start exit
    started = len(os.listdir(STATE))
    open(os.path.join(STATE, str(started)), "w").close()
    if started in (0, 2):
        raise SystemExit(1)


def crash_on_name(path, options):
    if "crash" in os.path.basename(path):
        os.kill(os.getpid(), signal.SIGKILL)
    return measure(path, options)


if __name__ == "__main__":
    import checker

    run, results = checker.check(
        [{src!r}], "measure-only", {out!r}, jobs=1, measure_fn=crash_on_name
    )
    print(json.dumps([[os.path.basename(r.path), r.status, r.error] for r in results]))
"""


@pytest.mark.slow
def test_workers_that_exit_while_starting_now_and_then_do_not_stop_the_batch(tmp_path):
    # One worker: the first start fails, the second measures a.wav and is killed on
    # b-crash.wav, the third start fails, the fourth measures c.wav. Two start failures for
    # one worker's pool, but not in a row (a worker started in between): no file given up.
    src = make_batch(tmp_path / "in", [("a.wav", 1.0), ("b-crash.wav", 1.0), ("c.wav", 1.0)])
    state = tmp_path / "starts"
    state.mkdir()
    script = tmp_path / "starts.py"
    script.write_text(
        STARTS_SCRIPT.format(state=str(state), src=str(src), out=str(tmp_path / "out"))
    )
    proc = subprocess.run(
        [sys.executable, str(script)], capture_output=True, text=True, timeout=600, cwd=tmp_path
    )
    assert proc.returncode == 0, proc.stderr
    rows = {
        name: (status, error) for name, status, error in json.loads(proc.stdout.splitlines()[-1])
    }
    assert rows["a.wav"][0] != ERROR and rows["c.wav"][0] != ERROR, rows
    assert rows["b-crash.wav"][0] == ERROR
    assert "worker process died while measuring" in rows["b-crash.wav"][1]
    assert sorted(os.listdir(state)) == ["0", "1", "2", "3"]  # four workers started


@pytest.mark.slow
def test_memory_ceiling_becomes_error_row(tmp_path):
    src = make_batch(tmp_path / "in", [("a.wav", 1.0), ("b-greedy.wav", 1.0), ("c.wav", 1.0)])
    _, results = run_batch(
        [src],
        StubProfile(),
        tmp_path / "out",
        jobs=1,
        memory_mb=768,
        evaluate=duration_rule,
        measure_fn=_greedy_on_name,
    )
    status = {os.path.basename(r.path): r.status for r in results}
    assert status == {"a.wav": PASS, "b-greedy.wav": ERROR, "c.wav": PASS}
    assert "out of memory" in next(r for r in results if r.status == ERROR).error


def test_vanished_and_unlistable_inputs_are_error_rows(tmp_path):
    src = make_batch(tmp_path / "in", [("a.wav", 1.0)])
    os.symlink(src / "gone.wav", src / "link.wav")
    _, results = run_batch(
        [src, tmp_path / "missing"], StubProfile(), tmp_path / "out", jobs=1, evaluate=duration_rule
    )
    rows = {os.path.basename(r.path): (r.status, r.error) for r in results}
    assert rows["a.wav"][0] == PASS
    assert rows["link.wav"][0] == ERROR and "does not exist" in rows["link.wav"][1]
    assert rows["missing"][0] == ERROR and "does not exist" in rows["missing"][1]


def test_interrupt_keeps_finished_files(tmp_path):
    src = make_batch(tmp_path / "in", [(f"f{i}.wav", 1.0) for i in range(4)])
    calls = []

    def evaluate_then_interrupt(m, profile):
        calls.append(m.path)
        if len(calls) == 2:
            raise KeyboardInterrupt
        return duration_rule(m, profile)

    with pytest.raises(Interrupted) as info:
        run_batch([src], StubProfile(), tmp_path / "out", jobs=1, evaluate=evaluate_then_interrupt)
    assert (info.value.done, info.value.total) == (1, 4)
    with open_store(tmp_path / "out") as store:
        # Measurements are committed before judging: the interrupted file is kept too.
        assert len(store.measurement_attempts()) == 2
        assert store.runs()[0].finished_at is None
    _, results = run_batch([src], StubProfile(), tmp_path / "out", jobs=1, evaluate=duration_rule)
    assert [r.status for r in results] == [PASS] * 4
    with open_store(tmp_path / "out") as store:
        assert set(store.measurement_attempts().values()) == {1}


@pytest.mark.slow
def test_dask_local_cluster_matches_process_pool(tmp_path):
    pytest.importorskip("dask.distributed", reason="dask[distributed] not installed")
    src = make_batch(tmp_path / "in", [("a.wav", 1.0), ("b.wav", 2.0), ("c.wav", 1.5)])
    (src / "bad.wav").write_text("not audio")
    _, local = run_batch([src], StubProfile(), tmp_path / "pool", jobs=2, evaluate=duration_rule)
    progress = Progress(None)
    _, dask = run_batch(
        [src],
        StubProfile(),
        tmp_path / "dask",
        cluster="local:1",
        evaluate=duration_rule,
        progress=progress,
    )
    assert [r.to_dict(timeline=True) for r in dask] == [r.to_dict(timeline=True) for r in local]
    assert {r.status for r in dask} == {PASS, FAIL, ERROR}
    # The Dask pool reports audio per file: 1.0 + 2.0 + 1.5 s, the unreadable file adds none.
    assert progress.audio.done_s() == 4.5 and progress.audio.total_s() == (4.5, False)


def test_workers_use_a_second_thread_only_with_cores_to_spare():
    # run_batch asks for it only when there are fewer files than jobs (a long master checked
    # alone): two of the cores allowed per worker give read-ahead and the meters' prepare
    # steps, as `deliverycheck measure` does; fewer: one thread each.
    import functools

    from checker.analysis.onepass import measure
    from checker.run.workers import worker_measure_fn

    spare = worker_measure_fn(1, cores=2)
    assert isinstance(spare, functools.partial) and spare.keywords == {"read_ahead": True}
    assert spare.func is measure
    assert worker_measure_fn(2, cores=2) is measure
    assert worker_measure_fn(3, cores=4) is measure
    assert isinstance(worker_measure_fn(2, cores=4), functools.partial)
