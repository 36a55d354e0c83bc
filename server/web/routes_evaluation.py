"""Pages of a large project while its evaluation grid is computed: a progress bar that polls.

A browser's GET of a page or of an htmx fragment (not /api, not an image) runs under
``deferring_slow_evaluations``: when it needs a revision's evaluator that is not ready and
would be slow (``probewise.app.evaluation_jobs``), the computation goes to a background job
and ``EvaluationPending`` reaches the handler here, which answers at once (202) with the
progress page (``evaluating.html``), or for an htmx request with just its fragment
(``_evaluating.html``, swapped where the requested part would have gone). The fragment polls
``GET /projects/{id}/evaluation?next=<page>`` every second; when the job has ended the answer
carries ``HX-Redirect`` and the browser loads the page (for a fragment: the page showing it),
now computed, or showing the project's input error as it always did. Every route that reads
results gets this through ``ProjectResults.evaluator``; no route has to ask. Form posts, the
API, images and the command line compute in place as before.
"""

from __future__ import annotations

from typing import Annotated
from urllib.parse import urlencode, urlsplit

from fastapi import APIRouter, FastAPI, Query, Request
from starlette.datastructures import Headers
from starlette.responses import Response
from starlette.types import ASGIApp, Receive, Scope, Send

from probewise.app.evaluation_jobs import (
    EvaluationJob,
    EvaluationPending,
    deferring_slow_evaluations,
    evaluation_job,
    start_evaluation,
)
from probewise.app.results import project_results
from probewise.store import get_project
from probewise.web.deps import Db, database_of
from probewise.web.templating import is_htmx, render
from probewise.web.workflow import WORKFLOW_STEPS, project_context

router = APIRouter(include_in_schema=False)

NO_STORE = {"Cache-Control": "no-store"}


def may_defer(scope: Scope) -> bool:
    """A browser loading a page or an htmx fragment (a GET of HTML), not /api nor a file."""
    if scope["method"] not in ("GET", "HEAD") or scope["path"].startswith(("/api", "/static")):
        return False
    headers = Headers(scope=scope)
    return headers.get("hx-request") == "true" or "text/html" in headers.get("accept", "")


class EvaluationWaitMiddleware:
    """Runs page and fragment loads under ``deferring_slow_evaluations`` (module docstring)."""

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http" or not may_defer(scope):
            await self.app(scope, receive, send)
            return
        # the route runs in a worker thread with a copy of this context
        with deferring_slow_evaluations():
            await self.app(scope, receive, send)


def local_target(project_id: int, wanted: str | None) -> str:
    """The page to load when done: a path of this project's pages, else its overview."""
    home = f"/projects/{project_id}"
    if not wanted:
        return home
    parts = urlsplit(wanted)
    inside = parts.path == home or parts.path.startswith(home + "/")
    if parts.scheme or parts.netloc or "\\" in wanted or not inside:
        return home
    return parts.path + (f"?{parts.query}" if parts.query else "")


def step_of(path: str, project_id: int) -> str:
    """The workflow step a project page's path belongs to ("" when none)."""
    for step in WORKFLOW_STEPS:
        if step.path and step.key != "overview":
            prefix = step.path.format(project_id=project_id)
            if path == prefix or path.startswith(prefix + "/"):
                return step.key
    return "overview" if path == f"/projects/{project_id}" else ""


def progress_context(
    project_id: int, job: EvaluationJob | None, target: str, done: bool = False
) -> dict:
    """What ``_evaluating.html`` needs; ``done`` when the page can be loaded now."""
    return {
        "evaluation": job,
        "evaluation_done": done,
        "evaluation_percent": 100 if done or job is None else round(100 * job.fraction),
        "evaluation_next": target,
        "evaluation_poll": f"/projects/{project_id}/evaluation?{urlencode({'next': target})}",
    }


def install_evaluation_wait(app: FastAPI) -> None:
    """Page loads may defer a slow evaluation; the pending ones answer with the progress page."""
    app.add_middleware(EvaluationWaitMiddleware)

    @app.exception_handler(EvaluationPending)
    async def on_evaluation_pending(request: Request, exc: EvaluationPending) -> Response:
        job = exc.job
        project = get_project(database_of(request.app), job.project_id)
        if is_htmx(request):  # a part of the page showing: load that page again when done
            shown = urlsplit(request.headers.get("hx-current-url") or "")
            asked = shown.path + (f"?{shown.query}" if shown.query else "")
        else:
            asked = request.url.path + (f"?{request.url.query}" if request.url.query else "")
        target = local_target(job.project_id, asked)
        if is_htmx(request):  # swapped where the fragment would have gone
            context = progress_context(job.project_id, job, target)
            return render(request, "_evaluating.html", context, status_code=202, headers=NO_STORE)
        context = {
            **project_context(project, step_of(request.url.path, job.project_id)),
            **progress_context(job.project_id, job, target),
        }
        return render(request, "evaluating.html", context, status_code=202, headers=NO_STORE)


@router.get("/projects/{project_id}/evaluation")
def evaluation_progress(
    request: Request,
    project_id: int,
    db: Db,
    wanted: Annotated[str | None, Query(alias="next")] = None,
) -> Response:
    """The progress fragment; once the evaluation has ended, ``HX-Redirect`` to the page."""
    target = local_target(project_id, wanted)
    entry = project_results(db, project_id)  # the current revision (the project may move on)
    job = evaluation_job(entry)
    if entry.evaluator_done:  # computed, or failed on the input: the page shows either
        context = progress_context(project_id, job, target, done=True)
        headers = {**NO_STORE, "HX-Redirect": target}
        return render(request, "_evaluating.html", context, headers=headers)
    if job is None:  # not started by a page (e.g. the server restarted): start it now
        job = start_evaluation(entry, retry_failed=False)
    context = progress_context(project_id, job, target)
    return render(request, "_evaluating.html", context, headers=NO_STORE)
