"""The optimiser as a background job: start, watch (a progress bar that polls), cancel.

``POST /projects/{id}/optimise`` records a job (server.store.jobs) and runs
``server.core.optimise.optimise`` in a daemon thread; the page polls
``GET /projects/{id}/jobs/{job}`` every second (``_options_job.html``) until the job ends.
The worker reports progress at most a few times a second and checks for a cancel request
between picks. On success the layout is saved into the project as a new revision, against
the revision current at that moment (retried once if someone saved in between); on failure
or cancel the project is left unchanged. One optimiser runs per project at a time.

The optimiser's heavy parts are numpy and numba, so page requests keep being served while
it runs (a test checks that the overview answers meanwhile).
"""

from __future__ import annotations

import copy
import logging
import math
import re
import threading
import time
from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import RedirectResponse, Response

from server.core.optimise import OptimiseCancelled, OptimiseError, OptimiseOptions, optimise
from server.errors import InputError
from server.model_file import unique_layout_name
from server.store import (
    Job,
    StaleRevision,
    create_job,
    get_job,
    get_project,
    is_cancel_requested,
    list_jobs,
    request_cancel,
    save_project,
    update_job,
)
from server.store.errors import JobNotFound, StoreError
from server.to_core import to_core
from server.web.deps import Db
from server.web.edits import FormReader, PostedForm, parse_number
from server.web.templating import is_htmx, render

log = logging.getLogger(__name__)

router = APIRouter(include_in_schema=False)

KIND = "optimise"
PROGRESS_INTERVAL_S = 0.25  # at most four progress writes a second
CANCEL_CHECK_INTERVAL_S = 0.2
MAX_CURVE_POINTS = 400

_running: dict[int, int] = {}  # project id -> job id of the optimiser running in this process
_running_lock = threading.Lock()


# ---------------------------------------------------------------- queries


def latest_optimiser_job(db: sqlite_utils.Database, project_id: int) -> Job | None:
    """The project's most recent optimiser job, if any."""
    jobs = list_jobs(db, project_id, KIND, limit=1)
    return jobs[0] if jobs else None


def running_job_of(project_id: int) -> int | None:
    with _running_lock:
        return _running.get(project_id)


# ---------------------------------------------------------------- the worker


def thin_curve(curve, limit: int = MAX_CURVE_POINTS) -> list[dict[str, float]]:
    """The cost-gain curve as JSON points, thinned evenly to at most ``limit`` (ends kept)."""
    points = [(float(c), float(g)) for c, g in curve]
    if len(points) > limit:
        step = (len(points) - 1) / (limit - 1)
        points = [points[round(i * step)] for i in range(limit)]
    return [{"cost": round(c, 2), "information_gain_bits": round(g, 6)} for c, g in points]


def save_result(
    db: sqlite_utils.Database, project_id: int, layout_doc: dict[str, Any]
) -> tuple[str, int]:
    """Append the layout to the project's current revision; retry once if it moved on."""
    for attempt in range(2):
        stored = get_project(db, project_id)
        model = copy.deepcopy(stored.model)
        doc = dict(layout_doc, name=unique_layout_name(model, layout_doc["name"]))
        model.setdefault("layouts", []).append(doc)
        try:
            revision = save_project(
                db, project_id, model, stored.revision, f"Optimiser: layout {doc['name']}"
            )
            return doc["name"], revision
        except StaleRevision:
            if attempt == 1:
                raise
    raise AssertionError("unreachable")  # pragma: no cover


