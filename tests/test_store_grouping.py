"""Grouped store writes (checker/store.py, start_grouping): rows commit together, each write
stays atomic, and nothing is lost when the group ends. Checked by reading the file from a
second SQLite connection, which sees committed rows only (SQLite's isolation in WAL mode)."""

from __future__ import annotations

import sqlite3

import pytest

from checker.results import FileResult, RunInfo
from checker.store import STORE_NAME, open_store

RUN = RunInfo(
    run_id="run-1",
    started_at="2026-01-01T00:00:00+00:00",
    inputs=("in",),
    profile_name="p",
    profile_title="P",
    profile_limits=(),
    engine_version="e1",
)


def _count(path) -> int:
    with sqlite3.connect(str(path)) as other:
        return other.execute("SELECT COUNT(*) FROM verdicts").fetchone()[0]


def test_grouped_writes_commit_together_and_at_the_end(tmp_path, monkeypatch):
    with open_store(tmp_path) as store:
        monkeypatch.setattr(store, "GROUP_S", 3600.0)  # nothing commits before the end
        store.start_run(RUN)
        store.start_grouping()
        for i in range(3):
            store.put_result("run-1", FileResult.failed(f"/x/{i}.wav", "unreadable"))
        assert _count(tmp_path / STORE_NAME) == 0  # still one open transaction
        store.stop_grouping()
        assert _count(tmp_path / STORE_NAME) == 3


def test_a_failed_write_in_a_group_leaves_the_others(tmp_path, monkeypatch):
    with open_store(tmp_path) as store:
        monkeypatch.setattr(store, "GROUP_S", 3600.0)
        store.start_run(RUN)
        store.start_grouping()
        store.put_result("run-1", FileResult.failed("/x/a.wav", "unreadable"))
        with pytest.raises(sqlite3.Error), store._tx():
            store.db.execute("INSERT INTO verdicts(run_id, path) VALUES ('run-1', '/x/b.wav')")
            store.db.execute("INSERT INTO no_such_table VALUES (1)")
        store.stop_grouping()
        rows = store.db.execute("SELECT path FROM verdicts ORDER BY path").fetchall()
    assert rows == [("/x/a.wav",)]


def test_a_group_commits_once_its_time_is_up(tmp_path, monkeypatch):
    with open_store(tmp_path) as store:
        monkeypatch.setattr(store, "GROUP_S", 0.0)  # every write ends the group's transaction
        store.start_run(RUN)
        store.start_grouping()
        store.put_result("run-1", FileResult.failed("/x/a.wav", "unreadable"))
        assert _count(tmp_path / STORE_NAME) == 1
        store.stop_grouping()
