"""results.jsonl: one JSON object per file, for machines.

Each line is ``FileResult.to_dict(timeline=True)`` through :func:`checker.serial.dumps`:
valid JSON with no NaN or Infinity tokens (``-inf`` is the string ``"-inf"``).
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from checker.report.atomic import atomic_text
from checker.results import FileResult
from checker.serial import dumps


def write_jsonl(results: Sequence[FileResult], path: Path) -> Path:
    with atomic_text(Path(path)) as handle:
        for result in results:
            line = dumps(result.to_dict(timeline=True))
            # JSON strings may carry U+2028/2029 raw; keep one object per physical line.
            handle.write(line.replace("\u2028", "\\u2028").replace("\u2029", "\\u2029"))
            handle.write("\n")
    return Path(path)
