"""The SQLite results store: schema version, round trips, upserts, runs and verdicts."""

from __future__ import annotations

import math
import sqlite3

import pytest
from signals import sine, write

from checker.analysis.onepass import measure
from checker.model.errors import StoreError
from checker.model.measurement import Measurement
from checker.model.results import FileResult, RunInfo
from checker.model.timeline import Timeline
from checker.model.verdict import FAIL, Flag, GainAdvice, Verdict
from checker.run.store import FileIdentity, Store, open_store
from checker.run.storeschema import SCHEMA_VERSION

OPTS = '{"true_peak_ceiling_dbtp": -1.0}'


def _measurement(path: str) -> Measurement:
    return Measurement(
        path=path,
        values={
            "integrated_lufs": None,
            "integrated_note": "every block below the absolute gate",
            "sample_peak_dbfs": -math.inf,  # digital silence
            "true_peak_channel_dbtp": [-math.inf, -3.5],
            "frames": 48_000,
            "loudness_range_stable": False,
        },
        timeline=Timeline(hop_s=0.1, times_s=[0.1, 0.2], series={"momentary_lufs": [None, -23.0]}),
        findings=("header declares 2.000 s, 1.000 s decoded: truncated",),
    )


def _ident(tmp_path) -> FileIdentity:
    f = tmp_path / "a.wav"
    f.write_bytes(b"0123456789")
    return FileIdentity.of(str(f))


def test_schema_version_and_wal(tmp_path):
    with open_store(tmp_path) as store:
        assert store.schema_version() == SCHEMA_VERSION
        assert store.db.execute("PRAGMA journal_mode").fetchone() == ("wal",)
    # Reopening an existing store keeps it.
    with open_store(tmp_path) as store:
        assert store.counts() == {"measurements": 0, "errors": 0, "runs": 0, "verdicts": 0}


def test_newer_schema_is_refused(tmp_path):
    with open_store(tmp_path) as store:
        store.db.execute(
            "UPDATE meta SET value=? WHERE key='schema_version'", (SCHEMA_VERSION + 1,)
        )
    newer, ours = SCHEMA_VERSION + 1, SCHEMA_VERSION
    with pytest.raises(StoreError, match=f"schema_version = {newer} .*expected <= {ours}"):
        open_store(tmp_path)


def test_a_version_1_store_gains_the_stem_set_table(tmp_path):
    # Schema 2 added stem_sets; a store written by schema 1 keeps its rows and gains it.
    with open_store(tmp_path) as store:
        store.db.execute("DROP TABLE stem_sets")
        store.db.execute("UPDATE meta SET value='1' WHERE key='schema_version'")
        store.put_measurement(_ident(tmp_path), OPTS, _measurement("kept"))
    with open_store(tmp_path) as store:
        assert store.schema_version() == SCHEMA_VERSION == 3
        assert store.get_stem_set("no such set") is None
        store.put_stem_set("k", "folder", {"path": "folder", "values": {"x_db": -math.inf}})
        assert store.get_stem_set("k") == {"path": "folder", "values": {"x_db": -math.inf}}
        assert store.counts()["measurements"] == 1


def test_not_a_database_is_a_store_error(tmp_path):
    (tmp_path / "results.sqlite").write_bytes(b"this is not SQLite" * 100)
    with pytest.raises(StoreError, match="not a usable results store"):
        open_store(tmp_path)


def test_measurement_round_trip_keeps_inf_none_and_timeline(tmp_path):
    ident = _ident(tmp_path)
    m = _measurement(ident.path)
    with open_store(tmp_path) as store:
        store.put_measurement(ident, OPTS, m)
        back = store.get_measurement(ident, m.engine_version, OPTS)
    assert back == m
    assert back.sample_peak_dbfs == -math.inf and back.integrated_lufs is None


def test_real_measurement_round_trip(tmp_path):
    path = write(tmp_path / "tone.wav", sine(1000.0, -20.0, 1.0, channels=2))
    m = measure(str(path))
    ident = FileIdentity.of(str(path))
    with open_store(tmp_path) as store:
        store.put_measurement(ident, OPTS, m)
        assert store.get_measurement(ident, m.engine_version, OPTS) == m


def test_cache_key_is_identity_engine_and_options(tmp_path):
    ident = _ident(tmp_path)
    m = _measurement(ident.path)
    with open_store(tmp_path) as store:
        store.put_measurement(ident, OPTS, m)
        assert store.get_measurement(ident, "other-engine", OPTS) is None
        assert store.get_measurement(ident, m.engine_version, '{"x": 1}') is None
        (tmp_path / "a.wav").write_bytes(b"01234567890")  # the file changed: new size
        assert store.get_measurement(FileIdentity.of(ident.path), m.engine_version, OPTS) is None


def test_upsert_never_duplicates_and_counts_attempts(tmp_path):
    ident = _ident(tmp_path)
    m = _measurement(ident.path)
    with open_store(tmp_path) as store:
        for _ in range(3):
            store.put_measurement(ident, OPTS, m)
        assert store.counts()["measurements"] == 1
        assert store.measurement_attempts() == {ident.path: 3}
        with pytest.raises(sqlite3.IntegrityError):  # the UNIQUE key holds
            store.db.execute(
                "INSERT INTO measurements(path, size_bytes, mtime_ns, engine_version, "
                "options_key, measurement_json, measured_at) VALUES (?, ?, ?, ?, ?, '{}', 'x')",
                (ident.path, ident.size_bytes, ident.mtime_ns, m.engine_version, OPTS),
            )


