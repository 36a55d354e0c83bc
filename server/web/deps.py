"""Request dependencies: the app's one database connection (the store serialises threads)."""

from __future__ import annotations

import threading
from pathlib import Path
from typing import Annotated

import sqlite_utils
from fastapi import Depends, Request

from probewise.store import open_db

_open_lock = threading.Lock()


def database_of(app) -> sqlite_utils.Database:
    """The app's connection, opened on first use (the lifespan normally opens it first)."""
    db = getattr(app.state, "db", None)
    if db is None:
        with _open_lock:
            db = getattr(app.state, "db", None)
            if db is None:
                db = open_db(Path(app.state.db_path))
                app.state.db = db
    return db


def get_db(request: Request) -> sqlite_utils.Database:
    """FastAPI dependency behind ``Db``."""
    return database_of(request.app)


# In a route signature: ``def page(db: Db): ...``
Db = Annotated[sqlite_utils.Database, Depends(get_db)]
