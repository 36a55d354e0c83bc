"""The projects list: open, duplicate, export, delete and restore projects; import a model file.

Every action answers an htmx request with the refreshed ``_projects.html`` fragment (and a
notice), and a plain form post with a redirect back to the list.
"""

from __future__ import annotations

from typing import Annotated, Any

import sqlite_utils
from fastapi import APIRouter, File, Request, UploadFile
from starlette.responses import RedirectResponse, Response

from probewise.app.new_project import STARTING_POINTS, new_model
from probewise.errors import InputError
from probewise.io.model_file import parse_model_text
from probewise.store import (
    create_project,
    delete_project,
    duplicate_project,
    get_project,
    list_projects,
    restore_project,
)
from probewise.web.deps import Db
from probewise.web.downloads import model_file_response
from probewise.web.edits import PostedForm
from probewise.web.polygon_text import parse_polygon_text
from probewise.web.templating import is_htmx, render_action, render_page_or_fragment

router = APIRouter(include_in_schema=False)

UPLOAD_FIELD = "model_file"


def projects_context(db: sqlite_utils.Database, **extra: Any) -> dict[str, Any]:
    everything = list_projects(db, include_deleted=True)
    return {
        "projects": [p for p in everything if not p.deleted],
        "deleted_projects": [p for p in everything if p.deleted],
        "notice": None,
        "import_error": None,
        "new_errors": {},
        "new_values": {"start": "blank"},
        "starting_points": STARTING_POINTS,
        **extra,
    }


def answer(
    request: Request, db: sqlite_utils.Database, *, status_code: int = 200, **extra: Any
) -> Response:
    return render_action(
        request,
        "projects.html",
        "_projects.html",
        lambda: projects_context(db, **extra),
        redirect_to="/",
        status_code=status_code,
    )


def parse_model_upload(content: bytes) -> dict[str, Any]:
    """Uploaded bytes -> a validated model; InputError names the field and the problem."""
    if not content.strip():
        raise InputError(UPLOAD_FIELD, "is empty")
    try:
        text = content.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(UPLOAD_FIELD, f"is not UTF-8 text (byte {exc.start})") from None
    try:
        return parse_model_text(text)
    except InputError as error:
        if error.field == "MODEL":  # the file as a whole: name the form field instead
            raise InputError(UPLOAD_FIELD, error.problem) from None
        raise


@router.get("/")
def projects_page(request: Request, db: Db) -> Response:
    return render_page_or_fragment(request, "projects.html", "_projects.html", projects_context(db))


@router.post("/projects/import")
def import_project(
    request: Request,
    db: Db,
    model_file: Annotated[UploadFile | None, File()] = None,
) -> Response:
    if model_file is None or not model_file.filename:
        error = InputError(UPLOAD_FIELD, "choose a model file (.json) to import")
        return answer(request, db, status_code=400, import_error=error)
    try:
        model = parse_model_upload(model_file.file.read())
    except InputError as error:
        return answer(
            request, db, status_code=400, import_error=error, upload_name=model_file.filename
        )
    project_id = create_project(db, model, message=f"Imported {model_file.filename}")
    project = get_project(db, project_id)
    notice = {
        "kind": "ok",
        "text": f"Imported \u201c{project.name}\u201d from {model_file.filename}.",
        "project_id": project_id,
    }
    return answer(request, db, notice=notice)


def model_from_form(db: sqlite_utils.Database, form: Any) -> dict[str, Any]:
    """The new project's model from the form; InputError names the form field at fault."""
    name = str(form.get("name") or "").strip()
    if name and any(p.name == name for p in list_projects(db, include_deleted=True)):
        raise InputError("name", f"a project named \u201c{name}\u201d already exists")
    outline_text = str(form.get("outline") or "")
    outline = parse_polygon_text(outline_text, "outline") if outline_text.strip() else None
    try:
        return new_model(
            name,
            crs=str(form.get("crs") or ""),
            currency=str(form.get("currency") or ""),
            outline=outline,
            start=str(form.get("start") or "blank"),
        )
    except InputError as error:
        field = error.field.split(".")[0].split("[")[0]
        raise InputError("outline" if field == "site" else field, error.problem) from None


@router.post("/projects/new")
def new_project(request: Request, db: Db, form: PostedForm) -> Response:
    values = {k: str(form.get(k) or "") for k in ("name", "crs", "currency", "outline", "start")}
    try:
        model = model_from_form(db, form)
    except InputError as error:
        errors = {error.field: error.problem}
        return answer(request, db, status_code=400, new_errors=errors, new_values=values)
    project_id = create_project(db, model, message="New project")
    if is_htmx(request):
        return Response(status_code=200, headers={"HX-Redirect": f"/projects/{project_id}"})
    return RedirectResponse(f"/projects/{project_id}", status_code=303)


@router.post("/projects/{project_id}/duplicate")
def duplicate(request: Request, project_id: int, db: Db) -> Response:
    new_id = duplicate_project(db, project_id)
    copy = get_project(db, new_id)
    notice = {"kind": "ok", "text": f"Duplicated as \u201c{copy.name}\u201d.", "project_id": new_id}
    return answer(request, db, notice=notice)


@router.post("/projects/{project_id}/delete")
def delete(request: Request, project_id: int, db: Db) -> Response:
    name = get_project(db, project_id).name
    delete_project(db, project_id)
    notice = {
        "kind": "ok",
        "text": f"Deleted \u201c{name}\u201d. It stays under Recently deleted until restored.",
    }
    return answer(request, db, notice=notice)


@router.post("/projects/{project_id}/restore")
def restore(request: Request, project_id: int, db: Db) -> Response:
    restore_project(db, project_id)
    name = get_project(db, project_id).name
    notice = {"kind": "ok", "text": f"Restored \u201c{name}\u201d.", "project_id": project_id}
    return answer(request, db, notice=notice)


@router.get("/projects/{project_id}/export")
def export(project_id: int, db: Db) -> Response:
    return model_file_response(db, project_id)