def test_errors_retry_flag_and_cleared_by_success(tmp_path):
    ident = _ident(tmp_path)
    with open_store(tmp_path) as store:
        store.put_error(ident, "e1", OPTS, "a.wav: cannot open as audio (x)", retry=False)
        assert store.get_error(ident, "e1", OPTS) == "a.wav: cannot open as audio (x)"
        store.put_error(ident, "e1", OPTS, "a.wav: took longer than the time limit", retry=True)
        assert store.get_error(ident, "e1", OPTS) is None  # timeouts are tried again
        assert store.counts()["errors"] == 1
        m = Measurement(path=ident.path, values={}, engine_version="e1")
        store.put_measurement(ident, OPTS, m)
        assert store.counts()["errors"] == 0


def test_runs_and_verdicts(tmp_path):
    run = RunInfo(
        run_id="r1",
        started_at="2026-01-01T00:00:00+00:00",
        inputs=("in",),
        profile_name="p",
        profile_title="P",
        profile_limits=({"key": "sample_peak_max_dbfs", "value": -1.0},),
        engine_version="e1",
    )
    flag = Flag("sample_peak_max_dbfs", FAIL, -0.5, -1.0, "dBFS", "too hot", 0.0, "test input")
    verdict = Verdict(FAIL, (flag,), GainAdvice(None, None, None, None, "lower the level"))
    with open_store(tmp_path) as store:
        store.start_run(run)
        store.put_result("r1", FileResult("in/a.wav", FAIL, verdict=verdict))
        store.put_result("r1", FileResult("in/a.wav", FAIL, verdict=verdict))  # no duplicate
        store.put_result("r1", FileResult.failed("in/b.wav", "in/b.wav: cannot open"))
        assert store.runs()[0].finished_at is None
        store.finish_run(RunInfo(**{**run.to_dict(), "finished_at": "2026-01-01T00:01:00+00:00"}))
        assert store.runs()[0].finished_at == "2026-01-01T00:01:00+00:00"
        assert store.runs()[0].profile_limits == run.profile_limits
        rows = store.run_results("r1")
    assert rows == [
        ("in/a.wav", FAIL, verdict, None),
        ("in/b.wav", "error", None, "in/b.wav: cannot open"),
    ]


def test_store_in_a_folder_that_cannot_be_created(tmp_path):
    (tmp_path / "file").write_text("x")
    where = tmp_path / "file" / "sub" / "results.sqlite"
    with pytest.raises(StoreError) as info:
        Store(where)
    assert str(info.value) == (
        f"results store {where}: cannot create its folder: a part of the path is a file, not a "
        "folder (Not a directory); choose another output folder"
    )
    assert info.value.exit_code == 4  # errors.EXIT_OUTPUT: the output folder, not the audio


def _idents(tmp_path, n: int) -> list[FileIdentity]:
    out = []
    for i in range(n):
        f = tmp_path / f"f{i}.wav"
        f.write_bytes(b"x" * (i + 1))
        out.append(FileIdentity.of(str(f)))
    return out


def _committed(tmp_path) -> int:
    """Measurements another connection sees (what a killed run would leave)."""
    with sqlite3.connect(str(tmp_path / "results.sqlite")) as other:
        return other.execute("SELECT COUNT(*) FROM measurements").fetchone()[0]


def test_grouped_rows_commit_by_count_and_on_flush(tmp_path):
    idents = _idents(tmp_path, 7)
    with open_store(tmp_path) as store:
        store.group_writes(3)
        seen = []
        for ident in idents:
            store.put_measurement(ident, OPTS, _measurement(ident.path))
            seen.append(_committed(tmp_path))
        # Committed three rows at a time: a SIGKILL loses at most the open group.
        assert seen == [0, 0, 3, 3, 3, 6, 6]
        assert store.counts()["measurements"] == 7  # the writer sees its open group
        store.flush()
        assert _committed(tmp_path) == 7
        store.put_error(idents[0], "e1", OPTS, "f0.wav: cannot open", retry=False)
        assert _committed(tmp_path) == 7  # an error row waits in the group too
    with open_store(tmp_path) as store:  # close() committed the open group
        assert store.get_error(idents[0], "e1", OPTS) == "f0.wav: cannot open"


def test_interrupt_inside_a_grouped_row_keeps_the_group(tmp_path):
    idents = _idents(tmp_path, 3)
    with open_store(tmp_path) as store:
        store.group_writes(10)
        for ident in idents[:2]:
            store.put_measurement(ident, OPTS, _measurement(ident.path))
        with pytest.raises(KeyboardInterrupt), store._row("storing a measurement"):
            store.db.execute("DELETE FROM measurements")  # half done when Ctrl-C lands
            raise KeyboardInterrupt
        store.flush()
    # The interrupted row is undone; the two finished rows of its group are kept.
    assert _committed(tmp_path) == 2


def test_a_failing_grouped_row_is_a_store_error_and_rolls_the_group_back(tmp_path):
    idents = _idents(tmp_path, 2)
    with open_store(tmp_path) as store:
        store.group_writes(10)
        store.put_measurement(idents[0], OPTS, _measurement(idents[0].path))
        failing = store._row("storing a measurement")
        with pytest.raises(StoreError, match="while storing a measurement"), failing:
            store.db.execute("INSERT INTO no_such_table VALUES (1)")
        store.put_measurement(idents[1], OPTS, _measurement(idents[1].path))
        store.flush()
    # The failed group is gone (measured again next run); writing goes on in a new one.
    assert _committed(tmp_path) == 1
