"""The results store: one SQLite file (standard library, WAL mode) per output folder.

It keeps each file's measurement keyed by the file's identity (resolved path,
size, modification time in ns) plus the engine version and the measurement
options that change values, so a later run (resumed after a crash, or against
another profile) reads no audio for files already measured. The identity also
holds the inode change time (ctime, ns): a lookup matches only when it is the
same too, so a file rewritten with the same size and its old modification time
put back (``touch -r``, some copy tools) is measured again. It also keeps
per-file errors, each run and each verdict. Paths are stored in readable form
(checker.model.names: a name that is not valid UTF-8 has its odd bytes written
``\\xNN``), so any file name can be stored.

Failures of the store itself (disk full, read-only folder, damaged file) raise
StoreError with one line saying what, where and what to do (exit code 4).

Only the parent process writes. By default every row is committed at once; a
batch groups its per-file rows (measurement or error, and verdict) into one
transaction per ``group_writes(rows)`` rows (by count, never by time: what a
killed run loses is bounded by the group, whatever the machine's speed), so a
killed run loses at most the files in flight and those of the open group, which
the next run measures again; UNIQUE keys and upserts mean nothing is ever stored
twice. ``attempts`` counts how often a file was
measured (tests use it to show that a resumed run re-read nothing).
"""

from __future__ import annotations

import contextlib
import json
import os
import sqlite3
from dataclasses import dataclass, replace
from datetime import UTC, datetime
from pathlib import Path

from checker.model.errors import StoreError, os_cause
from checker.model.measurement import Measurement
from checker.model.names import readable
from checker.model.results import FileResult, RunInfo
from checker.model.serial import dumps, dumps_readable, from_json_safe
from checker.model.timeline import Timeline
from checker.model.verdict import Verdict
from checker.run.storeschema import StoreSchema
from checker.run.storetx import StoreTransactions

STORE_NAME = "results.sqlite"


@dataclass(frozen=True)
class FileIdentity:
    """Who a file is, for caching: its resolved path (readable form), size, modification
    time and inode change time. The unique key is (path, size, mtime); ctime must match too
    for a stored row to be used, and a new row replaces the old one."""

    path: str
    size_bytes: int
    mtime_ns: int
    ctime_ns: int = 0

    @classmethod
    def of(cls, path: str) -> FileIdentity:
        """Raises OSError when the file cannot be stat'ed (vanished, no permission)."""
        real = os.path.realpath(path)
        st = os.stat(real)
        return cls(readable(real), st.st_size, st.st_mtime_ns, st.st_ctime_ns)

    def key(self) -> tuple[str, int, int]:
        return (self.path, self.size_bytes, self.mtime_ns)


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


