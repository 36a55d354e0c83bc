"""Load the invented demo projects into a database that has never held a project."""

from __future__ import annotations

import json
from collections.abc import Sequence
from pathlib import Path

import sqlite_utils

from probewise.store.db import transaction
from probewise.store.projects import create_project


def seed_demo_if_empty(db: sqlite_utils.Database, demo_path: Path) -> int | None:
    """Import the demo model file when no project was ever created; returns its id, else None.

    Deleted projects count as created (soft delete keeps them), so a user who binned the demo
    does not get it back on the next start.
    """
    ids = seed_demos_if_empty(db, [demo_path])
    return ids[0] if ids else None


def seed_demos_if_empty(db: sqlite_utils.Database, demo_paths: Sequence[Path]) -> list[int]:
    """Import the demo model files, in order and in one transaction, when no project was ever
    created; returns their ids (the first demo is project 1), else an empty list."""
    with transaction(db):
        if db["projects"].count > 0:
            return []
        models = [json.loads(Path(p).read_text(encoding="utf-8")) for p in demo_paths]
        return [create_project(db, m, message="Demo project (invented data)") for m in models]
