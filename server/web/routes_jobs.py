"""The optimiser as a background job: start, watch (a progress bar that polls), cancel.

``POST /projects/{id}/optimise`` starts a job (``probewise.app.optimiser_jobs``); the page polls
``GET /projects/{id}/jobs/{job}`` every second (``_options_job.html``) until the job ends.
A test checks that pages keep answering while the optimiser runs.
"""

from __future__ import annotations

import math
from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import RedirectResponse, Response

from probewise.app.optimiser_jobs import (
    KIND,
    latest_optimiser_job,
    running_job_of,
    start_optimiser,
)
from probewise.errors import InputError
from probewise.numbers import to_number
from probewise.store import (
    Job,
    get_job,
    get_project,
    request_cancel,
)
from probewise.store.errors import JobNotFound
from probewise.web.deps import Db
from probewise.web.edits import FormReader, PostedForm
from probewise.web.templating import is_htmx, render

router = APIRouter(include_in_schema=False)


def job_response(
    request: Request,
    db: sqlite_utils.Database,
    project_id: int,
    job: Job | None,
    *,
    watching: bool = False,
    notice: dict | None = None,
    status_code: int = 200,
) -> Response:
    """The progress fragment for htmx; a plain form post goes back to the Options page."""
    if request.method == "POST" and not is_htmx(request) and status_code < 400:
        return RedirectResponse(f"/projects/{project_id}/options", status_code=303)
    currency = get_project(db, project_id).model.get("currency") or ""
    return render(
        request,
        "_options_job.html",
        {
            "project_id": project_id,
            "job": job,
            "job_watching": watching,
            "job_notice": notice,
            "currency": currency,
        },
        status_code=status_code,
    )


@router.post("/projects/{project_id}/optimise")
def start_optimiser_route(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    reader = FormReader(form)
    project = get_project(db, project_id)
    if project.deleted:
        notice = {"kind": "error", "text": "This project is deleted (read only)."}
        return job_response(request, db, project_id, None, notice=notice, status_code=409)
    method_ids = [m["id"] for m in project.model.get("methods") or []]
    objective = (reader.raw("objective") or "gain").strip()
    raw_budget = (reader.raw("budget") or "").strip()
    budget = to_number(raw_budget, decimal_comma=True, money=True) if raw_budget else None
    chosen = [m for m in reader.all("methods") if m]
    name = reader.text("name", "name", required=False, max_len=120)
    problem = None
    net_value = objective == "net-value"
    if reader.problems:
        problem = reader.problems[0]
    elif objective not in ("gain", "net-value"):
        problem = InputError("objective", "must be gain or net-value")
    elif net_value and not project.model.get("elements"):
        problem = InputError("elements", "the model has no design elements to value")
    elif (raw_budget or not net_value) and (
        budget is None or not (math.isfinite(budget) and budget > 0)
    ):
        problem = InputError("budget", "must be a positive amount, e.g. 30000")
    elif not chosen:
        problem = InputError("methods", "choose at least one method")
    elif any(m not in method_ids for m in chosen):
        bad = next(m for m in chosen if m not in method_ids)
        problem = InputError("methods", f"there is no method {bad!r}")
    if problem is not None:
        notice = {"kind": "error", "text": f"Not started: {problem.field}: {problem.problem}."}
        return job_response(
            request,
            db,
            project_id,
            latest_optimiser_job(db, project_id),
            notice=notice,
            status_code=422,
        )
    methods = chosen if set(chosen) != set(method_ids) else []
    try:
        job_id = start_optimiser(
            db, project_id, None if budget is None else float(budget), methods, name, objective
        )
    except InputError as exc:
        notice = {"kind": "error", "text": f"Not started: {exc.problem}."}
        return job_response(
            request,
            db,
            project_id,
            latest_optimiser_job(db, project_id),
            notice=notice,
            status_code=409,
            watching=running_job_of(project_id) is not None,
        )
    return job_response(request, db, project_id, get_job(db, job_id), watching=True)


def project_job(db: sqlite_utils.Database, project_id: int, job_id: int) -> Job:
    job = get_job(db, job_id)
    if job.project_id != project_id or job.kind != KIND:
        raise JobNotFound(f"project {project_id} has no optimiser job {job_id}")
    return job


@router.get("/projects/{project_id}/jobs/{job_id}")
def job_status(request: Request, project_id: int, job_id: int, db: Db) -> Response:
    """The progress fragment; ``watching`` marks the polling page's requests."""
    job = project_job(db, project_id, job_id)
    watching = request.query_params.get("watching") == "1"
    return job_response(request, db, project_id, job, watching=watching)


@router.get("/api/projects/{project_id}/jobs/{job_id}", include_in_schema=False)
def job_status_json(project_id: int, job_id: int, db: Db) -> dict[str, Any]:
    job = project_job(db, project_id, job_id)
    return {
        "id": job.id,
        "status": job.status,
        "progress": job.progress,
        "message": job.message,
        "result": job.result,
    }


@router.post("/projects/{project_id}/jobs/{job_id}/cancel")
def cancel_job(request: Request, project_id: int, job_id: int, db: Db) -> Response:
    project_job(db, project_id, job_id)
    job = request_cancel(db, job_id)
    return job_response(request, db, project_id, job, watching=not job.finished)
