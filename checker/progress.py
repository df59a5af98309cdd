"""A one-line progress display on stderr for long batches.

Shown only when the stream is a terminal and the user did not ask for quiet:
files done / total, audio hours measured per wall-clock second, and an ETA.
Redrawn at most a few times a second; the line is cleared when done.
"""

from __future__ import annotations

import time
from typing import TextIO


def _clock(seconds: float) -> str:
    seconds = max(0, int(round(seconds)))
    h, rest = divmod(seconds, 3600)
    m, s = divmod(rest, 60)
    return f"{h}:{m:02d}:{s:02d}"


class Progress:
    """Counts finished files; draws ``done/total`` etc. when enabled."""

    def __init__(self, stream: TextIO | None, quiet: bool = False, min_interval_s: float = 0.2):
        try:
            tty = bool(stream is not None and stream.isatty())
        except (AttributeError, ValueError):
            tty = False
        self.stream = stream
        self.enabled = tty and not quiet
        self.min_interval_s = min_interval_s
        self.total = 0
        self.done = 0
        self.audio_s = 0.0
        self.measured = 0  # files actually read this run (not from the store)
        self._t0 = time.monotonic()
        self._last_draw = -1e9
        self._width = 0

    def start(self, total: int) -> None:
        self.total = total
        self._t0 = time.monotonic()
        self._draw(force=True)

    def advance(self, audio_s: float | None = None, measured: bool = False) -> None:
        self.done += 1
        if measured:
            self.measured += 1
            if audio_s:
                self.audio_s += audio_s
        self._draw(force=self.done == self.total)

    def line(self) -> str:
        elapsed = max(time.monotonic() - self._t0, 1e-9)
        text = f"checking: {self.done}/{self.total} files"
        if self.audio_s > 0:
            text += f", {self.audio_s / 3600.0 / elapsed:.3f} h audio/s"
        remaining = self.total - self.done
        if self.done > 0 and remaining > 0:
            text += f", ETA {_clock(elapsed / self.done * remaining)}"
        return text

    def _draw(self, force: bool = False) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if not force and now - self._last_draw < self.min_interval_s:
            return
        self._last_draw = now
        text = self.line()
        pad = max(0, self._width - len(text))
        self._width = len(text)
        self.stream.write("\r" + text + " " * pad)
        self.stream.flush()

    def close(self) -> None:
        if self.enabled and self._width:
            self.stream.write("\r" + " " * self._width + "\r")
            self.stream.flush()
            self._width = 0
