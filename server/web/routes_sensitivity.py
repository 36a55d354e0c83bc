"""Sensitivity of the ranking (server/app/sensitivity.py) as fragments of Compare and Schedule.

Both pages include their fragment (``_compare_sensitivity.html``, ``_schedule_sensitivity.html``)
without numbers first: it loads itself with ``hx-trigger="load"`` from the routes here, since
every changed model is a whole ranking again. ``?fit=1`` adds the model fitted to the existing
readings (the fit the Readings page computes, shared through the revision's results). Beyond
exact conditioning (many readings) the fragment offers a button instead (``?go=1`` ranks).
"""

from __future__ import annotations

from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.evaluation_jobs import evaluation_is_slow, existing_readings
from probewise.app.fit import adopt_fit, fit_json, project_fit
from probewise.app.results import ProjectResults, project_results
from probewise.app.sensitivity import Sensitivity, ranking_sensitivity, sensitivity_sentence
from probewise.app.to_core import to_core
from probewise.errors import InputError
from probewise.store import get_project
from probewise.web.deps import Db
from probewise.web.templating import render

router = APIRouter(include_in_schema=False)

FRAGMENTS = {"compare": "_compare_sensitivity.html", "schedule": "_schedule_sensitivity.html"}


def sensitivity_of(entry: ProjectResults, with_fit: bool) -> Sensitivity:
    """The sensitivity of the revision's ranking (computed once per revision)."""

    def compute() -> Sensitivity:
        fitted = None
        if with_fit:
            doc = entry.memo(("fit",), lambda: fit_json(entry.project, project_fit(entry.project)))
            fitted = to_core(adopt_fit(entry.model, doc))
        return ranking_sensitivity(entry.project, entry.kinds(), entry.ranking(), fitted)

    return entry.memo(("sensitivity", with_fit), compute)


def sensitivity_context(
    db: sqlite_utils.Database, project_id: int, with_fit: bool, where: str, go: bool = True
) -> dict[str, Any]:
    entry = project_results(db, project_id)
    context: dict[str, Any] = {
        "project": get_project(db, project_id),
        "currency": entry.project.currency,
        "sensitivity": None,
        "sensitivity_problem": None,
        "sensitivity_url": f"/projects/{project_id}/{where}/sensitivity",
        "with_fit": with_fit,
        "can_fit": bool(entry.project.existing),
    }
    if not entry.layout_names:
        context["sensitivity_problem"] = "there is no option to rank"
        return context
    if not (go or with_fit) and evaluation_is_slow(entry.project):
        # every changed model is a whole evaluation again (minutes with many readings): a
        # page load must not start that unasked and keep the server busy
        readings = existing_readings(entry.project)
        context["sensitivity_offer"] = (
            f"{readings:,} existing readings make each changed model a long evaluation"
        )
        return context
    try:
        sens = sensitivity_of(entry, with_fit)
    except InputError as exc:
        context["sensitivity_problem"] = f"{exc.field}: {exc.problem}"
        return context
    except ValueError as exc:  # a fitted model the core refuses (ModelLimitError...)
        context["sensitivity_problem"] = str(exc)
        return context
    context.update(sensitivity=sens, sensitivity_sentence=sensitivity_sentence(sens))
    return context


@router.get("/projects/{project_id}/compare/sensitivity")
def compare_sensitivity(
    request: Request, project_id: int, db: Db, fit: bool = False, go: bool = False
) -> Response:
    context = sensitivity_context(db, project_id, fit, "compare", go)
    return render(request, FRAGMENTS["compare"], context)


@router.get("/projects/{project_id}/schedule/sensitivity")
def schedule_sensitivity(
    request: Request, project_id: int, db: Db, fit: bool = False, go: bool = False
) -> Response:
    context = sensitivity_context(db, project_id, fit, "schedule", go)
    return render(request, FRAGMENTS["schedule"], context)
