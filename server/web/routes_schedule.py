"""Schedule: the printable scoping schedule of one option, and its CSV, GeoJSON and GeoPackage.

The page is print-ready (static/css/print.css: A4 by default, Letter on request, page breaks
kept out of tables and figures, navigation and buttons hidden): a header with the project,
the date and the revision; the probe table (id, method, coordinates, target depth, the
boundaries each probe is expected to reveal, its estimated cost); cost and duration by method;
the site plan and the uncertainty map after the option; a justification written from the
numbers (server/app/schedule.py, server/app/justification.py); and the caution.
"""

from __future__ import annotations

import io
import tempfile
from datetime import date
from pathlib import Path
from typing import Any
from urllib.parse import urlencode

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.project import model_layout
from probewise.app.results import ProjectResults, project_results, results_of
from probewise.app.schedule import Schedule, build_schedule, main_boundary_index, probe_rows
from probewise.errors import InputError
from probewise.io.exports import write_schedule_csv, write_schedule_geojson, write_schedule_gpkg
from probewise.store import get_project
from probewise.web import plots
from probewise.web.deps import Db
from probewise.web.downloads import attachment_headers, slug_of
from probewise.web.result_figures import (
    chosen_layout,
    current_revision_named,
    existing_points,
    image_response,
    planned_points,
)
from probewise.web.schedule_lab import lab_context
from probewise.web.templating import kind_label, render_page_or_fragment
from probewise.web.workflow import project_context

router = APIRouter(include_in_schema=False)

PAPERS = {"a4": "A4", "letter": "Letter"}


def schedule_of(entry: ProjectResults, chosen: str) -> Schedule:
    """The schedule of one layout from the revision's cached results (built once per layout)."""
    return entry.memo(
        ("schedule", chosen),
        lambda: build_schedule(
            entry.project,
            chosen,
            evaluator=entry.evaluator,
            ranking=entry.ranking(),
            results=entry.results(),
        ),
    )


def schedule_context(
    db: sqlite_utils.Database, project_id: int, wanted: str | None, paper: str
) -> dict[str, Any]:
    project = get_project(db, project_id)
    entry = results_of(db, project)
    context: dict[str, Any] = {
        **project_context(project, "schedule"),
        "paper": paper if paper in PAPERS else "a4",
        "papers": PAPERS,
        "today": date.today().isoformat(),
        "problem": None,
        "chosen": None,
        "layout_names": entry.layout_names,
    }
    try:
        _ = entry.evaluator  # computes the baseline; InputError when the grid is empty
    except InputError as exc:
        context["problem"] = f"{exc.field}: {exc.problem}"
        return context
    chosen = chosen_layout(entry, wanted)
    if chosen is None:
        return context
    schedule = schedule_of(entry, chosen)
    main = main_boundary_index(entry.project)
    query = {"layout": chosen, "rev": str(project.revision)}
    base = f"/projects/{project_id}"
    layout_doc = model_layout(entry.model, chosen) or {}
    context.update(
        chosen=chosen,
        layout_description=layout_doc.get("description") or "",
        schedule=schedule,
        result=schedule.totals,
        rows=schedule.probes,
        refusals=schedule.refusals,
        methods=schedule.methods,
        justification=list(schedule.justification),
        main_boundary=schedule.main_boundary,
        plan_src=f"{base}/schedule/plan.png?{urlencode(query)}",
        map_src=(
            f"{base}/compare/map.png?{urlencode({**query, 'boundary': main, 'quantity': 'width'})}"
            if main is not None
            else None
        ),
        downloads={
            "csv": f"{base}/schedule.csv?{urlencode({'layout': chosen})}",
            "geojson": f"{base}/schedule.geojson?{urlencode({'layout': chosen})}",
            "gpkg": f"{base}/schedule.gpkg?{urlencode({'layout': chosen})}",
        },
        paper_links={
            key: f"{base}/schedule?{urlencode({'layout': chosen, 'paper': key})}" for key in PAPERS
        },
        crs=entry.project.crs,
        **lab_context(entry, chosen, project_id),  # the laboratory testing schedule
    )
    return context


@router.get("/projects/{project_id}/schedule")
def schedule_page(
    request: Request, project_id: int, db: Db, layout: str | None = None, paper: str = "a4"
) -> Response:
    context = schedule_context(db, project_id, layout, paper)
    return render_page_or_fragment(request, "schedule.html", "_schedule.html", context)


@router.get("/projects/{project_id}/schedule/plan.png")
def schedule_plan(request: Request, project_id: int, db: Db, layout: str | None = None) -> Response:
    entry = project_results(db, project_id)
    chosen = chosen_layout(entry, layout)
    if chosen is None:
        raise InputError("layout", "the project has no layout to draw")

    def draw() -> bytes:
        result = entry.result_named(chosen)
        return plots.site_plan(
            plots.SiteShapes.of_model(entry.model),
            existing_points(entry) + planned_points(entry, result),
            title=f"Site plan: {chosen}",
            crs=entry.project.crs,
            kind_labels={
                k: kind_label(k) for k in ("borehole", "cpt", "dmt", "trial_pit", "other")
            },
        )

    png = entry.memo(("plan", chosen), draw)
    return image_response(png, "image/png", current_revision_named(request, entry))


# ---------------------------------------------------------------- downloads


def schedule_download_rows(
    db: sqlite_utils.Database, project_id: int, layout: str | None
) -> tuple[ProjectResults, str, list[dict[str, Any]]]:
    entry = project_results(db, project_id)
    chosen = chosen_layout(entry, layout)
    if chosen is None:
        raise InputError("layout", "the project has no layout to schedule")
    return entry, chosen, probe_rows(entry.project, entry.result_named(chosen).plans)


def download_name(entry: ProjectResults, layout: str, suffix: str) -> str:
    project = slug_of(str(entry.model.get("name", "")), f"project-{entry.project_id}")
    return f"{project}-{slug_of(layout, 'layout')}-schedule.{suffix}"


@router.get("/projects/{project_id}/schedule.csv")
def schedule_csv(project_id: int, db: Db, layout: str | None = None) -> Response:
    entry, chosen, rows = schedule_download_rows(db, project_id, layout)
    buffer = io.StringIO()
    write_schedule_csv(rows, buffer)
    return Response(
        buffer.getvalue(),
        media_type="text/csv; charset=utf-8",
        headers=attachment_headers(download_name(entry, chosen, "csv")),
    )


@router.get("/projects/{project_id}/schedule.geojson")
def schedule_geojson(project_id: int, db: Db, layout: str | None = None) -> Response:
    import json

    entry, chosen, rows = schedule_download_rows(db, project_id, layout)
    document = write_schedule_geojson(rows, entry.project.crs)
    document["name"] = f"{entry.model.get('name', '')}: {chosen}"
    return Response(
        json.dumps(document, ensure_ascii=False, indent=1),
        media_type="application/geo+json",
        headers=attachment_headers(download_name(entry, chosen, "geojson")),
    )


@router.get("/projects/{project_id}/schedule.gpkg")
def schedule_gpkg(project_id: int, db: Db, layout: str | None = None) -> Response:
    entry, chosen, rows = schedule_download_rows(db, project_id, layout)
    with tempfile.TemporaryDirectory(prefix="probewise-") as folder:
        path = Path(folder) / "schedule.gpkg"
        write_schedule_gpkg(rows, entry.project.crs, path)
        content = path.read_bytes()
    return Response(
        content,
        media_type="application/geopackage+sqlite3",
        headers=attachment_headers(download_name(entry, chosen, "gpkg")),
    )
