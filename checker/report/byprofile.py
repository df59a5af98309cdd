"""Reports of several profiles side by side in one ``--out`` folder.

The report files at the top of ``--out`` are those of the latest run. Each run also keeps
its own copy under ``by-profile/<profile>/`` (report.html, the CSV files, results.jsonl and
a small ``run.json`` with the totals), so checking the same batch against a second profile
does not overwrite the first profile's reports. ``index.html`` at the top links every
profile's report with its totals and says which one the top-level files belong to.
The store (results.sqlite) stays shared: that is what lets a second profile re-judge the
stored measurements without reading audio.
"""

from __future__ import annotations

import json
import re
import shutil
from collections import Counter
from collections.abc import Sequence
from html import escape
from pathlib import Path

from checker.model.results import FileResult, RunInfo
from checker.report.atomic import atomic_text, write_text_atomic

FOLDER = "by-profile"
INDEX = "index.html"
RUN_FILE = "run.json"
STATUSES = ("fail", "error", "warn", "pass")


def folder_name(profile_name: str) -> str:
    """A profile name (or a profile file's name) as one safe folder name."""
    name = re.sub(r"[^A-Za-z0-9._-]+", "-", Path(profile_name).name).strip("-.")
    return name or "profile"


def keep_profile_copy(
    out_dir: Path, run: RunInfo, results: Sequence[FileResult], written: dict[str, Path]
) -> Path:
    """Copy this run's report files into by-profile/<profile>/ and rewrite index.html."""
    out_dir = Path(out_dir)
    target = out_dir / FOLDER / folder_name(run.profile_name or run.profile_title)
    target.mkdir(parents=True, exist_ok=True)
    for path in written.values():
        path = Path(path)
        if path.suffix == ".sqlite" or not path.is_file():
            continue
        with atomic_text(target / path.name) as handle, open(path, encoding="utf-8") as src:
            shutil.copyfileobj(src, handle)
    counts = Counter(r.status for r in results)
    facts = {
        "profile_name": run.profile_name,
        "profile_title": run.profile_title,
        "run_id": run.run_id,
        "finished_at": run.finished_at or run.started_at,
        "files": len(results),
        "counts": {s: counts.get(s, 0) for s in STATUSES},
    }
    write_text_atomic(target / RUN_FILE, json.dumps(facts, indent=1) + "\n")
    return write_index(out_dir, latest=target.name)


def _read_runs(out_dir: Path) -> list[tuple[str, dict]]:
    runs = []
    for run_file in sorted((out_dir / FOLDER).glob(f"*/{RUN_FILE}")):
        try:
            runs.append((run_file.parent.name, json.loads(run_file.read_text(encoding="utf-8"))))
        except (OSError, ValueError):
            continue  # a half-written or foreign file: leave it out of the index
    return runs


def write_index(out_dir: Path, latest: str) -> Path:
    rows = []
    for folder, facts in _read_runs(out_dir):
        counts = facts.get("counts") or {}
        cells = "".join(f'<td class="n s-{s}">{int(counts.get(s, 0))}</td>' for s in STATUSES)
        mark = ' <span class="latest">top-level files</span>' if folder == latest else ""
        title = str(facts.get("profile_title") or facts.get("profile_name") or folder)
        rows.append(
            f'<tr><th scope="row"><a href="{FOLDER}/{escape(folder)}/report.html">'
            f"{escape(title)}</a>{mark}<br><code>{escape(str(facts.get('profile_name')))}</code>"
            f"</th>{cells}<td>{int(facts.get('files') or 0)}</td>"
            f"<td><time>{escape(str(facts.get('finished_at') or ''))}</time></td></tr>"
        )
    heads = "".join(f'<th scope="col" class="n">{s}</th>' for s in STATUSES)
    page = f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Delivery check: reports by profile</title>
<style>
body {{ margin: 0; font-family: system-ui, sans-serif; background: #f5f3ee; color: #1c2230; }}
main {{ max-width: 960px; margin: 0 auto; padding: 20px 16px 40px; }}
h1 {{ font-size: 1.4rem; }}
.box {{ overflow-x: auto; background: #fff; border: 1px solid #d9d5cb; border-radius: 6px; }}
table {{ border-collapse: collapse; width: 100%; }}
th, td {{ text-align: left; padding: 8px 10px; border-bottom: 1px solid #ebe8e1; }}
.n {{ text-align: right; font-variant-numeric: tabular-nums; }}
.latest {{ font-size: 0.75rem; background: #e3edf4; color: #24577a; padding: 1px 6px;
  border-radius: 3px; margin-left: 6px; }}
.s-fail {{ color: #a0242c; }} .s-error {{ color: #5a3b8c; }} .s-warn {{ color: #7f5200; }}
.s-pass {{ color: #2e6b3f; }}
.vh {{ position: absolute; width: 1px; height: 1px; overflow: hidden; clip: rect(0 0 0 0); }}
</style></head><body><main>
<h1>Reports by profile</h1>
<p>The same files judged against each profile checked into this folder. The report files at
the top of the folder belong to the latest run; every profile keeps its own copy.</p>
<div class="box"><table><caption class="vh">Profiles and their totals</caption>
<thead><tr><th scope="col">Profile</th>{heads}<th scope="col">files</th>
<th scope="col">checked</th></tr></thead>
<tbody>{"".join(rows)}</tbody></table></div>
</main></body></html>
"""
    path = Path(out_dir) / INDEX
    write_text_atomic(path, page)
    return path
