"""JSON API over the stored projects (listed in the OpenAPI schema at /openapi.json).

Errors: ``{"detail": "message"}``, or ``{"detail": [{"field", "problem"}]}`` for bad input
(422). A stale ``expected_revision`` gives 409 and changes nothing.

``GET /api/projects/{id}/evaluation`` answers the document of ``probewise evaluate --json``
(docs/model-file.md), computed once per project revision (server/app/results.py).
"""

from __future__ import annotations

from typing import Annotated, Any

import sqlite_utils
from fastapi import APIRouter, Body, Query
from fastapi import Path as PathParam
from pydantic import BaseModel, Field
from starlette.responses import JSONResponse, Response

from probewise.app.contract import evaluation_json
from probewise.app.results import project_results
from probewise.core.evaluate import Evaluation
from probewise.errors import InputError
from probewise.store import (
    create_project,
    delete_project,
    duplicate_project,
    get_project,
    list_projects,
    list_revisions,
    restore_project,
    save_project,
    undo,
)
from probewise.web.deps import Db
from probewise.web.downloads import model_file_response

SQLITE_MAX_INTEGER = 2**63 - 1  # a larger id cannot even be looked up


class ErrorOut(BaseModel):
    detail: str


class FieldProblem(BaseModel):
    field: str = Field(description="where: a dotted/indexed path such as units[0].name")
    problem: str


class FieldErrorsOut(BaseModel):
    detail: list[FieldProblem]


# Every operation may answer these: bad input field by field (the app's own error form, not
# FastAPI's default), and the local-server guards (server/web/security.py).
COMMON_RESPONSES: dict[int | str, dict[str, Any]] = {
    422: {"model": FieldErrorsOut, "description": "invalid input, field by field"},
    400: {"model": ErrorOut, "description": "bad request, e.g. a Host header not this server's"},
    403: {"model": ErrorOut, "description": "cross-origin change refused"},
    413: {"model": ErrorOut, "description": "request body over the size limit"},
}
router = APIRouter(prefix="/api", tags=["projects"], responses=COMMON_RESPONSES)

ProjectId = Annotated[
    int,
    PathParam(
        ge=1,
        le=SQLITE_MAX_INTEGER,
        description="the project's id (from the list)",
        examples=[1],
    ),
]


class ProjectSummaryOut(BaseModel):
    id: int
    name: str
    revision: int
    updated_at: str
    deleted: bool
    n_layouts: int


class ProjectOut(BaseModel):
    id: int
    name: str
    revision: int
    updated_at: str
    model: dict[str, Any] = Field(description='the model file ("probewise/1")')


class RevisionStateOut(BaseModel):
    id: int
    revision: int


class DeletedStateOut(BaseModel):
    id: int
    deleted: bool


class RevisionOut(BaseModel):
    number: int
    created_at: str
    message: str
    name: str


class ProjectUpdateIn(BaseModel):
    model: dict[str, Any] = Field(description="the whole model file after the edit")
    expected_revision: int = Field(description="the revision the edit was made on")


class UndoIn(BaseModel):
    expected_revision: int | None = None


class BoundaryMetricsOut(BaseModel):
    std_mean_m: float
    width90_mean_m: float
    uncertain_volume_m3: float
    confident_fraction: float | None = Field(
        description="null for a boundary that is not of interest (it has no tolerance)"
    )


class StateMetricsOut(BaseModel):
    boundaries: dict[str, BoundaryMetricsOut] = Field(description="by unit name, top down")


class PlannedProbeOut(BaseModel):
    id: str
    method: str
    x: float
    y: float
    depth_m: float
    observes: list[str] = Field(description="units whose base the probe reads")


class LayoutEvaluationOut(StateMetricsOut):
    name: str
    cost: float
    metres: float
    duration_days: float
    information_gain_bits: float
    gain_per_cost: float | None = Field(description="null when the layout costs nothing")
    pareto: bool
    probes: list[PlannedProbeOut]


class EvaluationOut(BaseModel):
    baseline: StateMetricsOut
    layouts: list[LayoutEvaluationOut]
    notice: str | None = Field(
        default=None, description="present when the evaluation grid was coarsened"
    )
    conditioning: dict[str, Any] | None = Field(
        default=None,
        description="how the existing readings were conditioned on: method exact or local",
    )


NOT_FOUND = {404: {"model": ErrorOut, "description": "no such project"}}
INVALID = {422: {"model": FieldErrorsOut, "description": "invalid input, field by field"}}
STALE = {409: {"model": ErrorOut, "description": "the project changed since that revision"}}


def prefixed(error: InputError, prefix: str) -> InputError:
    field = f"{prefix}.{error.field}" if error.field else prefix
    return InputError(field, error.problem)


def as_text(value: Any) -> str:
    return value.isoformat() if hasattr(value, "isoformat") else str(value or "")


