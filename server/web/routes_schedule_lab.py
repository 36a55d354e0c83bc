"""The laboratory testing schedule of a layout as CSV (caution first)."""

from __future__ import annotations

import io

from fastapi import APIRouter
from starlette.responses import Response

from probewise.app.lab_schedule import LAB_COLUMNS, lab_rows
from probewise.app.results import project_results
from probewise.errors import InputError
from probewise.io.exports import write_lab_csv
from probewise.web.deps import Db
from probewise.web.downloads import attachment_headers, slug_of
from probewise.web.result_figures import chosen_layout
from probewise.web.schedule_lab import lab_of

router = APIRouter(include_in_schema=False)


@router.get("/projects/{project_id}/schedule-lab.csv")
def schedule_lab_csv(project_id: int, db: Db, layout: str | None = None) -> Response:
    entry = project_results(db, project_id)
    chosen = chosen_layout(entry, layout)
    if chosen is None:
        raise InputError("layout", "the project has no layout to schedule")
    buffer = io.StringIO()
    write_lab_csv(lab_rows(lab_of(entry, chosen)), LAB_COLUMNS, buffer)
    project = slug_of(str(entry.model.get("name", "")), f"project-{project_id}")
    name = f"{project}-{slug_of(chosen, 'layout')}-lab-schedule.csv"
    return Response(
        buffer.getvalue(),
        media_type="text/csv; charset=utf-8",
        headers=attachment_headers(name),
    )
