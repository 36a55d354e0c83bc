"""The optimiser as a background job: recorded in the store, run in a daemon thread.

The worker reports progress at most a few times a second and checks for a cancel request
between picks. On success the layout is saved into the project as a new revision, against
the revision current at that moment (retried once if someone saved in between); on failure
or cancel the project is left unchanged. One optimiser runs per project at a time. The
optimiser's heavy parts are numpy and numba, so page requests keep being served while it runs.
"""

from __future__ import annotations

import copy
import logging
import math
import threading
import time
from typing import Any

import sqlite_utils

from probewise.app.contract import optimised_layout_entry
from probewise.app.to_core import to_core
from probewise.core.optimise import OptimiseCancelled, OptimiseError, OptimiseOptions, optimise
from probewise.errors import InputError
from probewise.io.model_file import unique_layout_name
from probewise.store import (
    Job,
    StaleRevision,
    create_job,
    get_job,
    get_project,
    is_cancel_requested,
    list_jobs,
    save_project,
    update_job,
)
from probewise.store.errors import StoreError

log = logging.getLogger(__name__)

KIND = "optimise"
PROGRESS_INTERVAL_S = 0.25  # at most four progress writes a second
CANCEL_CHECK_INTERVAL_S = 0.2

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
        objective = params.get("objective", "gain")
        budget = params.get("budget")
        options = OptimiseOptions(
            budget=math.inf if budget is None else float(budget),
            methods=tuple(params["methods"]) or None,
            objective=objective,
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

        default = "Optimised for net value" if budget is None else f"Optimised for {budget:,.0f}"
        name = params.get("name") or default
        result = optimise(project, options, progress=progress, should_stop=should_stop, name=name)
        if is_cancel_requested(db, job_id):
            raise OptimiseCancelled()
        layout_doc = optimised_layout_entry(result, name, budget, tuple(params["methods"]) or None)
        curve = layout_doc["optimiser_curve"]
        saved_name, revision = save_result(db, project_id, layout_doc)
        summary = {
            "layout": saved_name,
            "revision": revision,
            "cost": result.result.cost,
            "information_gain_bits": result.result.information_gain_bits,
            "n_probes": len(result.layout.probes),
            "seconds": round(result.seconds, 2),
            "curve": curve,
        }
        if result.value is not None:
            summary |= {
                "expected_saving": result.value.expected_saving,
                "net_value": result.value.net_value,
            }
        update_job(
            db,
            job_id,
            status="done",
            progress=1.0,
            message=f"Saved as layout \u201c{saved_name}\u201d (revision {revision}).",
            result=summary,
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
    db: sqlite_utils.Database,
    project_id: int,
    budget: float | None,
    methods: list[str],
    name: str,
    objective: str = "gain",
) -> int:
    """Record a job and start its thread; InputError when one is already running here.
    ``budget`` None only with the objective ``net-value`` (no cap)."""
    with _running_lock:
        if project_id in _running:
            raise InputError(
                "optimiser",
                "an optimiser run is already going for this project; wait for it or cancel it",
            )
        job_id = create_job(
            db,
            project_id,
            KIND,
            {"budget": budget, "methods": methods, "name": name, "objective": objective},
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
