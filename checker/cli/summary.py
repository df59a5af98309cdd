"""The console summary of ``deliverycheck check``: what was judged, what the run did, what to fix.

- one line of totals per status, and one saying what the run did (``measured 3, from the
  store 12``: a resumed run or a re-check against another profile says so);
- the worst files with every flag, each wrapped at whole words (never cut mid-word);
- paths relative to the folder all results share (printed once), stem sets included.
"""

from __future__ import annotations

import os
import textwrap
from collections.abc import Sequence
from pathlib import Path

from checker.model.names import for_terminal
from checker.model.verdict import ERROR, FAIL, PASS, STATUS_ORDER, WARN

#: How many problem files the summary lists (each with every flag).
WORST_SHOWN = 10
WIDTH = 100


def common_folder(paths: Sequence[str]) -> str:
    """The folder every result lies in (a stem set's folder counts as lying in its parent)."""
    dirs = [os.path.dirname(os.path.abspath(p)) for p in paths]
    if not dirs:
        return ""
    try:
        return os.path.commonpath(dirs)
    except ValueError:  # different drives
        return ""


def shown_path(path: str, folder: str) -> str:
    if not folder:
        return path
    rel = os.path.relpath(os.path.abspath(path), folder)
    return path if rel.startswith("..") else rel


def wrapped(text: str, first: str, rest: str, width: int = WIDTH) -> list[str]:
    """Whole words only: a word longer than the line stays whole on its own line."""
    return textwrap.wrap(
        " ".join(str(text).split()),
        width=width,
        initial_indent=first,
        subsequent_indent=rest,
        break_long_words=False,
        break_on_hyphens=False,
    ) or [first.rstrip()]


def _problems(result) -> list[tuple[str, str]]:
    out = []
    if result.error:
        prefix = f"{result.path}: "
        msg = result.error[len(prefix) :] if result.error.startswith(prefix) else result.error
        out.append((ERROR, msg))
    if result.verdict:
        flags = sorted(result.verdict.flags, key=lambda f: STATUS_ORDER.get(f.severity, 9))
        out.extend((f.severity, f.message) for f in flags)
    return out


def run_line(counts: dict[str, int] | None) -> str | None:
    """``measured 3, from the store 12`` (and the files that could not be read at all)."""
    if not counts:
        return None
    parts = [f"measured {counts.get('measured', 0)}", f"from the store {counts.get('stored', 0)}"]
    if counts.get("sets_measured") or counts.get("sets_stored"):
        parts.append(
            f"stem sets measured {counts.get('sets_measured', 0)}, "
            f"from the store {counts.get('sets_stored', 0)}"
        )
    return ", ".join(parts)


def summary_lines(
    run,
    results,
    paths: dict[str, Path],
    notes: list[str],
    counts: dict[str, int] | None = None,
) -> list[str]:
    totals = {s: 0 for s in (PASS, WARN, FAIL, ERROR)}
    for r in results:
        totals[r.status] = totals.get(r.status, 0) + 1
    sets = sum(1 for r in results if r.kind == "set")
    checked = f"{len(results) - sets} files"
    if sets:
        checked += f" and {sets} stem set{'s' if sets > 1 else ''}"
    lines = [
        f"profile {run.profile_name}: {checked}: "
        + ", ".join(f"{totals[s]} {s}" for s in (PASS, WARN, FAIL, ERROR))
    ]
    did = run_line(counts)
    if did:
        lines.append(did)
    lines += intake_lines(results, getattr(run, "not_checked", ()))
    folder = common_folder([r.path for r in results])
    worst = [r for r in results if r.status in (ERROR, FAIL, WARN)]
    worst.sort(key=lambda r: (STATUS_ORDER.get(r.status, 9), r.path))
    if worst:
        if folder:
            lines.append(f"in {folder}{os.sep}")
        lines.append("worst:")
        for r in worst[:WORST_SHOWN]:
            name = shown_path(r.path, folder)
            if r.kind == "set":
                own = r.group and r.group != os.path.basename(r.path.rstrip(os.sep))
                name += f"{os.sep} (stem set {r.group})" if own else f"{os.sep} (stem set)"
            lines.append(f"  {r.status:<5} {name}")
            for severity, message in _problems(r):
                lines.extend(wrapped(message, f"        {severity}: ", " " * 14))
        if len(worst) > WORST_SHOWN:
            lines.append(f"  ... and {len(worst) - WORST_SHOWN} more (see the report)")
    for note in notes:
        lines.extend(wrapped(note, "note: ", "      "))
    for name, path in paths.items():
        lines.append(f"{name}: {path}")
    # A file name cannot move the cursor or recolour a line (checker.model.names.for_terminal).
    return [for_terminal(line) for line in lines]


def intake_lines(results, not_checked) -> list[str]:
    """What happened to every file found: measured / error (not measured) / not checked,
    then the files not checked with their reasons (the first WORST_SHOWN)."""
    files = [r for r in results if r.kind != "set"]
    measured = sum(1 for r in files if r.measurement is not None)
    lines = [
        f"files found: {len(files) + len(not_checked)}: {measured} measured, "
        f"{len(files) - measured} error (not measured), {len(not_checked)} not checked"
    ]
    if not_checked:
        lines.append("not checked (not deliverables):")
    for item in not_checked[:WORST_SHOWN]:
        lines.extend(wrapped(f"{item['path']}: {item['reason']}", "  ", "    "))
    if len(not_checked) > WORST_SHOWN:
        lines.append(f"  ... and {len(not_checked) - WORST_SHOWN} more (see the report)")
    return lines
