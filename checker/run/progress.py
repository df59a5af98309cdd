"""Progress of a batch on stderr: files done, where they came from, audio seconds per second.

- On a terminal: one line redrawn in place (at most every ``min_interval_s``), and once a
  second even when no file finishes, so the figures move during a long file.
- Not a terminal (a pipe, a CI log): a full line every ``log_every_s`` seconds while the
  batch runs, and one final line.
- ``quiet``: nothing.

The line reads ``checking: 3/15 files (measured 1, from the store 2), 1,800 of ~5,400 s of
audio at 95.2 s/s, elapsed 0:00:19, ETA 0:00:38``: seconds of audio measured so far (files
still being read count with what their workers have decoded: ``AudioLedger``) of the audio
to measure ("~" while part of it is estimated from file sizes), and the speed in seconds of
audio per wall-clock second (files from the store are not counted in either).

Stem sets are read after the files, in this process (checker/run/stemsets.py): meanwhile
the line names the set and how far its lockstep read has got, ``checking: 6/6 files
(...), stem set 2/3 'song-b': 41 of 180 s (sets measured 1, from the store 0), elapsed
...``; the final line counts the sets. ``deliverycheck measure`` uses the same line with
its own words (``verbs``) and no final line unless one was shown before.
"""

from __future__ import annotations

import math
import os
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import TextIO


def _clock(seconds: float) -> str:
    seconds = max(0, int(round(seconds)))
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h}:{m:02d}:{s:02d}"


class AudioLedger:
    """Seconds of audio of the files a batch measures, keyed by the task's index.

    A file is planned (its size in bytes), then started (the seconds its header declares,
    when it gives them, and ``live``: a reader of the seconds decoded so far), then
    finished (the seconds decoded; ``whole=False`` for a file that failed part-way, which
    then counts with what was decoded). The local pool reports all three
    (checker/run/workers.py); the Dask pool only plans and finishes. The total is exact
    once every unfinished file has a declared length; until then the rest is estimated
    from file sizes at the seconds per byte of the files whose length is known.

    The pool calls it from the batch's thread, the progress line reads it from its own:
    every method takes the lock. Sums are kept as files move, so reading costs only the
    files in flight."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._waiting: dict = {}  # planned, not started: key -> bytes
        self._waiting_bytes = 0
        self._open: dict = {}  # started: key -> (bytes, declared s or None, live or None)
        self._done_s = 0.0  # finished files
        self._finished: set = set()
        self._rate_s = 0.0  # seconds and bytes of files whose length is known
        self._rate_bytes = 0

    def plan(self, key, size_bytes: int) -> None:
        with self._lock:
            if key in self._waiting or key in self._open or key in self._finished:
                return
            size = max(0, int(size_bytes or 0))
            self._waiting[key] = size
            self._waiting_bytes += size

    def started(
        self, key, declared_s: float | None = None, live: Callable[[], float] | None = None
    ) -> None:
        with self._lock:
            if key in self._finished or key in self._open:
                return
            size = self._waiting.pop(key, 0)
            self._waiting_bytes -= size
            if declared_s is None or not (math.isfinite(declared_s) and declared_s >= 0):
                declared_s = None
            else:
                self._rate_s += declared_s
                self._rate_bytes += size
            self._open[key] = (size, declared_s, live)

    def finished(self, key, seconds: float | None, whole: bool = True) -> None:
        with self._lock:
            if key in self._finished:
                return
            seconds = max(0.0, float(seconds or 0.0))
            self._finished.add(key)
            if key in self._waiting:
                size, declared = self._waiting.pop(key), None
                self._waiting_bytes -= size
            else:
                size, declared, _ = self._open.pop(key, (0, None, None))
            if declared is not None:  # its declared length calibrated the estimate
                self._rate_s -= declared
                self._rate_bytes -= size
            if whole:
                self._rate_s += seconds
                self._rate_bytes += size
            self._done_s += seconds

    def done_s(self) -> float:
        """Seconds measured: finished files, and what the files in flight have decoded."""
        with self._lock:
            return self._done_s + sum(_read(live) for _, _, live in self._open.values())

    def total_s(self) -> tuple[float | None, bool]:
        """(seconds of audio to measure, estimated?): None while nothing gives a length."""
        with self._lock:
            per_byte = self._rate_s / self._rate_bytes if self._rate_bytes > 0 else None
            total, estimated = self._done_s, bool(self._waiting)
            for size, declared, live in self._open.values():
                if declared is None:
                    estimated = True
                    if per_byte is None:
                        return None, True
                    declared = size * per_byte
                total += max(declared, _read(live))
            if self._waiting:
                if per_byte is None:
                    return None, True
                total += self._waiting_bytes * per_byte
            return total, estimated

    def planned(self) -> bool:
        with self._lock:
            return bool(self._waiting or self._open or self._finished)


def _columns(stream) -> int:
    """The terminal's width; a large number when unknown (a pseudo-terminal may say 0)."""
    try:
        columns = os.get_terminal_size(stream.fileno()).columns
    except (AttributeError, OSError, ValueError):
        return 10_000
    return max(20, columns) if columns > 0 else 10_000