def run_optimiser_job(db: sqlite_utils.Database, job_id: int, project_id: int) -> None:
    """The worker thread's body: never raises; the job records how it ended."""
    try:
        job = get_job(db, job_id)
        if job.finished:  # cancelled before it started
            return
        params = job.params
        update_job(db, job_id, status="running", progress=0.0, message="starting")
        stored = get_project(db, project_id)
        project = to_core(stored.model)
        options = OptimiseOptions(
            budget=float(params["budget"]),
            methods=tuple(params["methods"]) or None,
        )
        last = {"progress": 0.0, "cancel": 0.0}
        cancelled = {"flag": False}

        def progress(fraction: float, message: str) -> None:
            now = time.monotonic()
            if now - last["progress"] < PROGRESS_INTERVAL_S and fraction < 1.0:
                return
            last["progress"] = now
            update_job(db, job_id, progress=min(max(float(fraction), 0.0), 1.0), message=message)

        def should_stop() -> bool:
            now = time.monotonic()
            if now - last["cancel"] >= CANCEL_CHECK_INTERVAL_S:
                last["cancel"] = now
                cancelled["flag"] = is_cancel_requested(db, job_id)
            return cancelled["flag"]

        name = params.get("name") or f"Optimised for {params['budget']:,.0f}"
        result = optimise(project, options, progress=progress, should_stop=should_stop, name=name)
        if is_cancel_requested(db, job_id):
            raise OptimiseCancelled()
        curve = thin_curve(result.curve)
        layout_doc: dict[str, Any] = {
            "name": name,
            "origin": "optimised",
            "description": (
                f"Proposed by the optimiser for a budget of {params['budget']:,.0f}"
                + (f" with {', '.join(params['methods'])}" if params["methods"] else "")
            ),
            "budget": float(params["budget"]),
            "optimiser_curve": curve,
            "probes": [
                {"id": p.id, "method": p.method, "x": round(p.x, 2), "y": round(p.y, 2)}
                for p in result.layout.probes
            ],
        }
        saved_name, revision = save_result(db, project_id, layout_doc)
        update_job(
            db,
            job_id,
            status="done",
            progress=1.0,
            message=f"Saved as layout \u201c{saved_name}\u201d (revision {revision}).",
            result={
                "layout": saved_name,
                "revision": revision,
                "cost": result.result.cost,
                "information_gain_bits": result.result.information_gain_bits,
                "n_probes": len(result.layout.probes),
                "seconds": round(result.seconds, 2),
                "curve": curve,
            },
        )
    except OptimiseCancelled:
        finish(db, job_id, "cancelled", "Cancelled; nothing was saved.")
    except (OptimiseError, InputError) as exc:
        finish(db, job_id, "failed", f"The optimiser could not run: {exc}.")
    except StaleRevision:
        finish(db, job_id, "failed", "The project kept changing; the result was not saved.")
    except Exception:  # noqa: BLE001 - the job must end with a status whatever happened
        log.exception("optimiser job %s failed", job_id)
        finish(db, job_id, "failed", "The optimiser met an unexpected error; see the server log.")
    finally:
        with _running_lock:
            if _running.get(project_id) == job_id:
                del _running[project_id]


def finish(db: sqlite_utils.Database, job_id: int, status: str, message: str) -> None:
    try:
        update_job(db, job_id, status=status, message=message)
    except StoreError:  # already ended (a queued job cancelled at once)
        pass
    except Exception:  # noqa: BLE001 - e.g. the server shutting down: the next start marks it
        log.warning("could not record the end of optimiser job %s", job_id, exc_info=True)


def start_optimiser(
    db: sqlite_utils.Database, project_id: int, budget: float, methods: list[str], name: str
) -> int:
    """Record a job and start its thread; InputError when one is already running here."""
    with _running_lock:
        if project_id in _running:
            raise InputError(
                "optimiser",
                "an optimiser run is already going for this project; wait for it or cancel it",
            )
        job_id = create_job(
            db, project_id, KIND, {"budget": budget, "methods": methods, "name": name}
        )
        _running[project_id] = job_id
    thread = threading.Thread(
        target=run_optimiser_job,
        args=(db, job_id, project_id),
        name=f"optimiser-{project_id}-{job_id}",
        daemon=True,
    )
    thread.start()
    return job_id


# ---------------------------------------------------------------- routes


def read_amount(text: str) -> float | None:
    """A money amount as typed: "30000", "30,000", "30 000" or "30000.50"; None if not one."""
    cleaned = text.strip().replace("\u00a0", "").replace(" ", "")
    if re.fullmatch(r"\d{1,3}(,\d{3})+(\.\d+)?", cleaned):
        cleaned = cleaned.replace(",", "")
    return parse_number(cleaned) if cleaned else None


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
    budget = read_amount(reader.raw("budget"))
    chosen = [m for m in reader.all("methods") if m]
    name = reader.text("name", "name", required=False, max_len=120)
    problem = None
    if reader.problems:
        problem = reader.problems[0]
    elif budget is None or not (math.isfinite(budget) and budget > 0):
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
        job_id = start_optimiser(db, project_id, float(budget), methods, name)
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
