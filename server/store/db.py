"""Open the SQLite file and run every change in one transaction.

One connection per process, shared by the web worker threads: a re-entrant lock per database
serialises access, so one thread's transaction never sees another thread's statements.
Several processes may open the same file (WAL mode, busy timeout).
"""

from __future__ import annotations

import os
import sqlite3
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import UTC, datetime
from pathlib import Path

import sqlite_utils

BUSY_TIMEOUT_MS = 5000
_LOCK_ATTR = "_probewise_lock"
_lock_guard = threading.Lock()


def utc_now() -> str:
    """Timestamp stored with every row: ISO 8601, UTC, milliseconds (sorts as text)."""
    return datetime.now(UTC).isoformat(timespec="milliseconds")


def default_db_path() -> Path:
    """Per-user database: $PROBEWISE_DB, else $XDG_DATA_HOME/probewise, else ~/.local/share."""
    explicit = os.environ.get("PROBEWISE_DB")
    if explicit:
        return Path(explicit).expanduser()
    data_home = os.environ.get("XDG_DATA_HOME")
    base = Path(data_home).expanduser() if data_home else Path.home() / ".local" / "share"
    return base / "probewise" / "probewise.db"


def open_db(path: str | Path) -> sqlite_utils.Database:
    """Open (creating if needed) the database at ``path`` and bring its schema up to date."""
    from probewise.store.migrations import apply_migrations

    path = Path(path).expanduser()
    path.parent.mkdir(parents=True, exist_ok=True)
    # isolation_level=None: no implicit BEGIN; transactions are explicit (see transaction()).
    conn = sqlite3.connect(str(path), check_same_thread=False, isolation_level=None)
    try:
        conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
        conn.execute("PRAGMA journal_mode = WAL")
        # FULL: a committed transaction survives a killed process or a power cut.
        conn.execute("PRAGMA synchronous = FULL")
        conn.execute("PRAGMA foreign_keys = ON")
        db = sqlite_utils.Database(conn)
        _lock_of(db)
        apply_migrations(db)
    except BaseException:
        conn.close()
        raise
    return db


def _lock_of(db: sqlite_utils.Database) -> threading.RLock:
    lock = getattr(db, _LOCK_ATTR, None)
    if lock is None:
        with _lock_guard:
            lock = getattr(db, _LOCK_ATTR, None)
            if lock is None:
                lock = threading.RLock()
                setattr(db, _LOCK_ATTR, lock)
    return lock


@contextmanager
def transaction(db: sqlite_utils.Database) -> Iterator[sqlite_utils.Database]:
    """One write transaction: BEGIN IMMEDIATE ... COMMIT, ROLLBACK on any exception.

    IMMEDIATE takes the write lock up front, so a read-then-write (check the revision, then
    insert the next one) cannot interleave with another process. Nested use joins the outer
    transaction through a savepoint.
    """
    with _lock_of(db):
        conn = db.conn
        if conn.in_transaction:
            with db.atomic():  # savepoint inside the caller's transaction
                yield db
            return
        conn.execute("BEGIN IMMEDIATE")
        try:
            yield db
        except BaseException:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            raise
        try:
            conn.execute("COMMIT")
        except BaseException:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            raise


@contextmanager
def read_snapshot(db: sqlite_utils.Database) -> Iterator[sqlite_utils.Database]:
    """Several reads that see one consistent state (a deferred transaction, never writing)."""
    with _lock_of(db):
        conn = db.conn
        if conn.in_transaction:
            yield db
            return
        conn.execute("BEGIN")
        try:
            yield db
        finally:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
