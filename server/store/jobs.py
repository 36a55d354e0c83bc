"""Long background jobs (optimiser runs): status, progress and result, polled by the web.

Statuses: queued -> running -> done | failed | cancelled. The last three are final: a job that
has finished is never changed again (update_job raises StoreError). Cancelling is cooperative:
request_cancel() flags the job (a queued job is cancelled at once) and the worker polls
is_cancel_requested() and ends with status "cancelled".
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Any

import sqlite_utils

from probewise.store.db import read_snapshot, transaction, utc_now
from probewise.store.errors import JobNotFound, StoreError
from probewise.store.projects import _project_row

STATUSES = ("queued", "running", "done", "failed", "cancelled")
FINAL_STATUSES = frozenset({"done", "failed", "cancelled"})
INTERRUPTED_MESSAGE = "interrupted"


@dataclass(frozen=True)
class Job:
    id: int
    project_id: int | None
    kind: str
    status: str
    progress: float
    message: str
    params: dict
    result: dict | None
    created_at: str
    updated_at: str
    cancel_requested: bool = False

    @property
    def finished(self) -> bool:
        return self.status in FINAL_STATUSES


def _job_from_row(row: dict[str, Any]) -> Job:
    return Job(
        id=row["id"],
        project_id=row["project_id"],
        kind=row["kind"],
        status=row["status"],
        progress=float(row["progress"]),
        message=row["message"],
        params=json.loads(row["params"]),
        result=None if row["result"] is None else json.loads(row["result"]),
        created_at=row["created_at"],
        updated_at=row["updated_at"],
        cancel_requested=bool(row["cancel_requested"]),
    )


def _job_row(db: sqlite_utils.Database, job_id: int) -> dict[str, Any]:
    rows = list(db["jobs"].rows_where("id = ?", [job_id]))
    if not rows:
        raise JobNotFound(f"no job with id {job_id}")
    return rows[0]


def create_job(db: sqlite_utils.Database, project_id: int | None, kind: str, params: dict) -> int:
    """Queue a job of ``kind`` (e.g. "optimise") for a project; returns the job id."""
    now = utc_now()
    with transaction(db):
        if project_id is not None:
            _project_row(db, project_id)
        table = db["jobs"].insert(
            {
                "project_id": project_id,
                "kind": kind,
                "status": "queued",
                "progress": 0.0,
                "message": "",
                "params": json.dumps(params),
                "result": None,
                "cancel_requested": 0,
                "created_at": now,
                "updated_at": now,
            }
        )
        return int(table.last_pk)


def get_job(db: sqlite_utils.Database, job_id: int) -> Job:
    with read_snapshot(db):
        return _job_from_row(_job_row(db, job_id))


def list_jobs(
    db: sqlite_utils.Database,
    project_id: int | None = None,
    kind: str | None = None,
    limit: int = 20,
) -> list[Job]:
    """Jobs, newest first, of one project and/or one kind when given; at most ``limit``."""
    if limit < 1:
        raise ValueError(f"limit must be at least 1, not {limit}")
    where, params = [], []
    if project_id is not None:
        where.append("project_id = ?")
        params.append(project_id)
    if kind is not None:
        where.append("kind = ?")
        params.append(kind)
    with read_snapshot(db):
        rows = db["jobs"].rows_where(
            " AND ".join(where) or None, params, order_by="id DESC", limit=int(limit)
        )
        return [_job_from_row(row) for row in rows]


def update_job(
    db: sqlite_utils.Database,
    job_id: int,
    *,
    status: str | None = None,
    progress: float | None = None,
    message: str | None = None,
    result: dict | None = None,
) -> Job:
    """Change the given fields of a job that has not finished; returns the job as stored."""
    if status is not None and status not in STATUSES:
        raise ValueError(f"status must be one of {', '.join(STATUSES)}, not {status!r}")
    if progress is not None and not 0.0 <= float(progress) <= 1.0:
        raise ValueError(f"progress must lie in 0..1, not {progress}")
    changes: dict[str, Any] = {}
    if status is not None:
        changes["status"] = status
    if progress is not None:
        changes["progress"] = float(progress)
    if message is not None:
        changes["message"] = message
    if result is not None:
        changes["result"] = json.dumps(result)
    with transaction(db):
        row = _job_row(db, job_id)
        if row["status"] in FINAL_STATUSES:
            raise StoreError(f"job {job_id} has already ended ({row['status']})")
        if changes:
            changes["updated_at"] = utc_now()
            db["jobs"].update(job_id, changes)
        return _job_from_row(_job_row(db, job_id))


def request_cancel(db: sqlite_utils.Database, job_id: int) -> Job:
    """Ask a job to stop: a queued job is cancelled at once, a running one at its next check.

    A job that has already ended is left as it is.
    """
    with transaction(db):
        row = _job_row(db, job_id)
        if row["status"] not in FINAL_STATUSES:
            changes: dict[str, Any] = {"cancel_requested": 1, "updated_at": utc_now()}
            if row["status"] == "queued":
                changes.update(status="cancelled", message="cancelled before it started")
            db["jobs"].update(job_id, changes)
        return _job_from_row(_job_row(db, job_id))


def is_cancel_requested(db: sqlite_utils.Database, job_id: int) -> bool:
    with read_snapshot(db):
        return bool(_job_row(db, job_id)["cancel_requested"])


def mark_interrupted_jobs(db: sqlite_utils.Database) -> int:
    """On start-up: jobs a killed process left queued or running can never finish; fail them.

    Returns how many were marked.
    """
    with transaction(db):
        ids = [
            r["id"] for r in db["jobs"].rows_where("status IN ('queued', 'running')", select="id")
        ]
        now = utc_now()
        for job_id in ids:
            db["jobs"].update(
                job_id, {"status": "failed", "message": INTERRUPTED_MESSAGE, "updated_at": now}
            )
    return len(ids)
