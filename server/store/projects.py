"""Projects and their revision trail.

A project is one model-file document. Every saved state is stored whole as a numbered revision
(1, 2, 3...), never changed or removed afterwards; the project's current model is its latest
revision. Undo and restore add a new revision with older content, so the undone state stays in
the trail.

Undo rule (an editor's multi-step undo over an append-only trail). Each revision records the
revision an undo from it goes back to (``undo_to``):
- create/duplicate: nothing (undo there raises NothingToUndo);
- save and restore_revision at head h: h (the state just before the write);
- undo at head h restoring revision t: t's own ``undo_to``, so a second undo goes one step
  further back instead of undoing the undo.
So undo, undo, undo walks back through the edits one by one; an edit after an undo starts a new
chain from there (the undone edits stay in the trail and restore_revision brings any back).
"""

from __future__ import annotations

import copy
import json
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import sqlite_utils

from probewise.store.db import read_snapshot, transaction, utc_now

if TYPE_CHECKING:
    from probewise.io.model_file import ValidModel
from probewise.store.errors import (
    NothingToUndo,
    ProjectDeleted,
    ProjectNotFound,
    RevisionNotFound,
    StaleRevision,
)


@dataclass(frozen=True)
class ProjectSummary:
    id: int
    name: str
    revision: int
    updated_at: str
    deleted: bool
    n_layouts: int


@dataclass(frozen=True)
class StoredProject:
    """A project's current state; ``can_undo`` is False when undo would raise NothingToUndo."""

    id: int
    name: str
    revision: int
    updated_at: str
    model: dict
    deleted: bool = False
    can_undo: bool = False


@dataclass(frozen=True)
class RevisionInfo:
    number: int
    created_at: str
    message: str
    name: str


def _validate(model: dict | ValidModel) -> dict:
    """The store never holds an invalid model: raises probewise.errors.InputError, else normalises.

    A ``ValidModel`` has been checked already (``probewise.io.model_file.check_model``).
    """
    from probewise.io.model_file import ValidModel, validate_model

    if isinstance(model, ValidModel):
        return model.document
    return validate_model(model)


def _dumps(model: dict) -> str:
    return json.dumps(model, ensure_ascii=False, separators=(",", ":"))


def _model_name(model: dict) -> str:
    return str(model.get("name") or "")


def _project_row(db: sqlite_utils.Database, project_id: int) -> dict[str, Any]:
    rows = list(db["projects"].rows_where("id = ?", [project_id]))
    if not rows:
        raise ProjectNotFound(f"no project with id {project_id}")
    return rows[0]


def _writable_row(db: sqlite_utils.Database, project_id: int) -> dict[str, Any]:
    row = _project_row(db, project_id)
    if row["deleted_at"] is not None:
        raise ProjectDeleted(f"project {project_id} is deleted; restore it before changing it")
    return row


def _revision_row(db: sqlite_utils.Database, project_id: int, number: int) -> dict[str, Any]:
    rows = list(db["revisions"].rows_where("project_id = ? AND number = ?", [project_id, number]))
    if not rows:
        raise RevisionNotFound(f"project {project_id} has no revision {number}")
    return rows[0]


def _undo_to(head: dict[str, Any]) -> int | None:
    """The undo rule (see the module docstring): the revision an undo at revision row ``head``
    restores, or None when ``head`` starts the project's history (nothing to undo)."""
    return head["undo_to"]


def _check_expected(row: dict[str, Any], expected_revision: int | None) -> None:
    if expected_revision is not None and row["revision"] != expected_revision:
        raise StaleRevision(row["revision"], expected_revision)


def _append_revision(
    db: sqlite_utils.Database,
    project_id: int,
    number: int,
    model: dict,
    *,
    message: str,
    kind: str,
    undo_to: int | None,
    undo_label: str | None,
    restored_from: int | None = None,
) -> int:
    """Insert revision ``number`` and make it the project's current state (inside a transaction)."""
    now = utc_now()
    name = _model_name(model)
    db["revisions"].insert(
        {
            "project_id": project_id,
            "number": number,
            "created_at": now,
            "message": message,
            "name": name,
            "kind": kind,
            "undo_to": undo_to,
            "undo_label": undo_label,
            "restored_from": restored_from,
            "n_layouts": len(model.get("layouts") or []),
            "model": _dumps(model),
        }
    )
    db["projects"].update(project_id, {"name": name, "revision": number, "updated_at": now})
    return number


def _create(db: sqlite_utils.Database, model: dict, message: str, kind: str) -> int:
    now = utc_now()
    with transaction(db):
        table = db["projects"].insert(
            {
                "name": _model_name(model),
                "created_at": now,
                "updated_at": now,
                "deleted_at": None,
                "revision": 0,
            }
        )
        project_id = int(table.last_pk)
        _append_revision(
            db, project_id, 1, model, message=message, kind=kind, undo_to=None, undo_label=None
        )
    return project_id


def create_project(
    db: sqlite_utils.Database, model: dict, message: str = "Imported model file"
) -> int:
    """Validate ``model`` and store it as revision 1 of a new project; returns the project id."""
    return _create(db, _validate(model), message, "create")


def list_projects(db: sqlite_utils.Database, include_deleted: bool = False) -> list[ProjectSummary]:
    """Projects, most recently changed first; deleted ones only when asked for."""
    where = "" if include_deleted else "WHERE p.deleted_at IS NULL"
    sql = f"""
        SELECT p.id, p.name, p.revision, p.updated_at, p.deleted_at, r.n_layouts
        FROM projects p JOIN revisions r ON r.project_id = p.id AND r.number = p.revision
        {where}
        ORDER BY p.updated_at DESC, p.id DESC
    """
    with read_snapshot(db):
        rows = list(db.query(sql))
    return [
        ProjectSummary(
            id=r["id"],
            name=r["name"],
            revision=r["revision"],
            updated_at=r["updated_at"],
            deleted=r["deleted_at"] is not None,
            n_layouts=r["n_layouts"] or 0,
        )
        for r in rows
    ]


