"""Each file's report pieces, made as its result arrives while the batch runs.

During a ``check`` the parent mostly waits for its workers; after the last file it wrote the
reports, all of their per-file work (the report.csv row, the results.jsonl line, the HTML
detail data: about 1.2 ms a file here) in series with nothing else to do. ``check`` hands
:meth:`PreparedRows.add` to ``run_batch`` (``on_result``), so that work happens while the
workers measure, and :func:`checker.report.write_reports` only puts the pieces in order.

A piece is used only for the very result object it was made from (kept with it, so its id
cannot be reused), and only where it is the same as the one the writer would make now:

- the report.csv row is made with the file's own channel count (``csv_file_row(r, own)``): a
  batch with more channels only adds columns that this file leaves empty, which the table
  fills with None, as ``csv_file_row(r, channels)`` would; a file with a value key that looks
  like a channel column (``_ch3_``) gets no row made early;
- the HTML detail depends on the run's profile limits and mono rule: it is used only when the
  run written has the same ones as the run it was made for.

Every other piece is made at writing time, as before; a piece that fails to be made early is
made (and fails) then, so a report bug never stops a batch. The files are byte for byte the
same with or without it (tests/unit/test_report_prepared.py).
"""

from __future__ import annotations

import re
from typing import Any

from checker.model.results import FileResult, RunInfo
from checker.report.frame import csv_file_row, own_channels
from checker.report.htmldata import detail_json, profile_limits_for_graph
from checker.report.jsonl import result_line

_CHANNEL_LIKE = re.compile(r"_ch\d+(_|$)", re.MULTILINE)  # searched in the keys, one a line


def _context(run: RunInfo) -> tuple[Any, str]:
    """What the HTML detail depends on besides the result."""
    return (run.profile_limits, run.mono_loudness)


class PreparedRows:
    """Report pieces per result; an empty one makes each piece when it is asked for."""

    def __init__(self) -> None:
        #: id(result) -> (result, (row, channels) or None, jsonl line, detail text or None)
        self._made: dict[int, tuple[FileResult, Any, str, str | None]] = {}
        self._context: tuple[Any, str] | None = None
        self._profile: dict[str, float | None] | None = None

    def __len__(self) -> int:
        return len(self._made)

    def add(self, run: RunInfo, result: FileResult) -> None:
        """Make ``result``'s pieces now (``run``: the run it belongs to). Never raises."""
        try:
            if self._context is None:
                self._context, self._profile = _context(run), profile_limits_for_graph(run)
            detail = None
            if _context(run) == self._context:
                assert self._profile is not None
                detail = detail_json(result, self._profile, run.mono_loudness)
            row = None
            values = result.measurement.values if result.measurement is not None else {}
            if _CHANNEL_LIKE.search("\n".join(values)) is None:
                own = own_channels(result)
                row = (csv_file_row(result, own), own)
            self._made[id(result)] = (result, row, result_line(result), detail)
        except Exception:  # made (and raised) again when the reports are written
            self._made.pop(id(result), None)

    def _entry(self, result: FileResult):
        entry = self._made.get(id(result))
        return entry if entry is not None and entry[0] is result else None

    def csv_row(self, result: FileResult, channels: int) -> dict[str, Any]:
        """``csv_file_row(result, channels)``: the row made early when it is the same."""
        entry = self._entry(result)
        if entry is not None and entry[1] is not None and entry[1][1] <= channels:
            return entry[1][0]
        return csv_file_row(result, channels)

    def jsonl_line(self, result: FileResult) -> str:
        """``result_line(result)``, made early when it was."""
        entry = self._entry(result)
        return entry[2] if entry is not None else result_line(result)

    def detail_json(self, result: FileResult, run: RunInfo) -> str | None:
        """The HTML detail made early for ``run``'s profile and mono rule, else None."""
        entry = self._entry(result)
        if entry is None or entry[3] is None or _context(run) != self._context:
            return None
        return entry[3]