class Store(StoreSchema, StoreTransactions):
    """SQLite results store. Use as a context manager or call close()."""

    def __init__(self, path: str | Path):
        self.path = Path(path)
        #: Per-file rows per transaction (group_writes); 1: each committed at once.
        self.group_rows = 1
        self._open_rows = 0  # rows written in the open group (0: no group open)
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            what, todo = os_cause(exc)
            raise StoreError(
                f"results store {self.path}: cannot create its folder: {what} "
                f"({exc.strerror or exc}); {todo}"
            ) from None
        try:
            self.db = sqlite3.connect(str(self.path), timeout=30.0, isolation_level=None)
        except sqlite3.Error as exc:
            raise self._error(exc, "opening it") from None
        try:
            self.db.execute("PRAGMA journal_mode=WAL")
            # In WAL mode NORMAL is safe against a killed process; only a power
            # cut may lose the last commits (never corrupt the file).
            self.db.execute("PRAGMA synchronous=NORMAL")
            self.db.execute("PRAGMA foreign_keys=ON")
            self._init_schema()
        except sqlite3.Error as exc:
            self.db.close()
            raise self._error(exc, "opening it") from None
        except StoreError:
            self.db.close()
            raise

    def close(self) -> None:
        """Commit the open group of rows (if that fails, they are measured again next
        run) and close."""
        try:
            with contextlib.suppress(StoreError):
                self.flush()
        finally:
            self.db.close()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # -- measurements and errors -------------------------------------------------

    def get_measurement(
        self, ident: FileIdentity, engine_version: str, options_key: str
    ) -> Measurement | None:
        with self._guard("reading a stored measurement"):
            row = self.db.execute(
                "SELECT measurement_json, timeline_json FROM measurements WHERE path=? AND "
                "size_bytes=? AND mtime_ns=? AND ctime_ns=? AND engine_version=? "
                "AND options_key=?",
                (*ident.key(), ident.ctime_ns, engine_version, options_key),
            ).fetchone()
        if row is None:
            return None
        m = Measurement.from_dict(from_json_safe(json.loads(row[0])))
        timeline = Timeline.from_dict(from_json_safe(json.loads(row[1]))) if row[1] else None
        return replace(m, timeline=timeline)

    def put_measurement(
        self, ident: FileIdentity, options_key: str, measurement: Measurement
    ) -> None:
        """Store (or replace, counting the attempt) one measurement; committed at once."""
        timeline = measurement.timeline.to_dict() if measurement.timeline else None
        with self._row("storing a measurement"):
            self.db.execute(
                "INSERT INTO measurements(path, size_bytes, mtime_ns, ctime_ns, engine_version, "
                "options_key, measurement_json, timeline_json, measured_at) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?) "
                "ON CONFLICT(path, size_bytes, mtime_ns, engine_version, options_key) DO UPDATE "
                "SET measurement_json=excluded.measurement_json, ctime_ns=excluded.ctime_ns, "
                "timeline_json=excluded.timeline_json, measured_at=excluded.measured_at, "
                "attempts=attempts + 1",
                (
                    *ident.key(),
                    ident.ctime_ns,
                    measurement.engine_version,
                    options_key,
                    dumps_readable(measurement.to_dict(timeline=False)),
                    dumps(timeline) if timeline is not None else None,
                    _now(),
                ),
            )
            self._delete_error(ident, measurement.engine_version, options_key)

    # -- stem sets ----------------------------------------------------------------------

    def get_stem_set(self, set_key: str) -> dict | None:
        """A stem set's stored values (SetMeasurement.to_dict()), or None."""
        with self._guard("reading a stored stem set"):
            row = self.db.execute(
                "SELECT set_json FROM stem_sets WHERE set_key=?", (readable(set_key),)
            ).fetchone()
        return from_json_safe(json.loads(row[0])) if row else None

    def put_stem_set(self, set_key: str, folder: str, data: dict) -> None:
        """Store (or replace) one stem set's values; ``set_key`` names the files (identity:
        path, size, modification time), the engine version and the options it came from."""
        with self._tx("storing a stem set"):
            self.db.execute(
                "INSERT INTO stem_sets(set_key, folder, set_json, measured_at) "
                "VALUES (?, ?, ?, ?) ON CONFLICT(set_key) DO UPDATE SET "
                "set_json=excluded.set_json, measured_at=excluded.measured_at",
                (readable(set_key), readable(folder), dumps_readable(data), _now()),
            )

    def get_error(self, ident: FileIdentity, engine_version: str, options_key: str) -> str | None:
        """A stored error that is not worth retrying (the same bytes fail the same way)."""
        with self._guard("reading a stored error"):
            row = self.db.execute(
                "SELECT message FROM errors WHERE path=? AND size_bytes=? AND mtime_ns=? AND "
                "ctime_ns=? AND engine_version=? AND options_key=? AND retry=0",
                (*ident.key(), ident.ctime_ns, engine_version, options_key),
            ).fetchone()
        return row[0] if row else None

    def put_error(
        self,
        ident: FileIdentity,
        engine_version: str,
        options_key: str,
        message: str,
        retry: bool,
    ) -> None:
        """Store a per-file error. ``retry``: a timeout or crash, tried again next run."""
        with self._row("storing a file's error"):
            self.db.execute(
                "INSERT INTO errors(path, size_bytes, mtime_ns, ctime_ns, engine_version, "
                "options_key, message, retry, failed_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?) "
                "ON CONFLICT(path, size_bytes, mtime_ns, engine_version, options_key) DO UPDATE "
                "SET message=excluded.message, retry=excluded.retry, ctime_ns=excluded.ctime_ns, "
                "failed_at=excluded.failed_at, attempts=attempts + 1",
                (
                    *ident.key(),
                    ident.ctime_ns,
                    engine_version,
                    options_key,
                    readable(message),
                    int(retry),
                    _now(),
                ),
            )

    def _delete_error(self, ident: FileIdentity, engine_version: str, options_key: str) -> None:
        self.db.execute(
            "DELETE FROM errors WHERE path=? AND size_bytes=? AND mtime_ns=? AND "
            "engine_version=? AND options_key=?",
            (*ident.key(), engine_version, options_key),
        )

    # -- runs and verdicts -------------------------------------------------------

    def start_run(self, run: RunInfo) -> None:
        with self._tx("recording the run"):
            self.db.execute(
                "INSERT INTO runs(run_id, started_at, finished_at, profile_name, run_json) "
                "VALUES (?, ?, ?, ?, ?)",
                (run.run_id, run.started_at, run.finished_at, run.profile_name, _run_json(run)),
            )

    def finish_run(self, run: RunInfo) -> None:
        with self._tx("recording the run"):
            self.db.execute(
                "UPDATE runs SET finished_at=?, run_json=? WHERE run_id=?",
                (run.finished_at, _run_json(run), run.run_id),
            )

    def put_result(self, run_id: str, result: FileResult) -> None:
        with self._row("storing a verdict"):
            self.db.execute(
                "INSERT INTO verdicts(run_id, path, status, verdict_json, error) "
                "VALUES (?, ?, ?, ?, ?) ON CONFLICT(run_id, path) DO UPDATE SET "
                "status=excluded.status, verdict_json=excluded.verdict_json, "
                "error=excluded.error",
                (
                    run_id,
                    readable(result.path),
                    result.status,
                    dumps_readable(result.verdict.to_dict()) if result.verdict else None,
                    readable(result.error) if result.error is not None else None,
                ),
            )

    def run_results(self, run_id: str) -> list[tuple[str, str, Verdict | None, str | None]]:
        rows = self.db.execute(
            "SELECT path, status, verdict_json, error FROM verdicts WHERE run_id=? ORDER BY path",
            (run_id,),
        ).fetchall()
        return [
            (p, s, Verdict.from_dict(from_json_safe(json.loads(v))) if v else None, e)
            for p, s, v, e in rows
        ]

    def runs(self) -> list[RunInfo]:
        rows = self.db.execute("SELECT run_json FROM runs ORDER BY started_at, rowid").fetchall()
        out = []
        for (text,) in rows:
            d = from_json_safe(json.loads(text))
            d["inputs"] = tuple(d.get("inputs", ()))
            d["profile_limits"] = tuple(d.get("profile_limits", ()))
            d["not_checked"] = tuple(d.get("not_checked", ()))
            out.append(RunInfo(**d))
        return out

    def measurement_attempts(self) -> dict[str, int]:
        """Resolved path -> how many times it was measured (all identities summed)."""
        rows = self.db.execute(
            "SELECT path, SUM(attempts) FROM measurements GROUP BY path"
        ).fetchall()
        return {p: int(n) for p, n in rows}

    def counts(self) -> dict[str, int]:
        return {
            table: self.db.execute(f"SELECT COUNT(*) FROM {table}").fetchone()[0]
            for table in ("measurements", "errors", "runs", "verdicts")
        }


def _run_json(run: RunInfo) -> str:
    return dumps_readable(run.to_dict())


def open_store(out_dir: str | Path) -> Store:
    return Store(Path(out_dir) / STORE_NAME)
