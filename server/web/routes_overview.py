"""A project's overview: the site drawn, the model summarised, the revision trail with undo.

The page's main fragment is ``_overview.html`` (root ``#overview``); undo and restoring a
revision swap it whole, so the drawing, the tables and the trail always agree.
"""

from __future__ import annotations

from typing import Annotated, Any

import sqlite_utils
from fastapi import APIRouter, Form, Request
from starlette.responses import Response

from probewise.store import get_project, list_revisions, restore_revision, undo
from probewise.store.errors import NothingToUndo, StaleRevision
from probewise.web.deps import Db
from probewise.web.site_map import build_site_map
from probewise.web.summary import (
    boundary_names,
    boundary_rows,
    existing_by_method,
    layout_rows,
    readiness_steps,
    resolution_rows,
    zone_overrides,
)
from probewise.web.templating import render_action, render_page_or_fragment
from probewise.web.workflow import project_context

router = APIRouter(include_in_schema=False)


def overview_context(
    db: sqlite_utils.Database, project_id: int, notice: dict | None = None
) -> dict[str, Any]:
    project = get_project(db, project_id)
    model = project.model
    revisions = sorted(list_revisions(db, project_id), key=lambda r: r.number, reverse=True)
    methods = model.get("methods") or []
    return {
        **project_context(project, "overview"),
        "site_map": build_site_map(model),
        "units": model.get("units") or [],
        "zone_overrides": zone_overrides(model),
        "boundaries": boundary_rows(model),
        "bounds": model.get("bounds") or [],
        "methods": methods,
        "boundary_names": boundary_names(model),
        "resolution": resolution_rows(model),
        "existing": model.get("existing") or [],
        "existing_mix": existing_by_method(model),
        "layouts": layout_rows(model),
        "revisions": revisions,
        "readiness": readiness_steps(model),
        "notice": notice,
    }


def answer(
    request: Request,
    db: sqlite_utils.Database,
    project_id: int,
    *,
    notice: dict | None = None,
    status_code: int = 200,
) -> Response:
    return render_action(
        request,
        "overview.html",
        "_overview.html",
        lambda: overview_context(db, project_id, notice),
        redirect_to=f"/projects/{project_id}",
        status_code=status_code,
    )


@router.get("/projects/{project_id}")
def overview_page(request: Request, project_id: int, db: Db) -> Response:
    return render_page_or_fragment(
        request, "overview.html", "_overview.html", overview_context(db, project_id)
    )


@router.post("/projects/{project_id}/undo")
def undo_last_change(
    request: Request,
    project_id: int,
    db: Db,
    expected_revision: Annotated[int | None, Form()] = None,
) -> Response:
    try:
        revision = undo(db, project_id, expected_revision=expected_revision)
    except (StaleRevision, NothingToUndo) as exc:
        notice = {"kind": "error", "text": f"Not undone: {exc.message}."}
        return answer(request, db, project_id, notice=notice, status_code=409)
    notice = {"kind": "ok", "text": f"Last change undone; now at revision {revision}."}
    return answer(request, db, project_id, notice=notice)


@router.post("/projects/{project_id}/revisions/{number}/restore")
def restore_to_revision(
    request: Request,
    project_id: int,
    number: int,
    db: Db,
    expected_revision: Annotated[int | None, Form()] = None,
) -> Response:
    try:
        revision = restore_revision(db, project_id, number, expected_revision=expected_revision)
    except StaleRevision as exc:
        notice = {"kind": "error", "text": f"Not restored: {exc.message}."}
        return answer(request, db, project_id, notice=notice, status_code=409)
    text = f"Revision {number} restored as revision {revision}; nothing after it was lost."
    return answer(request, db, project_id, notice={"kind": "ok", "text": text})
