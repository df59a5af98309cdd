"""``deliverycheck check``: exit codes, resume after SIGKILL, re-check without audio,
progress only on a terminal, Ctrl-C, and repeated kills at random points.

Profiles are written by the tests: one limit on sample peak, because the
sampled peak of a generated sine is known exactly (a 1 kHz sine at 48 kHz has a
sample on every crest, so its sample peak equals its amplitude: arithmetic).
The limit values are test inputs, not published thresholds.
"""

from __future__ import annotations

import io
import os
import pty
import random
import shutil
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
from signals import sine, write

import checker.io.audio
from checker.cli.main import main
from checker.model.errors import EXIT_FAILED, EXIT_OK, EXIT_UNCHECKED, EXIT_USAGE
from checker.run.progress import Progress
from checker.run.store import open_store

ROOT = Path(__file__).resolve().parents[2]

PROFILE_TEMPLATE = """\
name = "{name}"
title = "Test profile: sample peak at most {limit} dBFS"
version = "1"
description = "batch tests"

[peaks]
sample_peak_max_dbfs = {{ value = {limit}, severity = "fail", source = "test input" }}
true_peak_max_dbtp = {{ value = {tp}, severity = "fail", source = "test input" }}
"""


def write_profile(folder: Path, name: str, limit: float, tp: float = 3.0) -> Path:
    # The two profiles differ in their true-peak ceiling too: measurements must not depend
    # on it, so re-checking against the other profile still opens no audio.
    path = folder / f"{name}.toml"
    path.write_text(PROFILE_TEMPLATE.format(name=name, limit=limit, tp=tp))
    return path