def project_out(db: sqlite_utils.Database, project_id: int) -> ProjectOut:
    project = get_project(db, project_id)
    return ProjectOut(
        id=project.id,
        name=project.name,
        revision=project.revision,
        updated_at=as_text(project.updated_at),
        model=project.model,
    )


def state_out(db: sqlite_utils.Database, project_id: int) -> RevisionStateOut:
    return RevisionStateOut(id=project_id, revision=get_project(db, project_id).revision)


@router.get("/projects", response_model=list[ProjectSummaryOut])
def api_list_projects(
    db: Db,
    include_deleted: Annotated[bool, Query(description="also list projects in the bin")] = False,
) -> list[ProjectSummaryOut]:
    return [
        ProjectSummaryOut(
            id=p.id,
            name=p.name,
            revision=p.revision,
            updated_at=as_text(p.updated_at),
            deleted=bool(p.deleted),
            n_layouts=p.n_layouts,
        )
        for p in list_projects(db, include_deleted=include_deleted)
    ]


@router.post("/projects", status_code=201, response_model=RevisionStateOut, responses={**INVALID})
def api_create_project(
    db: Db,
    model: Annotated[dict[str, Any], Body(description='a model file ("probewise/1")')],
) -> RevisionStateOut:
    project_id = create_project(db, model)  # validates: InputError -> 422
    return state_out(db, project_id)


@router.get("/projects/{project_id}", response_model=ProjectOut, responses={**NOT_FOUND})
def api_get_project(project_id: ProjectId, db: Db) -> ProjectOut:
    return project_out(db, project_id)


@router.put(
    "/projects/{project_id}",
    response_model=RevisionStateOut,
    responses={**NOT_FOUND, **STALE, **INVALID},
)
def api_save_project(project_id: ProjectId, body: ProjectUpdateIn, db: Db) -> RevisionStateOut:
    get_project(db, project_id)  # 404 before 422 when the project does not exist
    try:
        revision = save_project(
            db,
            project_id,
            body.model,
            expected_revision=body.expected_revision,
            message="Saved through the API",
        )
    except InputError as error:
        raise prefixed(error, "model") from None
    return RevisionStateOut(id=project_id, revision=revision)


@router.post(
    "/projects/{project_id}/undo",
    response_model=RevisionStateOut,
    responses={**NOT_FOUND, **STALE},
)
def api_undo(
    project_id: ProjectId,
    db: Db,
    body: UndoIn | None = None,
) -> RevisionStateOut:
    expected = body.expected_revision if body else None
    revision = undo(db, project_id, expected_revision=expected)
    return RevisionStateOut(id=project_id, revision=revision)


@router.post(
    "/projects/{project_id}/duplicate",
    status_code=201,
    response_model=RevisionStateOut,
    responses={**NOT_FOUND},
)
def api_duplicate(project_id: ProjectId, db: Db) -> Any:
    return state_out(db, duplicate_project(db, project_id))


@router.delete("/projects/{project_id}", response_model=DeletedStateOut, responses={**NOT_FOUND})
def api_delete(project_id: ProjectId, db: Db) -> DeletedStateOut:
    delete_project(db, project_id)
    return DeletedStateOut(id=project_id, deleted=True)


@router.post(
    "/projects/{project_id}/restore", response_model=DeletedStateOut, responses={**NOT_FOUND}
)
def api_restore(project_id: ProjectId, db: Db) -> DeletedStateOut:
    restore_project(db, project_id)
    return DeletedStateOut(id=project_id, deleted=False)


@router.get(
    "/projects/{project_id}/export",
    responses={
        200: {"content": {"application/json": {}}, "description": "the model file"},
        **NOT_FOUND,
    },
    response_class=Response,
)
def api_export(project_id: ProjectId, db: Db) -> Response:
    return model_file_response(db, project_id)


@router.get(
    "/projects/{project_id}/revisions",
    response_model=list[RevisionOut],
    responses={**NOT_FOUND},
)
def api_revisions(project_id: ProjectId, db: Db) -> list[RevisionOut]:
    get_project(db, project_id)
    return [
        RevisionOut(
            number=r.number, created_at=as_text(r.created_at), message=r.message, name=r.name
        )
        for r in list_revisions(db, project_id)
    ]


@router.get(
    "/projects/{project_id}/evaluation",
    responses={
        200: {"model": EvaluationOut, "description": "as `probewise evaluate --json`"},
        **NOT_FOUND,
        **INVALID,
    },
    response_class=JSONResponse,
)
def api_evaluation(project_id: ProjectId, db: Db) -> JSONResponse:
    """Baseline and every layout's cost, duration and information gain (current revision)."""
    entry = project_results(db, project_id)

    def build() -> dict[str, Any]:
        evaluator = entry.evaluator  # InputError (422) when the grid is empty
        evaluation = Evaluation(
            evaluator.grid,
            entry.project.ground.boundary_names,
            evaluator.baseline,
            entry.results(),
            evaluator.grid_notice,
            evaluator.conditioning,
        )
        return evaluation_json(evaluation)

    return JSONResponse(entry.memo(("api-evaluation",), build))
