"""The progress line on a terminal, through the real command line: `deliverycheck check` names
the stem set it reads after the files and how far the set's lockstep read has got, a second run
counts the set as from the store; `deliverycheck measure` shows seconds of audio within its one
long file, prints the same stdout as with --quiet, and --quiet silences stderr.

No timing: the read is held after its first block until the test creates a release file
(DELIVERYCHECK_HOLD_SET_UNTIL for the set read, DELIVERYCHECK_HOLD_UNTIL for measure,
checker/run/live.py); the terminal is a pseudo-terminal on stderr. Expected seconds are
arithmetic on the generated files (frames / 48,000 Hz).
"""

from __future__ import annotations

import json
import os
import pty
import re
import subprocess
import sys
import threading
import time
from pathlib import Path

from signals import noise, sine, write

from checker.run.live import HOLD_ENV, HOLD_SET_ENV

ROOT = Path(__file__).resolve().parents[2]
WAIT_S = 60.0  # a bound against hanging, never reached when the code works


class Terminal:
    """A command with stderr on a pseudo-terminal (so the line is redrawn) and stdout on a
    pipe; the terminal's text is collected in a thread."""

    def __init__(self, argv: list[str], env: dict[str, str]):
        master, slave = pty.openpty()
        self.proc = subprocess.Popen(
            argv,
            cwd=ROOT,
            env={**os.environ, **env},
            stdin=subprocess.DEVNULL,
            stdout=subprocess.PIPE,
            stderr=slave,
            start_new_session=True,
        )
        os.close(slave)
        self._master = master
        self._chunks: list[bytes] = []
        self._reader = threading.Thread(target=self._read, daemon=True)
        self._reader.start()

    def _read(self) -> None:
        while True:
            try:
                chunk = os.read(self._master, 4096)
            except OSError:  # EIO: the command closed the terminal
                break
            if not chunk:
                break
            self._chunks.append(chunk)

    def text(self) -> str:
        return b"".join(self._chunks).decode("utf-8", "replace")

    def wait_for(self, pattern: re.Pattern) -> re.Match | None:
        deadline = time.monotonic() + WAIT_S
        while time.monotonic() < deadline and self.proc.poll() is None:
            for shown in reversed(self.text().split("\r")):
                found = pattern.search(shown)
                if found:
                    return found
            time.sleep(0.05)
        return None

    def finish(self) -> tuple[int, bytes, str]:
        out, _ = self.proc.communicate(timeout=WAIT_S)
        self._reader.join(WAIT_S)
        os.close(self._master)
        return self.proc.returncode, out, self.text()


def _check(src: Path, mix: Path, out: Path, env: dict[str, str]) -> list[str]:
    argv = [sys.executable, "-m", "checker", "check", str(src), "--mix", str(mix)]
    return [*argv, "--profile", "podcast-stereo", "--out", str(out), "--jobs", "1"]


SET_LINE = re.compile(
    r"checking: 2/2 files \(measured 2, from the store 0\), stem set 1/1 'song'"
    r": ([1-9]\d*) of (\d+) s"
)


def test_check_names_the_stem_set_and_its_seconds_while_it_is_read(tmp_path):
    song = tmp_path / "song"
    song.mkdir()
    a, b = sine(997.0, -20.0, 3.0, channels=2), 0.05 * noise(3.0, channels=2, seed=3)
    write(song / "a.wav", a)  # 3 s each: 144,000 frames at 48 kHz
    write(song / "b.wav", b)
    mix = write(tmp_path / "mix.wav", a + b)
    release = tmp_path / "release"
    term = Terminal(_check(song, mix, tmp_path / "out", {}), {HOLD_SET_ENV: str(release)})
    try:
        seen = term.wait_for(SET_LINE)
    finally:
        release.touch()  # let the read go on either way
    code, _, text = term.finish()
    assert seen is not None, text
    # Held after its first lockstep step (48,000 frames = 1 s): some of the set, not all,
    # of the 3 s the headers declare.
    done_s, total_s = int(seen[1]), int(seen[2])
    assert 0 < done_s < 3 and total_s == 3, seen[0]
    assert code in (0, 1), text  # judged (pass or fail), not an error

    # Again, in a pipe: files and set come from the store, and the final line says so.
    again = subprocess.run(
        _check(song, mix, tmp_path / "out", {}),
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=WAIT_S,
    )
    last = again.stderr.splitlines()[-1]
    assert last.startswith("checked: 2/2 files (measured 0, from the store 2)"), again.stderr
    assert "stem sets 1 (measured 0, from the store 1)" in last, last


MEASURE_LINE = re.compile(r"measuring: 0/1 files, ([1-9]\d*) of (~?)([\d,]+) s of audio at ")


def test_measure_shows_seconds_within_one_long_file_and_keeps_stdout(tmp_path):
    long = write(tmp_path / "long.wav", sine(997.0, -20.0, 20.0, channels=2))  # 960,000 frames
    argv = [sys.executable, "-m", "checker", "measure", "--json", str(long)]
    release = tmp_path / "release"
    term = Terminal(argv, {HOLD_ENV: str(release)})
    try:
        seen = term.wait_for(MEASURE_LINE)
    finally:
        release.touch()
    code, out, text = term.finish()
    assert seen is not None, text
    # held after its first block: some of the 20 s the header declares, not all of it
    assert 0 < int(seen[1]) < 20 and (seen[2], seen[3]) == ("", "20"), seen[0]
    assert code == 0, text

    # --quiet: nothing on the terminal, and stdout is the same JSON
    quiet = Terminal([*argv, "--quiet"], {})
    code_q, out_q, text_q = quiet.finish()
    assert code_q == 0 and text_q == ""
    assert json.loads(out) == json.loads(out_q)
    assert out.count(b"\n") == 1  # one JSON line per file, nothing else on stdout
