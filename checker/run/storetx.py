"""Transactions of the results store (checker/run/store.py): single writes (BEGIN IMMEDIATE ...
COMMIT), per-file rows grouped ``group_writes(rows)`` at a time with a savepoint per row, and
sqlite3 failures turned into one line of StoreError (what, where, what to do).

One job: how the store writes and how its failures read. Store inherits these methods
(StoreTransactions) and owns the attributes they use (path, db, group_rows, _open_rows).
"""

from __future__ import annotations

import contextlib
import errno
import os
import sqlite3
import tempfile
from pathlib import Path

from checker.model.errors import StoreError, os_cause


class StoreTransactions:
    """Write transactions and failure messages of Store."""

    def _error(self, exc: sqlite3.Error, doing: str) -> StoreError:
        """One line for a failure of the store: what, where, what to do."""
        code = (getattr(exc, "sqlite_errorcode", None) or 0) & 0xFF
        text = str(exc)
        where = f"results store {self.path}"
        again = "then run the same command again: files already finished are kept"
        if (
            code in (_SQLITE_CORRUPT, _SQLITE_NOTADB)
            or "malformed" in text
            or "not a database" in text
        ):
            return StoreError(
                f"{where}: not a usable results store, the file is damaged or not a "
                f"deliverycheck SQLite file ({text}) while {doing}; move it away (or delete it) "
                "and run again (every file will be measured again), or use another output folder"
            )
        if code in (_SQLITE_BUSY, _SQLITE_LOCKED):
            return StoreError(
                f"{where}: in use by another process ({text}) while {doing}; wait for the "
                "other run to finish, or use another output folder"
            )
        if code == _SQLITE_FULL or "disk is full" in text:
            return StoreError(
                f"{where}: the disk is full ({text}) while {doing}; free some space or use "
                f"another output folder, {again}"
            )
        probe = _probe_folder(self.path.parent)
        if probe is not None:
            what, todo = os_cause(probe)
            return StoreError(
                f"{where}: cannot write in {self.path.parent}: {what} "
                f"({probe.strerror or probe}) while {doing}; {todo}, {again}"
            )
        if code == _SQLITE_READONLY or "readonly" in text:
            return StoreError(
                f"{where}: the file is read-only ({text}) while {doing}; make it writable or "
                f"use another output folder, {again}"
            )
        return StoreError(
            f"{where}: failed ({type(exc).__name__}: {text}) while {doing}; check the disk "
            f"and the folder, or use another output folder, {again}"
        )

    def _guard(self, doing: str):
        """Context: sqlite3 errors inside become StoreError (see _error)."""
        store = self

        class _Guard:
            def __enter__(self):
                return None

            def __exit__(self, exc_type, exc, tb):
                if exc is not None and isinstance(exc, sqlite3.Error):
                    raise store._error(exc, doing) from None
                return False

        return _Guard()

    def group_writes(self, rows: int) -> None:
        """From now on, commit per-file rows (measurements, errors, verdicts) ``rows`` at a
        time (1: each at once). Any other write, flush() and close() commit the open group."""
        if rows < 1:
            raise ValueError(f"Store.group_writes: rows = {rows} (expected >= 1)")
        self.flush()
        self.group_rows = int(rows)

    def flush(self) -> None:
        """Commit the open group of rows, if any."""
        if self._open_rows:
            self._open_rows = 0
            try:
                self.db.execute("COMMIT")
            except sqlite3.Error as exc:
                self._abandon_group()
                raise self._error(exc, "committing finished files") from None

    def _row(self, doing: str):
        """One per-file row: inside the open group (BEGIN IMMEDIATE on its first row,
        COMMIT on its last). An SQLite error rolls the whole group back (StoreError); any
        other exception (Ctrl-C) undoes this row only, keeping the group for flush()."""
        if self.group_rows <= 1:
            return self._tx(doing)
        store = self

        class _Row:
            def __enter__(self):
                try:
                    if store._open_rows == 0:
                        store.db.execute("BEGIN IMMEDIATE")
                        store._open_rows = -1  # open, no row yet (flush commits it)
                    store.db.execute("SAVEPOINT file_row")
                except sqlite3.Error as exc:
                    store._abandon_group()
                    raise store._error(exc, doing) from None

            def __exit__(self, exc_type, exc, tb):
                try:
                    if exc is None:
                        store.db.execute("RELEASE file_row")
                    elif not isinstance(exc, sqlite3.Error):
                        store.db.execute("ROLLBACK TO file_row")
                        store.db.execute("RELEASE file_row")
                        return False
                except sqlite3.Error as failure:
                    exc = failure
                if exc is not None:
                    store._abandon_group()
                    raise store._error(exc, doing) from None
                store._open_rows = max(store._open_rows, 0) + 1
                if store._open_rows >= store.group_rows:
                    store.flush()
                return False

        return _Row()

    def _abandon_group(self) -> None:
        self._open_rows = 0
        with contextlib.suppress(sqlite3.Error):
            self.db.execute("ROLLBACK")

    def _tx(self, doing: str = "writing to it"):
        """BEGIN IMMEDIATE ... COMMIT (ROLLBACK on error); sqlite3 errors -> StoreError.
        Commits the open group of rows first."""
        store = self

        class _Tx:
            def __enter__(self):
                store.flush()
                try:
                    store.db.execute("BEGIN IMMEDIATE")
                except sqlite3.Error as exc:
                    raise store._error(exc, doing) from None

            def __exit__(self, exc_type, exc, tb):
                try:
                    store.db.execute("COMMIT" if exc is None else "ROLLBACK")
                except sqlite3.Error as failure:
                    if exc is None:
                        raise store._error(failure, doing) from None
                if isinstance(exc, sqlite3.Error):
                    raise store._error(exc, doing) from None
                return False

        return _Tx()


_SQLITE_PERM, _SQLITE_BUSY, _SQLITE_LOCKED, _SQLITE_READONLY = 3, 5, 6, 8
_SQLITE_CORRUPT, _SQLITE_FULL, _SQLITE_NOTADB = 11, 13, 26


def _probe_folder(folder: Path) -> OSError | None:
    """Try to create (and remove) a file in ``folder``: the OSError that stops it, or None."""
    try:
        fd, name = tempfile.mkstemp(prefix=".deliverycheck-probe-", dir=folder)
    except OSError as exc:
        return exc
    os.close(fd)
    with contextlib.suppress(OSError):  # created but not removable: leave it
        os.unlink(name)
    try:
        st = os.statvfs(folder)
    except (OSError, AttributeError):  # pragma: no cover - not POSIX
        return None
    if st.f_bavail == 0:
        return OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
    return None
