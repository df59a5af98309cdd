"""results.jsonl: one JSON object per file, for machines.

Each line is ``FileResult.to_dict(timeline=True)`` encoded by :func:`checker.model.serial.dumps`,
the project's one JSON encoder (valid JSON, no NaN or Infinity tokens: ``-inf`` is the string
``"-inf"``).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
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


def jsonl_line(obj: dict[str, Any]) -> str:
    """One object as one line (without its line end)."""
    # JSON strings may carry U+2028/2029 raw; keep one object per physical line.
    return dumps(obj).replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")


def result_line(result: FileResult) -> str:
    """One result's line: ``FileResult.to_dict(timeline=True)``."""
    return jsonl_line(result.to_dict(timeline=True))


def write_jsonl(
    results: Sequence[FileResult],
    path: Path,
    not_checked: Sequence[dict[str, str]] = (),
    line: Callable[[FileResult], str] = result_line,
) -> Path:
    """One line per result, then one per file that was not checked (``not_checked_line``).
    ``line``: result_line, or one that returns a line made earlier (checker.report.prepared)."""
    lines = [line(r) for r in results]
    lines += [jsonl_line(not_checked_line(item)) for item in not_checked]
    with atomic_text(Path(path)) as handle:
        for text in lines:
            handle.write(text)
            handle.write("\n")
    return Path(path)
