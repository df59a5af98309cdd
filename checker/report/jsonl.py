"""results.jsonl: one JSON object per file, for machines.

Each line is ``FileResult.to_dict(timeline=True)`` encoded by :func:`checker.model.serial.dumps`,
the project's one JSON encoder (valid JSON, no NaN or Infinity tokens: ``-inf`` is the string
``"-inf"``).
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

from checker.model.results import NOT_CHECKED, FileResult
from checker.model.serial import dumps
from checker.report.atomic import atomic_text


def not_checked_line(item: dict[str, str]) -> dict[str, Any]:
    """The object for a file that was not checked: the FileResult keys plus ``reason``."""
    return {
        "path": item["path"],
        "kind": "file",
        "group": None,
        "status": NOT_CHECKED,
        "error": None,
        "reason": item["reason"],
        "measurement": None,
        "verdict": None,
    }


def write_jsonl(
    results: Sequence[FileResult], path: Path, not_checked: Sequence[dict[str, str]] = ()
) -> Path:
    """One line per result, then one per file that was not checked (``not_checked_line``)."""
    objects = [r.to_dict(timeline=True) for r in results]
    objects += [not_checked_line(item) for item in not_checked]
    with atomic_text(Path(path)) as handle:
        for obj in objects:
            line = dumps(obj)
            # JSON strings may carry U+2028/2029 raw; keep one object per physical line.
            handle.write(line.replace("\u2028", "\\u2028").replace("\u2029", "\\u2029"))
            handle.write("\n")
    return Path(path)