def cli(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(list(argv), out=out, err=err)
    return code, out.getvalue(), err.getvalue()


def command(src: Path, profile: Path, out: Path, *extra: str) -> list[str]:
    return [
        sys.executable,
        "-m",
        "checker",
        "check",
        str(src),
        "--profile",
        str(profile),
        "--out",
        str(out),
        *extra,
    ]


def spawn(argv: list[str], **kw) -> subprocess.Popen:
    # Own session = own process group, so the whole run (parent and workers) can be killed.
    return subprocess.Popen(argv, cwd=ROOT, start_new_session=True, **kw)


def measured_count(out: Path) -> int:
    db = out / "results.sqlite"
    if not db.exists():
        return 0
    try:
        with sqlite3.connect(f"file:{db}?mode=ro", uri=True, timeout=5) as con:
            return con.execute("SELECT COUNT(*) FROM measurements").fetchone()[0]
    except sqlite3.OperationalError:  # tables not created yet
        return 0


def wait_for_measurements(proc: subprocess.Popen, out: Path, n: int, limit_s: float = 60.0):
    t0 = time.monotonic()
    while measured_count(out) < n:
        assert proc.poll() is None, "the run ended before it could be interrupted"
        assert time.monotonic() - t0 < limit_s, "no progress"
        time.sleep(0.02)


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    """14 files (12 good or loud, 2 not audio), two profiles, and an uninterrupted reference."""
    root = tmp_path_factory.mktemp("corpus")
    src = root / "in"
    (src / "sub").mkdir(parents=True)
    for i in range(12):
        level = -6.0 if i % 3 else -0.5  # every third file too hot for a -1 dBFS limit
        write(
            src / ("sub" if i % 2 else ".") / f"take{i:02d}.wav",
            sine(1000.0, level, 1.0, channels=2),
        )
    (src / "notes.wav").write_text("plain text, not audio\n")
    (src / "empty.flac").write_bytes(b"")
    loose = write_profile(root, "loose", -1.0, 3.0)
    strict = write_profile(root, "strict", -10.0, -12.0)
    ref = root / "reference"
    code, _, err = cli("check", str(src), "--profile", str(loose), "--out", str(ref), "--quiet")
    assert code == EXIT_UNCHECKED, err
    return {"root": root, "src": src, "loose": loose, "strict": strict, "ref": ref}


# -- exit codes ---------------------------------------------------------------------------


def test_exit_codes(tmp_path):
    for sub in ("good", "hot", "broken"):
        (tmp_path / sub).mkdir()
    good = write(tmp_path / "good" / "a.wav", sine(1000.0, -6.0, 1.0, channels=2))
    write(tmp_path / "hot" / "b.wav", sine(1000.0, -0.5, 1.0, channels=2))
    (tmp_path / "broken" / "c.wav").write_bytes(b"RIFF\x00\x00\x00\x00WAVE")
    profile = write_profile(tmp_path, "p", -1.0)

    # 0: every file passed. Sample peak of a -6 dBFS sine is -6 dBFS (see module doc).
    code, out, _ = cli("check", str(good), "--profile", str(profile), "--out", str(tmp_path / "o0"))
    assert code == EXIT_OK
    assert "1 pass" in out and str(tmp_path / "o0" / "report.csv") in out
    # 1: a file failed a rule; the summary names it with its first flag message.
    code, out, _ = cli(
        "check", str(tmp_path / "hot"), str(good), "--profile", str(profile), "--out",
        str(tmp_path / "o1"),
    )  # fmt: skip
    assert code == EXIT_FAILED
    assert "1 fail" in out and "b.wav" in out and "-0.50 dBFS" in out
    # 3: a file could not be checked (and it wins over 1).
    code, out, _ = cli(
        "check", str(tmp_path), "--profile", str(profile), "--out", str(tmp_path / "o3"),
    )  # fmt: skip
    assert code == EXIT_UNCHECKED
    assert "1 error" in out and "c.wav" in out
    # 2: profile error, nothing checked, nothing written.
    code, _, err = cli(
        "check", str(good), "--profile", "no-such-profile", "--out", str(tmp_path / "o2")
    )
    assert code == EXIT_USAGE and "no-such-profile" in err
    assert not (tmp_path / "o2").exists()
    # 2: usage errors.
    assert cli("check", str(good), "--profile", str(profile), "--jobs", "0")[0] == EXIT_USAGE
    assert cli("check", str(good))[0] == EXIT_USAGE  # --profile is required


def test_strict_makes_warnings_fail_and_a_mistyped_path_is_a_usage_error(tmp_path):
    (tmp_path / "in").mkdir()
    take = write(tmp_path / "in" / "a.wav", sine(1000.0, -6.0, 1.0, channels=2))
    warn = tmp_path / "warn.toml"
    # a -6 dBFS sine's sample peak is -6 dBFS (module doc): above the -10 dBFS warning level
    text = PROFILE_TEMPLATE.format(name="w", limit=-10.0, tp=3.0)
    warn.write_text(text.replace('"fail"', '"warn"', 1))  # the sample-peak limit only warns
    base = ["check", str(take), "--profile", str(warn), "--quiet"]
    code, out, _ = cli(*base, "--out", str(tmp_path / "o"))
    assert code == EXIT_OK and "1 warn" in out  # warnings pass by default
    code, out, _ = cli(*base, "--out", str(tmp_path / "o"), "--strict")
    assert code == EXIT_FAILED and "1 warn" in out
    # A PATH that names nothing: usage error, nothing checked or written.
    typo = tmp_path / "in" / "a.wvа"
    code, _, err = cli("check", str(typo), "--profile", str(warn), "--out", str(tmp_path / "t"))
    assert code == EXIT_USAGE and str(typo) in err and "nothing checked" in err
    assert not (tmp_path / "t").exists()
    # A file that exists but cannot be read stays an error row (exit 3).
    (tmp_path / "in" / "b.wav").write_bytes(b"RIFF\x00\x00\x00\x00WAVE")
    code, out, _ = cli("check", str(tmp_path / "in"), "--profile", str(warn), "--quiet",
                       "--out", str(tmp_path / "u"))  # fmt: skip
    assert code == EXIT_UNCHECKED and "1 error" in out


# -- re-check with another profile -------------------------------------------------------


def test_recheck_with_other_profile_opens_no_audio(corpus, tmp_path, monkeypatch):
    src, out = corpus["src"], tmp_path / "out"
    code, first, _ = cli("check", str(src), "--profile", str(corpus["loose"]), "--out", str(out))
    assert code == EXIT_UNCHECKED and "8 pass" in first and "4 fail" in first
    with open_store(out) as store:
        before = store.measurement_attempts()

    opened = []

    def no_audio(*args, **kwargs):
        opened.append(args)
        raise AssertionError("audio opened during a re-check")

    monkeypatch.setattr(checker.io.audio, "read_blocks", no_audio)
    monkeypatch.setattr(checker.io.audio.sf, "SoundFile", no_audio)
    monkeypatch.setattr(checker.io.audio.sf, "info", no_audio)
    code, second, _ = cli("check", str(src), "--profile", str(corpus["strict"]), "--out", str(out))
    assert opened == []
    # Under -10 dBFS every sine (-6 or -0.5 dBFS peak) fails; the two non-audio files
    # stay errors from the store without being read again.
    assert code == EXIT_UNCHECKED and "0 pass" in second and "12 fail" in second
    assert "2 error" in second
    with open_store(out) as store:
        assert store.measurement_attempts() == before
        assert [r.profile_name for r in store.runs()] == ["loose", "strict"]


# -- SIGKILL halfway, resume ---------------------------------------------------------------


def interrupt_mid_run(argv: list[str], out: Path, after: int, sig: int, tries: int = 5):
    """Start the run; once ``after`` files are stored, send ``sig`` to its process group.
    The corpus's files take milliseconds each, so the whole batch may be done before the
    signal lands: then the scenario under test did not happen, and the run starts again
    in a fresh folder. Returns (process, stderr)."""
    for _ in range(tries):
        shutil.rmtree(out, ignore_errors=True)
        proc = spawn(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        wait_for_measurements(proc, out, after)
        os.killpg(proc.pid, sig)
        _, err = proc.communicate(timeout=60)
        finished_first = proc.returncode == EXIT_UNCHECKED and (out / "report.csv").exists()
        if not finished_first:
            return proc, err
    pytest.fail(f"the batch finished before the signal {tries} times out of {tries}")


@pytest.mark.slow
def test_sigkill_halfway_then_resume_measures_nothing_twice(corpus, tmp_path):
    out = tmp_path / "out"
    argv = command(corpus["src"], corpus["loose"], out, "--jobs", "1", "--quiet")
    interrupt_mid_run(argv, out, 4, signal.SIGKILL)
    kept = measured_count(out)
    assert 4 <= kept < 12
    assert not (out / "report.csv").exists()  # the killed run never got to its reports

    code, _, err = cli(*argv[3:])  # the same command again, in-process
    assert code == EXIT_UNCHECKED, err
    with open_store(out) as store:
        attempts = store.measurement_attempts()
        assert len(attempts) == 12 and set(attempts.values()) == {1}
    ref = (corpus["ref"] / "report.csv").read_text()
    assert (out / "report.csv").read_text() == ref


@pytest.mark.slow
def test_sigkill_at_random_points_loses_and_duplicates_nothing(corpus, tmp_path):
    out = tmp_path / "out"
    argv = command(corpus["src"], corpus["loose"], out, "--jobs", "2", "--quiet")
    rng = random.Random(20260512)  # fixed seed: the same kill points every time
    ref_csv = (corpus["ref"] / "report.csv").read_text()
    kept_before = 0
    for _ in range(3):
        proc = spawn(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        # Kill a little after 1-3 more files are stored (mid-write), or at a random
        # moment of start-up when that would be near the end of the batch.
        target = kept_before + rng.randint(1, 3)
        if target < 10:
            wait_for_measurements(proc, out, target)
            time.sleep(rng.uniform(0.0, 0.1))
        else:
            time.sleep(rng.uniform(0.0, 1.0))
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
        with open_store(out) as store:  # opens, and is consistent
            assert store.db.execute("PRAGMA integrity_check").fetchone() == ("ok",)
            attempts = store.measurement_attempts()
        assert set(attempts.values()) <= {1}  # nothing measured twice
        assert len(attempts) >= kept_before  # nothing finished was lost
        kept_before = len(attempts)
        report = out / "report.csv"
        assert not report.exists() or report.read_text() == ref_csv  # complete or absent
    code, _, err = cli(*argv[3:])
    assert code == EXIT_UNCHECKED, err
    assert (out / "report.csv").read_text() == ref_csv
    with open_store(out) as store:
        attempts = store.measurement_attempts()
        assert len(attempts) == 12 and set(attempts.values()) == {1}


@pytest.mark.slow
def test_ctrl_c_stops_cleanly_and_says_how_to_resume(corpus, tmp_path):
    out = tmp_path / "out"
    argv = command(corpus["src"], corpus["loose"], out, "--jobs", "1", "--quiet")
    proc, err = interrupt_mid_run(argv, out, 2, signal.SIGINT)  # what Ctrl-C in a terminal sends
    assert proc.returncode == 130
    assert "interrupted" in err and "to resume, run again: deliverycheck check" in err
    assert "Traceback" not in err
    assert measured_count(out) >= 2


# -- progress ------------------------------------------------------------------------------


def read_all(master: int) -> str:
    """Everything written to a pseudo-terminal until its other end closes."""
    chunks = []
    while True:
        try:
            data = os.read(master, 4096)
        except OSError:  # EIO: the writer closed its end
            break
        if not data:
            break
        chunks.append(data)
    os.close(master)
    return b"".join(chunks).decode(errors="replace")


@pytest.mark.slow
def test_progress_on_a_terminal_and_not_in_a_pipe(corpus, tmp_path):
    argv = command(corpus["src"], corpus["loose"], tmp_path / "a", "--jobs", "2")
    master, slave = pty.openpty()
    proc = spawn(argv, stdout=subprocess.DEVNULL, stderr=slave)
    os.close(slave)
    shown = read_all(master)
    proc.wait(timeout=60)
    assert "checking: 14/14 files" in shown  # the final state is drawn
    assert "s of audio at" in shown and " s/s" in shown  # seconds of audio per second

    # Not a terminal (a pipe, a file, a StringIO): whole lines (every few seconds), one at the end.
    piped = io.StringIO()
    code = main(command(corpus["src"], corpus["loose"], tmp_path / "b")[3:], io.StringIO(), piped)
    assert code == EXIT_UNCHECKED and "\r" not in piped.getvalue()
    # 13 files read; the text file named .wav is refused by its content at intake (never read)
    assert piped.getvalue().splitlines()[-1].startswith("checked: 14/14 files (measured 13,")

    # --quiet: nothing even on a terminal.
    master, slave = pty.openpty()
    with os.fdopen(slave, "w") as tty:
        assert tty.isatty()
        argv = command(corpus["src"], corpus["loose"], tmp_path / "c", "--quiet")[3:]
        assert main(argv, io.StringIO(), tty) == EXIT_UNCHECKED
    assert "checking:" not in read_all(master)


class FakeClock:
    def __init__(self):
        self.t = 0.0

    def __call__(self):
        return self.t


def test_progress_in_a_log_is_a_line_every_few_seconds_and_counts_the_store():
    clock, log = FakeClock(), io.StringIO()
    p = Progress(log, clock=clock, heartbeat_s=None, log_every_s=5.0)
    p.start(4)
    p.advance(stored=True)
    clock.t = 2.0
    p.advance(60.0, measured=True)
    assert log.getvalue() == ""  # under 5 s since the start: nothing yet
    clock.t = 6.0
    p.advance(120.0, measured=True)
    # arithmetic: 180 s of audio measured in 6 s of wall clock = 30 s/s; ETA 6 s / 3 * 1 = 2 s
    assert log.getvalue() == (
        "checking: 3/4 files (measured 2, from the store 1), 180 s of audio at 30.0 s/s, "
        "elapsed 0:00:06, ETA 0:00:02\n"
    )
    clock.t = 7.0
    p.advance(stored=True)
    p.close()
    assert log.getvalue().splitlines()[-1].startswith("checked: 4/4 files (measured 2, from the")
    quiet = io.StringIO()
    q = Progress(quiet, quiet=True, clock=clock, heartbeat_s=None)
    q.start(1)
    q.advance()
    q.close()
    assert quiet.getvalue() == ""


def test_a_resumed_run_says_how_many_files_came_from_the_store(corpus, tmp_path):
    out = tmp_path / "o"
    shutil.copytree(corpus["ref"], out)  # every file already measured
    code, text, _ = cli("check", str(corpus["src"]), "--profile", str(corpus["strict"]),
                        "--out", str(out), "--quiet")  # fmt: skip
    assert code == EXIT_UNCHECKED
    # 12 measurements and 1 read error were stored by the reference run (the text file named
    # .wav is refused by its content at intake, every run): nothing is read again
    assert "measured 0, from the store 13" in text


def test_two_profiles_into_one_out_folder_keep_both_reports(corpus, tmp_path):
    out = tmp_path / "o"
    shutil.copytree(corpus["ref"], out)  # the loose profile's run
    code, text, _ = cli("check", str(corpus["src"]), "--profile", str(corpus["strict"]),
                        "--out", str(out), "--quiet")  # fmt: skip
    assert code == EXIT_UNCHECKED and f"profiles: {out / 'index.html'}" in text
    loose = (out / "by-profile" / "loose" / "report.csv").read_text(encoding="utf-8")
    strict = (out / "by-profile" / "strict" / "report.csv").read_text(encoding="utf-8")
    # loose: 8 pass, 4 fail (every third file at -0.5 dBFS); strict: all 12 fail (module doc)
    assert loose.count(",pass,") == 8 and strict.count(",pass,") == 0
    assert (out / "report.csv").read_text(encoding="utf-8") == strict  # the latest at the top
    index = (out / "index.html").read_text(encoding="utf-8")
    assert 'href="by-profile/loose/report.html"' in index
    assert 'href="by-profile/strict/report.html"' in index
    assert index.count("top-level files") == 1


def test_the_summary_lists_every_flag_in_whole_words_with_relative_paths(corpus, tmp_path):
    code, text, _ = cli("check", str(corpus["src"]), "--profile", str(corpus["strict"]),
                        "--out", str(tmp_path / "o"), "--quiet")  # fmt: skip
    lines = text.splitlines()
    assert f"in {corpus['src']}{os.sep}" in lines
    entry = next(i for i, line in enumerate(lines) if line.strip().endswith("take00.wav"))
    assert lines[entry].split() == ["fail", "take00.wav"]  # relative to the common folder
    block = []
    for line in lines[entry + 1 :]:
        if not line.startswith("        "):
            break
        block.append(line)
    flags = [line for line in block if line.lstrip().startswith("fail:")]
    assert len(flags) == 2  # both limits of the strict profile, not only the first
    words = set(" ".join(lines).split())
    assert "dBFS," in words or "dBFS" in words
    for line in lines:
        assert len(line) <= 100 or " " not in line.strip()  # wrapped at whole words
        assert not line.endswith("...")


def test_library_check_matches_the_command(corpus, tmp_path):
    """checker.check() is the command without the printing: same statuses, same report files."""
    import checker

    run, results = checker.check([corpus["src"]], str(corpus["loose"]), tmp_path / "lib", jobs=1)
    assert run.profile_name == "loose"
    statuses = sorted(r.status for r in results)
    assert statuses.count("error") == 2 and statuses.count("fail") == 4
    assert statuses.count("pass") == 8
    for name in ("report.csv", "flags.csv", "fixes.csv", "report.html", "results.jsonl",
                 "results.sqlite", "index.html", "by-profile/loose/report.html"):  # fmt: skip
        assert (tmp_path / "lib" / name).is_file()
