"""Readings: every existing reading against what the other probes (or earlier stages)
predicted, flagged readings first in mind, and a sentence per boundary (server/app/readings.py).

The page computes from the current revision (cached with its other results).
``?by_stage=1`` predicts each reading from earlier stages only. The fit of the model to the
readings (server/app/fit.py) loads on request beside the conceptual values; adopting it is
one revision (undo takes it back).
"""

from __future__ import annotations

from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.fit import adopt_fit, fit_json, project_fit
from probewise.app.readings import ReadingsReport, project_readings, reading_notes
from probewise.app.results import project_results
from probewise.store import get_project
from probewise.web.deps import Db
from probewise.web.edits import PostedForm, expected_revision_of, run_edit
from probewise.web.templating import render, render_page_or_fragment
from probewise.web.workflow import project_context

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


def readings_context(
    db: sqlite_utils.Database, project_id: int, by_stage: bool, notice: dict | None = None
) -> dict:
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
        "notice": notice,
    }


@router.get("/projects/{project_id}/readings")
def readings_page(request: Request, project_id: int, db: Db, by_stage: bool = False) -> Response:
    return render_page_or_fragment(
        request, "readings.html", "_readings.html", readings_context(db, project_id, by_stage)
    )


def fit_document(db: sqlite_utils.Database, project_id: int) -> tuple[int, dict]:
    """The fit of the current revision (cached with its results): ``(revision, document)``."""
    entry = project_results(db, project_id)
    doc = entry.memo(("fit",), lambda: fit_json(entry.project, project_fit(entry.project)))
    return entry.revision, doc


@router.get("/projects/{project_id}/readings/fit")
def fit_fragment(request: Request, project_id: int, db: Db) -> Response:
    revision, doc = fit_document(db, project_id)
    project = get_project(db, project_id)
    current = {u["name"]: u for u in project.model["units"]}
    rows = [
        {
            **u,
            "now_multiplier": current[u["name"]].get("spread_multiplier", 1.0),
            "now_nugget": current[u["name"]].get("nugget", 0.0),
            "now_shift": current[u["name"]].get("mean_shift_m", 0.0),
        }
        for u in doc["units"]
    ]
    context = {
        **project_context(project, "readings"),
        "fit": doc,
        "fit_rows": rows,
        "fit_revision": revision,
    }
    return render(request, "_readings_fit.html", context)


@router.post("/projects/{project_id}/readings/adopt")
def adopt(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    expected = expected_revision_of(form)

    def edit(model: dict) -> str:
        _, doc = fit_document(db, project_id)
        adopted = adopt_fit(model, doc)
        model.clear()
        model.update(adopted)
        fitted = [u["name"] for u in doc["units"] if u["fitted"]]
        return "Adopted the fit to the readings" + (f" ({', '.join(fitted)})" if fitted else "")

    result = run_edit(db, project_id, expected, edit, keep_input=False)
    context = readings_context(db, project_id, False, result.notice)
    return render_page_or_fragment(
        request, "readings.html", "_readings.html", context, status_code=result.status_code
    )
