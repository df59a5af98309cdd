"""Failures of the output folder are named, never "internal error": a damaged store, a
read-only folder, a full disk, reports that cannot be written. Each ends in one line saying
what, where and what to do, exit code 4 (errors.EXIT_OUTPUT), and keeps what can be kept.

The read-only and disk-full cases need a private mount namespace (``unshare -m``, as root):
a read-only bind mount and a small tmpfs. Elsewhere they are skipped, with the reason.
"""

from __future__ import annotations

import errno
import io
import json
import os
import shutil
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest
from signals import sine, write

from checker.cli.main import main
from checker.model.errors import EXIT_OUTPUT
from checker.run.store import STORE_NAME, open_store


def _batch(folder: Path, n: int = 3) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for i in range(n):
        write(folder / f"take{i}.wav", sine(1000.0, -20.0, 0.3), subtype="PCM_16")
    return folder


def _check(src: Path, out: Path) -> tuple[int, str, str]:
    stdout, stderr = io.StringIO(), io.StringIO()
    argv = ["check", str(src), "--profile", "measure-only", "--out", str(out), "--quiet"]
    code = main([*argv, "--jobs", "1"], out=stdout, err=stderr)
    return code, stdout.getvalue(), stderr.getvalue()


def _smash_pages(path: Path, first_page: int, last_page: int | None = None) -> None:
    """Overwrite the b-tree page header (first 12 bytes) of pages first..last (1-based, 4 KiB
    pages: SQLite's default page size) with 0xA5: SQLite reads them as malformed."""
    size = path.stat().st_size
    last = last_page or size // 4096
    with open(path, "r+b") as fh:
        for page in range(first_page, last + 1):
            fh.seek((page - 1) * 4096)
            fh.write(b"\xa5" * 12)


def test_a_damaged_store_is_named_with_what_to_do(tmp_path):
    src, out = _batch(tmp_path / "in"), tmp_path / "out"
    assert _check(src, out)[0] == 0
    _smash_pages(out / STORE_NAME, 2)  # page 1 holds the schema header; damage the rest
    code, _, err = _check(src, out)
    assert code == EXIT_OUTPUT
    assert err == (
        f"deliverycheck: results store {out / STORE_NAME}: not a usable results store, the file "
        "is damaged or not a deliverycheck SQLite file (database disk image is malformed) while "
        "opening it; move it away (or delete it) and run again (every file will be measured "
        "again), or use another output folder\n"
    )


def test_a_store_damaged_in_one_table_still_gives_the_reports(tmp_path):
    src, out = _batch(tmp_path / "in"), tmp_path / "out"
    assert _check(src, out)[0] == 0
    with sqlite3.connect(out / STORE_NAME) as db:
        [(root,)] = db.execute("SELECT rootpage FROM sqlite_master WHERE name='measurements'")
    _smash_pages(out / STORE_NAME, root, root)  # opening works; the first lookup fails
    for name in ("report.csv", "results.jsonl", "report.html"):
        (out / name).unlink()
    code, stdout, err = _check(src, out)
    assert code == EXIT_OUTPUT
    [line] = err.splitlines()
    assert line.startswith(f"deliverycheck: results store {out / STORE_NAME}: not a usable")
    assert line.endswith(f"(the reports in {out} hold all 3 files of this run)")
    rows = [json.loads(x) for x in (out / "results.jsonl").read_text().splitlines()]
    assert [r["status"] for r in rows] == ["pass"] * 3 and all(r["measurement"] for r in rows)
    assert (out / "report.csv").exists() and (out / "report.html").exists()
    assert "profile measure-only: 3 files: 3 pass" in stdout


