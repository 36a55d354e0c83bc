"""File downloads: the model file of a project, named after it."""

from __future__ import annotations

import re
import unicodedata
from urllib.parse import quote

import sqlite_utils
from starlette.responses import Response

from probewise.io.model_file import dump_model
from probewise.store import export_project


def slug_of(name: str, fallback: str = "project") -> str:
    """'Culvert 3 — phase 2' -> 'culvert-3-phase-2' (ASCII, safe in a file name)."""
    ascii_name = unicodedata.normalize("NFKD", name).encode("ascii", "ignore").decode()
    slug = re.sub(r"[^a-z0-9]+", "-", ascii_name.lower()).strip("-")
    return slug[:80] or fallback


def attachment_headers(filename: str) -> dict[str, str]:
    return {
        "Content-Disposition": (
            f"attachment; filename=\"{filename}\"; filename*=UTF-8''{quote(filename)}"
        )
    }


def model_file_response(db: sqlite_utils.Database, project_id: int) -> Response:
    """The project's model file ("probewise/1" JSON) as a download."""
    model = export_project(db, project_id)
    filename = f"{slug_of(str(model.get('name', '')), f'project-{project_id}')}.json"
    return Response(
        dump_model(model),
        media_type="application/json",
        headers=attachment_headers(filename),
    )