def _read(live: Callable[[], float] | None) -> float:
    if live is None:
        return 0.0
    value = live()
    return value if math.isfinite(value) and value > 0 else 0.0


class Progress:
    """Counts finished files; shows them as described in the module doc."""

    def __init__(
        self,
        stream: TextIO | None,
        quiet: bool = False,
        min_interval_s: float = 0.2,
        log_every_s: float = 5.0,
        clock: Callable[[], float] = time.monotonic,
        heartbeat_s: float | None = 1.0,
        verbs: tuple[str, str] = ("checking", "checked"),
        summary: bool = True,
    ):
        """``verbs``: the line's first word while running and in the final line;
        ``summary=False``: no final line in a log unless a line was written before."""
        try:
            tty = bool(stream is not None and stream.isatty())
        except (AttributeError, ValueError):
            tty = False
        self.stream = stream
        self.tty = tty
        self.enabled = stream is not None and not quiet
        self.min_interval_s = min_interval_s
        self.log_every_s = log_every_s
        self._now = clock
        self.total = 0
        self.done = 0
        self.audio_s = 0.0  # audio of files counted by advance(audio_s), outside the ledger
        self.audio = AudioLedger()  # what the pool reports, file by file and within files
        self.measured = 0  # files actually read this run
        self.stored = 0  # files whose measurement (or read error) came from the store
        self.sets_measured = 0  # stem sets read this run
        self.sets_stored = 0  # stem sets whose values came from the store
        self._t0 = clock()
        self._last_draw = -1e18
        self._width = 0
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._heartbeat_s = heartbeat_s
        self._thread: threading.Thread | None = None
        self._closed = False
        self._verbs = verbs
        self._summary = summary
        self._lines = 0  # lines written to a log
        self._set: tuple | None = None  # (index, count, name, total s or None, start) read now
        self._files_end = math.inf  # when the last file was done
        self._set_s = 0.0  # seconds of the current set read so far

    def start(self, total: int) -> None:
        self.total = total
        self._t0 = self._now()
        self._last_draw = self._t0 if not self.tty else -1e18
        self._draw(force=self.tty)
        if self.enabled and self._heartbeat_s and self._thread is None:
            self._thread = threading.Thread(target=self._beat, name="progress", daemon=True)
            self._thread.start()

    def advance(self, audio_s: float | None = None, measured: bool = False, stored=False) -> None:
        """One more file done; ``audio_s``: its seconds when the pool did not report them
        to ``self.audio`` (the batch's pools do)."""
        with self._lock:
            self.done += 1
            if measured:
                self.measured += 1
                if audio_s:
                    self.audio_s += audio_s
            elif stored:
                self.stored += 1
            if self.done >= self.total:
                self._files_end = self._now()
        self._draw(force=self.tty and self.done == self.total)

    def set_started(
        self, index: int, count: int, name: str, total_s: float | None
    ) -> Callable[[int, int], None]:
        """Stem set ``index`` (from 1) of ``count`` is being judged; ``total_s``: its longest
        file's declared seconds. Returns the ``on_frames`` callback of its read
        (checker.stems.sets.check_stem_set); count_set() ends it."""
        with self._lock:
            self._set = (index, count, name, total_s, self._now())
            self._set_s = 0.0
        self._draw(force=self.tty)

        def on_frames(frames: int, sample_rate_hz: int) -> None:
            self._set_s = frames / sample_rate_hz if sample_rate_hz > 0 else 0.0

        return on_frames

    def count_set(self, stored: bool) -> None:
        """A stem set was judged (its values measured now, or from the store)."""
        with self._lock:
            if stored:
                self.sets_stored += 1
            else:
                self.sets_measured += 1
            self._set = None
        self._draw(force=self.tty)

    def counts(self) -> dict[str, int]:
        """What this run did, for the summary: files and stem sets measured or from the store."""
        return {
            "measured": self.measured,
            "stored": self.stored,
            "sets_measured": self.sets_measured,
            "sets_stored": self.sets_stored,
        }

    def line(self) -> str:
        now = self._now()
        elapsed = max(now - self._t0, 1e-9)
        # the files' speed stops at the last file: stem sets are read after them
        files_elapsed = max(min(now, self._files_end) - self._t0, 1e-9)
        text = f"{self._verbs[0]}: {self.done}/{self.total} files"
        if self.measured or self.stored:
            text += f" (measured {self.measured}, from the store {self.stored})"
        done_s = self.audio_s + self.audio.done_s()
        total_s, estimated = self.audio.total_s() if self.audio.planned() else (None, False)
        if total_s is not None:
            total_s = max(total_s + self.audio_s, done_s)
        if done_s > 0 and self._set is None:  # while a set is read, its figures instead
            of = "" if total_s is None else f" of {'~' if estimated else ''}{total_s:,.0f}"
            text += f", {done_s:,.0f}{of} s of audio at {done_s / files_elapsed:,.1f} s/s"
        sets, eta_s = self._sets_part(now)
        text += sets + f", elapsed {_clock(elapsed)}"
        remaining = self.total - self.done
        if eta_s is not None:
            text += f", ETA {_clock(eta_s)}"
        elif (
            remaining > 0 and total_s is not None and done_s > 0
        ):  # by audio: long files weigh more
            text += f", ETA {_clock((total_s - done_s) / (done_s / elapsed))}"
        elif self.done > 0 and remaining > 0:
            text += f", ETA {_clock(elapsed / self.done * remaining)}"
        return text

    def _sets_part(self, now: float) -> tuple[str, float | None]:
        """The stem sets' part of the line, and the ETA of the set being read when it is
        the last one."""
        sets = self.sets_measured + self.sets_stored
        counts = f"measured {self.sets_measured}, from the store {self.sets_stored}"
        if self._set is None:
            return (f", stem sets {sets} ({counts})" if sets else ""), None
        index, count, name, total_s, t0 = self._set
        done_s, eta_s = self._set_s, None
        text = f", stem set {index}/{count} {name!r}: {done_s:,.0f}"
        if total_s is not None:
            text += f" of {max(total_s, done_s):,.0f}"
        text += " s"
        if done_s > 0 and now > t0:
            rate = done_s / (now - t0)
            text += f" at {rate:,.1f} s/s"
            if total_s is not None and index == count:  # the last set: its end is the run's
                eta_s = max(0.0, total_s - done_s) / rate
        return text + (f" (sets {counts})" if sets else ""), eta_s

    @contextmanager
    def aside(self) -> Iterator[None]:
        """Write something else to the terminal: the line is erased meanwhile, then redrawn."""
        with self._lock:
            if self.enabled and self.tty and self._width and not self._closed:
                self.stream.write("\r" + " " * self._width + "\r")
                self.stream.flush()
                self._width = 0
            yield
        self._draw(force=self.tty)

    def _beat(self) -> None:
        while not self._stop.wait(self._heartbeat_s):
            self._draw()

    def _draw(self, force: bool = False) -> None:
        if not self.enabled or self._closed:
            return
        with self._lock:
            now = self._now()
            every = self.min_interval_s if self.tty else self.log_every_s
            if not force and now - self._last_draw < every:
                return
            self._last_draw = now
            text = self.line()
            if self.tty:
                text = text[: _columns(self.stream) - 1]  # a wrapped line cannot be redrawn
                pad = max(0, self._width - len(text))
                self._width = len(text)
                self.stream.write("\r" + text + " " * pad)
            else:
                self.stream.write(text + "\n")
                self._lines += 1
            self.stream.flush()

    def close(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join()
            self._thread = None
        shown = self._summary or self._lines
        if self.enabled and not self._closed and not self.tty and self.total and shown:
            with self._lock:
                now, then = self._verbs
                self.stream.write(self.line().replace(f"{now}:", f"{then}:", 1) + "\n")
                self.stream.flush()
        if self.enabled and self.tty and self._width:
            self.stream.write("\r" + " " * self._width + "\r")
            self.stream.flush()
            self._width = 0
        self._closed = True
