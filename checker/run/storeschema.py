"""Schema of the results store (checker/run/store.py): its tables, the schema version and the
upgrade of an older store in place (new tables, ctime_ns columns).

One job: what the SQLite file holds and how an older one is brought up to date. Store
inherits these methods (StoreSchema) and owns the attributes they use (path, db, _tx).
"""

from __future__ import annotations

from checker.model.errors import StoreError

SCHEMA_VERSION = 3  # 2: stem_sets; 3: ctime_ns in measurements and errors

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (
    key TEXT PRIMARY KEY,
    value TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS measurements (
    id INTEGER PRIMARY KEY,
    path TEXT NOT NULL,
    size_bytes INTEGER NOT NULL,
    mtime_ns INTEGER NOT NULL,
    ctime_ns INTEGER,
    engine_version TEXT NOT NULL,
    options_key TEXT NOT NULL,
    measurement_json TEXT NOT NULL,
    timeline_json TEXT,
    measured_at TEXT NOT NULL,
    attempts INTEGER NOT NULL DEFAULT 1,
    UNIQUE (path, size_bytes, mtime_ns, engine_version, options_key)
);
CREATE TABLE IF NOT EXISTS errors (
    id INTEGER PRIMARY KEY,
    path TEXT NOT NULL,
    size_bytes INTEGER NOT NULL,
    mtime_ns INTEGER NOT NULL,
    ctime_ns INTEGER,
    engine_version TEXT NOT NULL,
    options_key TEXT NOT NULL,
    message TEXT NOT NULL,
    retry INTEGER NOT NULL,
    failed_at TEXT NOT NULL,
    attempts INTEGER NOT NULL DEFAULT 1,
    UNIQUE (path, size_bytes, mtime_ns, engine_version, options_key)
);
CREATE TABLE IF NOT EXISTS runs (
    run_id TEXT PRIMARY KEY,
    started_at TEXT NOT NULL,
    finished_at TEXT,
    profile_name TEXT NOT NULL,
    run_json TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS stem_sets (
    set_key TEXT PRIMARY KEY,
    folder TEXT NOT NULL,
    set_json TEXT NOT NULL,
    measured_at TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS verdicts (
    run_id TEXT NOT NULL REFERENCES runs(run_id),
    path TEXT NOT NULL,
    status TEXT NOT NULL,
    verdict_json TEXT,
    error TEXT,
    PRIMARY KEY (run_id, path)
);
"""


class StoreSchema:
    """Schema methods of Store."""

    def _init_schema(self) -> None:
        found = self.schema_version()
        if found is not None and found > SCHEMA_VERSION:
            raise StoreError(
                f"{self.path}: schema_version = {found} "
                f"(expected <= {SCHEMA_VERSION}; written by a newer deliverycheck: use it, "
                "or another output folder)"
            )
        with self._tx("preparing it"):
            for statement in _SCHEMA.split(";"):
                if statement.strip():
                    self.db.execute(statement)
            # Schema 3: the identity gained ctime_ns. Older rows keep NULL there, which
            # matches no file: they are measured again once (and replaced).
            for table in ("measurements", "errors"):
                columns = {row[1] for row in self.db.execute(f"PRAGMA table_info({table})")}
                if "ctime_ns" not in columns:
                    self.db.execute(f"ALTER TABLE {table} ADD COLUMN ctime_ns INTEGER")
            # A store of an older schema has just gained the newer tables: say so.
            self.db.execute(
                "INSERT INTO meta(key, value) VALUES ('schema_version', ?) "
                "ON CONFLICT(key) DO UPDATE SET value=excluded.value",
                (str(SCHEMA_VERSION),),
            )

    def schema_version(self) -> int | None:
        row = self.db.execute(
            "SELECT name FROM sqlite_master WHERE type='table' AND name='meta'"
        ).fetchone()
        if row is None:
            return None
        row = self.db.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
        if row is None:
            return None
        try:
            return int(row[0])
        except ValueError:
            raise StoreError(
                f"{self.path}: schema_version = {row[0]!r} (expected an integer)"
            ) from None
