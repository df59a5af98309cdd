"""Progress of a batch on stderr: files done, where they came from, audio seconds per second.

- On a terminal: one line redrawn in place (at most every ``min_interval_s``), and once a
  second even when no file finishes, so the elapsed time moves during a long file.
- Not a terminal (a pipe, a CI log): a full line every ``log_every_s`` seconds while the
  batch runs, and one final line.
- ``quiet``: nothing.

The line reads ``checking: 3/15 files (measured 1, from the store 2), 1,800 s of audio at
95.2 s/s, elapsed 0:00:19, ETA 0:01:02``: the speed is seconds of audio measured per
wall-clock second (files from the store are not counted in it).
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from typing import TextIO


def _clock(seconds: float) -> str:
    seconds = max(0, int(round(seconds)))
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h}:{m:02d}:{s:02d}"


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
    ):
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
        self.audio_s = 0.0
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

    def start(self, total: int) -> None:
        self.total = total
        self._t0 = self._now()
        self._last_draw = self._t0 if not self.tty else -1e18
        self._draw(force=self.tty)
        if self.enabled and self._heartbeat_s and self._thread is None:
            self._thread = threading.Thread(target=self._beat, name="progress", daemon=True)
            self._thread.start()

    def advance(self, audio_s: float | None = None, measured: bool = False, stored=False) -> None:
        with self._lock:
            self.done += 1
            if measured:
                self.measured += 1
                if audio_s:
                    self.audio_s += audio_s
            elif stored:
                self.stored += 1
        self._draw(force=self.tty and self.done == self.total)

    def count_set(self, stored: bool) -> None:
        """A stem set was judged (its values measured now, or from the store)."""
        with self._lock:
            if stored:
                self.sets_stored += 1
            else:
                self.sets_measured += 1

    def counts(self) -> dict[str, int]:
        """What this run did, for the summary: files and stem sets measured or from the store."""
        return {
            "measured": self.measured,
            "stored": self.stored,
            "sets_measured": self.sets_measured,
            "sets_stored": self.sets_stored,
        }

    def line(self) -> str:
        elapsed = max(self._now() - self._t0, 1e-9)
        text = f"checking: {self.done}/{self.total} files"
        if self.measured or self.stored:
            text += f" (measured {self.measured}, from the store {self.stored})"
        if self.audio_s > 0:
            text += f", {self.audio_s:,.0f} s of audio at {self.audio_s / elapsed:,.1f} s/s"
        text += f", elapsed {_clock(elapsed)}"
        remaining = self.total - self.done
        if self.done > 0 and remaining > 0:
            text += f", ETA {_clock(elapsed / self.done * remaining)}"
        return text

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
                pad = max(0, self._width - len(text))
                self._width = len(text)
                self.stream.write("\r" + text + " " * pad)
            else:
                self.stream.write(text + "\n")
            self.stream.flush()

    def close(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join()
            self._thread = None
        if self.enabled and not self._closed and not self.tty and self.total:
            with self._lock:
                self.stream.write(self.line().replace("checking:", "checked:", 1) + "\n")
                self.stream.flush()
        if self.enabled and self.tty and self._width:
            self.stream.write("\r" + " " * self._width + "\r")
            self.stream.flush()
            self._width = 0
        self._closed = True
