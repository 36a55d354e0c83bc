"""Numbered schema migrations, applied on open (sqlite-utils' own migration mechanism).

Never edit an applied migration: add the next numbered one. Each runs once, recorded in
``_sqlite_migrations``; the schema version is the count applied, mirrored in PRAGMA user_version.
"""

from __future__ import annotations

import sqlite_utils
from sqlite_utils import Migrations

from probewise.store.errors import StoreError

MIGRATION_SET = "probewise"
migrations = Migrations(MIGRATION_SET)
MIGRATION_NAMES: list[str] = []


def _step(name: str):
    """Register the next numbered migration (names sort in order: 001_, 002_...)."""
    MIGRATION_NAMES.append(name)
    return migrations(name=name)


@_step("001_projects_revisions_jobs")
def m001_projects_revisions_jobs(db: sqlite_utils.Database) -> None:
    db["projects"].create(
        {
            "id": int,
            "name": str,
            "created_at": str,
            "updated_at": str,
            "deleted_at": str,
            "revision": int,  # number of the current (latest) revision
        },
        pk="id",
        not_null=["name", "created_at", "updated_at", "revision"],
    )
    # One row per saved state: the full model-file document (small; simple and robust).
    # undo_to: revision whose content an undo from this head restores (NULL: nothing to undo);
    # undo_label: the message an undo from this head names; restored_from: content copied from.
    db["revisions"].create(
        {
            "id": int,
            "project_id": int,
            "number": int,
            "created_at": str,
            "message": str,
            "name": str,
            "kind": str,
            "undo_to": int,
            "undo_label": str,
            "restored_from": int,
            "n_layouts": int,
            "model": str,
        },
        pk="id",
        foreign_keys=[("project_id", "projects", "id")],
        not_null=["project_id", "number", "created_at", "message", "name", "kind", "model"],
    )
    db["revisions"].create_index(["project_id", "number"], unique=True)
    db["jobs"].create(
        {
            "id": int,
            "project_id": int,
            "kind": str,
            "status": str,
            "progress": float,
            "message": str,
            "params": str,
            "result": str,
            "cancel_requested": int,
            "created_at": str,
            "updated_at": str,
        },
        pk="id",
        foreign_keys=[("project_id", "projects", "id")],
        not_null=["kind", "status", "progress", "message", "params", "cancel_requested"],
        defaults={"status": "queued", "progress": 0.0, "message": "", "cancel_requested": 0},
    )
    db["jobs"].create_index(["status"])


SCHEMA_VERSION = len(MIGRATION_NAMES)


def applied_migration_names(db: sqlite_utils.Database) -> list[str]:
    return [m.name for m in migrations.applied(db)]


def schema_version(db: sqlite_utils.Database) -> int:
    """Number of this set's migrations applied to ``db``."""
    return len(applied_migration_names(db))


def apply_migrations(db: sqlite_utils.Database) -> int:
    """Apply pending migrations in one IMMEDIATE transaction (safe if two processes open at once).

    Refuses a database written by a newer probewise (migrations this code does not know).
    Returns the schema version.
    """
    from probewise.store.db import transaction

    known = set(MIGRATION_NAMES)
    with transaction(db):
        unknown = [name for name in applied_migration_names(db) if name not in known]
        if unknown:
            raise StoreError(
                f"the database was written by a newer probewise (schema step {unknown[-1]!r}); "
                "upgrade probewise to open it"
            )
        migrations.apply(db)
        version = schema_version(db)
        db.execute(f"PRAGMA user_version = {int(version)}")
    return version