def get_project(db: sqlite_utils.Database, project_id: int) -> StoredProject:
    """The project's current state (deleted projects too, flagged, so they can be viewed)."""
    with read_snapshot(db):
        row = _project_row(db, project_id)
        rev = _revision_row(db, project_id, row["revision"])
    return StoredProject(
        id=row["id"],
        name=row["name"],
        revision=row["revision"],
        updated_at=row["updated_at"],
        model=json.loads(rev["model"]),
        deleted=row["deleted_at"] is not None,
        can_undo=_undo_to(rev) is not None,
    )


def save_project(
    db: sqlite_utils.Database,
    project_id: int,
    model: dict | ValidModel,
    expected_revision: int,
    message: str,
) -> int:
    """Store ``model`` as the next revision if the project is still at ``expected_revision``.

    Raises StaleRevision (store unchanged) when someone else saved in between, InputError when
    the model is invalid (a ``ValidModel`` is not checked again). Returns the new revision
    number.
    """
    normalised = _validate(model)
    message = message or "Edited"
    with transaction(db):
        row = _writable_row(db, project_id)
        _check_expected(row, expected_revision)
        head = row["revision"]
        return _append_revision(
            db,
            project_id,
            head + 1,
            normalised,
            message=message,
            kind="save",
            undo_to=head,
            undo_label=message,
        )


def undo(db: sqlite_utils.Database, project_id: int, expected_revision: int | None = None) -> int:
    """Add a revision holding the state before the last edit (see the module's undo rule)."""
    with transaction(db):
        row = _writable_row(db, project_id)
        _check_expected(row, expected_revision)
        head_number = row["revision"]
        head = _revision_row(db, project_id, head_number)
        target_number = _undo_to(head)
        if target_number is None:
            raise NothingToUndo(
                f"nothing to undo: revision {head_number} is the start of this project's history"
            )
        target = _revision_row(db, project_id, target_number)
        model = _validate(json.loads(target["model"]))
        return _append_revision(
            db,
            project_id,
            head_number + 1,
            model,
            message=f"Undo: {head['undo_label']}",
            kind="undo",
            undo_to=target["undo_to"],
            undo_label=target["undo_label"],
            restored_from=target["number"],
        )


def can_undo(db: sqlite_utils.Database, project_id: int) -> bool:
    """True exactly when ``undo`` would not raise NothingToUndo: the current revision has an
    edit (a save, a restore, or an undo that can go further back) to take back.

    Whether the project is deleted does not enter (undo then raises ProjectDeleted; pages
    hide their edit controls for deleted projects).
    """
    with read_snapshot(db):
        row = _project_row(db, project_id)
        return _undo_to(_revision_row(db, project_id, row["revision"])) is not None


def list_revisions(db: sqlite_utils.Database, project_id: int) -> list[RevisionInfo]:
    """The whole trail, oldest first (the last entry is the current revision)."""
    with read_snapshot(db):
        _project_row(db, project_id)
        rows = list(
            db["revisions"].rows_where(
                "project_id = ?",
                [project_id],
                order_by="number",
                select="number, created_at, message, name",
            )
        )
    return [RevisionInfo(r["number"], r["created_at"], r["message"], r["name"]) for r in rows]


def get_revision(db: sqlite_utils.Database, project_id: int, number: int) -> dict:
    """The model as stored in revision ``number``."""
    with read_snapshot(db):
        _project_row(db, project_id)
        return json.loads(_revision_row(db, project_id, number)["model"])


def restore_revision(
    db: sqlite_utils.Database,
    project_id: int,
    number: int,
    expected_revision: int | None = None,
) -> int:
    """Add a revision with the content of revision ``number``; an undo afterwards reverts it."""
    with transaction(db):
        row = _writable_row(db, project_id)
        _check_expected(row, expected_revision)
        target = _revision_row(db, project_id, number)
        model = _validate(json.loads(target["model"]))
        head = row["revision"]
        message = f"Restored revision {number}"
        return _append_revision(
            db,
            project_id,
            head + 1,
            model,
            message=message,
            kind="restore",
            undo_to=head,
            undo_label=message,
            restored_from=number,
        )


def duplicate_project(
    db: sqlite_utils.Database, project_id: int, new_name: str | None = None
) -> int:
    """A new project starting from this one's current model; returns the new id."""
    source = get_project(db, project_id)
    name = new_name if new_name else f"{source.name} (copy)"
    model = copy.deepcopy(source.model)
    model["name"] = name
    message = f"Duplicated from {source.name!r} (project {source.id}, revision {source.revision})"
    return _create(db, _validate(model), message, "duplicate")


def delete_project(db: sqlite_utils.Database, project_id: int) -> None:
    """Move the project to the bin: hidden from list_projects, revisions kept, restorable."""
    with transaction(db):
        row = _project_row(db, project_id)
        if row["deleted_at"] is None:
            db["projects"].update(project_id, {"deleted_at": utc_now()})


def restore_project(db: sqlite_utils.Database, project_id: int) -> None:
    """Take the project out of the bin (no-op if it is not deleted)."""
    with transaction(db):
        row = _project_row(db, project_id)
        if row["deleted_at"] is not None:
            db["projects"].update(project_id, {"deleted_at": None})


def export_project(db: sqlite_utils.Database, project_id: int) -> dict:
    """The current model-file document."""
    return get_project(db, project_id).model
