"""Load the invented demo project into a database that has never held a project."""

from __future__ import annotations

import json
from pathlib import Path

import sqlite_utils

from probewise.store.db import transaction
from probewise.store.projects import create_project


def seed_demo_if_empty(db: sqlite_utils.Database, demo_path: Path) -> int | None:
    """Import the demo model file when no project was ever created; returns its id, else None.

    Deleted projects count as created (soft delete keeps them), so a user who binned the demo
    does not get it back on the next start.
    """
    with transaction(db):
        if db["projects"].count > 0:
            return None
        model = json.loads(Path(demo_path).read_text(encoding="utf-8"))
        return create_project(db, model, message="Demo project (invented data)")
