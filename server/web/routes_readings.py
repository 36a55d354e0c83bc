"""Readings: every existing reading against what the other probes (or earlier stages)
predicted, flagged readings first in mind, and a sentence per boundary (server/app/readings.py).

Read-only: the page computes from the current revision (cached with its other results) and
changes nothing. ``?by_stage=1`` predicts each reading from earlier stages only.
"""

from __future__ import annotations

from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from server.app.readings import ReadingsReport, project_readings, reading_notes
from server.app.results import project_results
from server.store import get_project
from server.web.deps import Db
from server.web.templating import render_page_or_fragment
from server.web.workflow import project_context

router = APIRouter(include_in_schema=False)


def reading_rows(report: ReadingsReport) -> list[dict[str, Any]]:
    c = report.checks
    notes = reading_notes(report)
    return [
        {
            "probe": report.probe_ids[c.probe[j]],
            "stage": report.stages[c.stage[j]] if c.stage[j] >= 0 else "",
            "boundary": report.boundary_names[c.boundary[j]],
            "reading_m": float(c.reading_m[j]),
            "predicted_mean_m": float(c.predicted_mean_m[j]),
            "predicted_std_m": float(c.predicted_std_m[j]),
            "precision_m": float(c.precision_m[j]),
            "z": float(c.z[j]),
            "flag": bool(c.flag[j]),
            "note": notes[j],
        }
        for j in range(len(c.z))
    ]


def readings_context(db: sqlite_utils.Database, project_id: int, by_stage: bool) -> dict:
    entry = project_results(db, project_id)
    report = entry.memo(
        ("readings", by_stage), lambda: project_readings(entry.project, by_stage=by_stage)
    )
    rows = reading_rows(report)
    return {
        **project_context(get_project(db, project_id), "readings"),
        "rows": rows,
        "flagged": [r for r in rows if r["flag"]],
        "summaries": report.summaries,
        "stages": report.stages,
        "by_stage": by_stage,
    }


@router.get("/projects/{project_id}/readings")
def readings_page(request: Request, project_id: int, db: Db, by_stage: bool = False) -> Response:
    return render_page_or_fragment(
        request, "readings.html", "_readings.html", readings_context(db, project_id, by_stage)
    )
