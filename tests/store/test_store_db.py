"""Opening the database: location, pragmas, migrations, transactions."""

import pytest

from probewise.store import (
    SCHEMA_VERSION,
    StoreError,
    create_project,
    default_db_path,
    list_projects,
    open_db,
    schema_version,
    transaction,
)


def test_open_creates_folder_and_sets_pragmas(tmp_path):
    path = tmp_path / "a" / "b" / "p.db"
    db = open_db(path)
    try:
        assert path.exists()
        pragma = {
            name: db.execute(f"PRAGMA {name}").fetchone()[0]
            for name in ("journal_mode", "synchronous", "foreign_keys", "busy_timeout")
        }
        assert pragma == {
            "journal_mode": "wal",
            "synchronous": 2,  # FULL
            "foreign_keys": 1,
            "busy_timeout": 5000,
        }
        assert {"projects", "revisions", "jobs"} <= set(db.table_names())
    finally:
        db.close()


def test_migrations_idempotent_across_opens(tmp_path):
    path = tmp_path / "p.db"
    for _ in range(3):
        db = open_db(path)
        try:
            assert schema_version(db) == SCHEMA_VERSION >= 1
            assert db.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
            assert db["_sqlite_migrations"].count == SCHEMA_VERSION
            assert {"projects", "revisions", "jobs"} <= set(db.table_names())
        finally:
            db.close()


def test_data_survives_reopen(tmp_path, tiny):
    path = tmp_path / "p.db"
    db = open_db(path)
    project_id = create_project(db, tiny)
    db.close()
    db = open_db(path)
    try:
        assert [p.id for p in list_projects(db)] == [project_id]
    finally:
        db.close()


def test_newer_schema_refused(tmp_path):
    path = tmp_path / "p.db"
    db = open_db(path)
    db["_sqlite_migrations"].insert(
        {"migration_set": "probewise", "name": "999_from_the_future", "applied_at": "x"}
    )
    db.close()
    with pytest.raises(StoreError, match="newer probewise"):
        open_db(path)


def test_transaction_rolls_back_on_error(db):
    with pytest.raises(RuntimeError), transaction(db):
        db["jobs"].insert({"kind": "k", "params": "{}", "created_at": "t", "updated_at": "t"})
        raise RuntimeError("boom")
    assert db["jobs"].count == 0
    assert not db.conn.in_transaction


def test_nested_transaction_joins_outer(db):
    with pytest.raises(RuntimeError), transaction(db):
        db["jobs"].insert({"kind": "a", "params": "{}", "created_at": "t", "updated_at": "t"})
        with transaction(db):
            db["jobs"].insert({"kind": "b", "params": "{}", "created_at": "t", "updated_at": "t"})
        raise RuntimeError("outer fails")
    assert db["jobs"].count == 0


def test_default_db_path(monkeypatch, tmp_path):
    monkeypatch.setenv("PROBEWISE_DB", str(tmp_path / "x.db"))
    assert default_db_path() == tmp_path / "x.db"
    monkeypatch.delenv("PROBEWISE_DB")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    assert default_db_path() == tmp_path / "data" / "probewise" / "probewise.db"
    monkeypatch.delenv("XDG_DATA_HOME")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    expected = tmp_path / "home" / ".local" / "share" / "probewise" / "probewise.db"
    assert default_db_path() == expected