def test_reports_that_cannot_be_written_are_named_and_the_store_keeps_the_work(
    tmp_path, monkeypatch
):
    import checker.report as report

    def full(*args, **kwargs):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(tmp_path / "out" / "x.tmp"))

    monkeypatch.setattr(report, "write_csv", full)
    src, out = _batch(tmp_path / "in"), tmp_path / "out"
    code, _, err = _check(src, out)
    assert code == EXIT_OUTPUT
    assert err == (
        f"deliverycheck: reports: cannot write {out / 'x.tmp'}: the disk is full (No space left "
        "on device); free some space or choose another output folder, then run the same "
        "command again: the measurements are kept in the results store, so nothing is "
        "measured twice\n"
    )
    with open_store(out) as store:
        assert sorted(store.measurement_attempts().values()) == [1, 1, 1]


# --- Real read-only and full file systems, in a private mount namespace ------------------------


def _namespace_reason() -> str | None:
    """Why the mount-namespace tests cannot run here, or None."""
    if os.geteuid() != 0:
        return "needs root for a private mount namespace (unshare -m) with its own mounts"
    if shutil.which("unshare") is None:
        return "the unshare command is not installed"
    probe = subprocess.run(["unshare", "-m", "true"], capture_output=True, timeout=30)
    if probe.returncode != 0:
        return f"unshare -m is not allowed here ({probe.stderr.decode(errors='replace').strip()})"
    return None


NAMESPACE = _namespace_reason()
needs_namespace = pytest.mark.skipif(NAMESPACE is not None, reason=NAMESPACE or "")


def _check_in_namespace(setup: str, src: Path, out: Path) -> subprocess.CompletedProcess:
    """Run ``setup`` (shell, in a private mount namespace), then the check command there."""
    cmd = (
        f"set -e; {setup}; exec '{sys.executable}' -m checker check '{src}' "
        f"--profile measure-only --out '{out}' --quiet --jobs 1"
    )
    return subprocess.run(
        ["unshare", "-m", "sh", "-c", cmd], capture_output=True, text=True, timeout=300
    )


@needs_namespace
def test_a_read_only_output_folder_is_named_not_blamed_on_the_store(tmp_path):
    src, out = _batch(tmp_path / "in", 1), tmp_path / "out"
    out.mkdir()
    proc = _check_in_namespace(
        f"mount --bind '{out}' '{out}'; mount -o remount,ro,bind '{out}'", src, out
    )
    assert proc.returncode == EXIT_OUTPUT, proc.stderr
    assert proc.stderr == (
        f"deliverycheck: results store {out / STORE_NAME}: cannot write in {out}: the folder is "
        "on a read-only file system (Read-only file system) while opening it; choose another "
        "output folder, then run the same command again: files already finished are kept\n"
    )


@needs_namespace
def test_a_full_disk_before_the_run_is_named(tmp_path):
    src, out = _batch(tmp_path / "in", 1), tmp_path / "mnt"
    out.mkdir()
    fill = f"mount -t tmpfs -o size=64k tmpfs '{out}'; cat /dev/zero > '{out}/filler' 2>/dev/null || true"
    proc = _check_in_namespace(fill, src, out)
    assert proc.returncode == EXIT_OUTPUT, proc.stderr
    assert proc.stderr == (
        f"deliverycheck: results store {out / STORE_NAME}: the disk is full (database or disk "
        "is full) while opening it; free some space or use another output folder, then run "
        "the same command again: files already finished are kept\n"
    )


@needs_namespace
@pytest.mark.slow
def test_a_disk_that_fills_during_the_run_is_named(tmp_path):
    # 512 KiB with 120 KiB left: the store opens, then fills while measurements are stored
    # (each holds a loudness timeline), and the reports find no room either.
    src, out = _batch(tmp_path / "in", 4), tmp_path / "mnt"
    out.mkdir()
    fill = f"mount -t tmpfs -o size=512k tmpfs '{out}'; head -c 401408 /dev/zero > '{out}/filler'"
    proc = _check_in_namespace(fill, src, out)
    assert proc.returncode == EXIT_OUTPUT, proc.stderr
    lines = proc.stderr.splitlines()
    assert lines and all(line.startswith("deliverycheck: ") for line in lines), proc.stderr
    assert "the disk is full" in lines[-1] and "Traceback" not in proc.stderr
    assert "internal error" not in proc.stderr
