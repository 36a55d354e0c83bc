"""Schedule: the printable scoping schedule of one option, and its CSV, GeoJSON and GeoPackage.

The page is print-ready (static/css/print.css: A4 by default, Letter on request, page breaks
kept out of tables and figures, navigation and buttons hidden): a header with the project,
the date and the revision; the probe table (id, method, coordinates, target depth, the
boundaries each probe is expected to reveal, its estimated cost); cost and duration by method;
the site plan and the uncertainty map after the option; a justification written from the
numbers (server/web/justify.py); and the caution.
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

from server.core.evaluate import LayoutResult
from server.errors import InputError
from server.exports import (
    schedule_rows,
    write_schedule_csv,
    write_schedule_geojson,
    write_schedule_gpkg,
)
from server.store import get_project
from server.web import plots
from server.web.deps import Db
from server.web.downloads import attachment_headers, slug_of
from server.web.evaluation_cache import ProjectResults, project_results, results_of
from server.web.justify import (
    MainBoundary,
    OptionFigures,
    justification,
    register_template_filters,
)
from server.web.routes_compare import (
    chosen_layout,
    current_revision_named,
    existing_points,
    image_response,
    planned_points,
)
from server.web.templating import kind_label, render_page_or_fragment
from server.web.workflow import project_context

router = APIRouter(include_in_schema=False)
register_template_filters()

PAPERS = {"a4": "A4", "letter": "Letter"}


def main_boundary_index(entry: ProjectResults) -> int | None:
    """The boundary of interest with the greatest weight (the first such, top down)."""
    boi = entry.project.ground.boundaries_of_interest
    if not boi:
        return None
    return max(boi, key=lambda b: (b.weight, -b.boundary)).boundary


def probe_dicts(entry: ProjectResults, result: LayoutResult) -> list[dict[str, Any]]:
    """The layout's planned probes as ``evaluate --json`` prints them, with their target."""
    names = entry.project.ground.boundary_names
    return [
        {
            "id": plan.probe.id,
            "method": plan.probe.method,
            "x": plan.probe.x,
            "y": plan.probe.y,
            "depth_m": plan.depth_m,
            "observes": [names[k] for k in plan.observes],
            "target": names[plan.target] if plan.target is not None else None,
        }
        for plan in result.plans
    ]


def figures_of(entry: ProjectResults, name: str, main: int | None) -> OptionFigures:
    result = entry.result_named(name)
    metrics = None
    if main is not None:
        metrics = result.boundaries[entry.project.ground.boundary_names[main]]
    return OptionFigures(
        name=name,
        cost=result.cost,
        duration_days=result.duration_days,
        n_probes=len(result.plans),
        metres=result.metres,
        gain_bits=result.information_gain_bits,
        width_m=metrics.width90_mean_m if metrics else None,
        confident=metrics.confident_fraction if metrics else None,
    )


def justification_of(entry: ProjectResults, chosen: str) -> list[str]:
    main = main_boundary_index(entry)
    main_info = None
    if main is not None:
        name = entry.project.ground.boundary_names[main]
        base = entry.evaluator.baseline.boundaries[name]
        tolerance = next(
            b.tolerance_m for b in entry.project.ground.boundaries_of_interest if b.boundary == main
        )
        main_info = MainBoundary(name, tolerance, base.width90_mean_m, base.confident_fraction)
    others = [figures_of(entry, n, main) for n in entry.layout_names if n != chosen]
    return justification(figures_of(entry, chosen, main), main_info, others, entry.project.currency)


def method_rows(entry: ProjectResults, result: LayoutResult) -> list[dict[str, Any]]:
    rows = []
    for method_id, totals in result.by_method.items():
        m = entry.project.methods[method_id]
        rows.append(
            {
                "id": method_id,
                "name": m.name,
                "kind": kind_label(m.kind),
                "count": totals.count,
                "metres": totals.metres,
                "mobilisation": m.mobilisation,
                "locations_cost": m.per_location * totals.count,
                "metres_cost": m.per_metre * totals.metres,
                "cost": totals.cost,
                "days": totals.duration_days,
                "rate": m.metres_per_day,
            }
        )
    return rows


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
    result = entry.result_named(chosen)
    rows = schedule_rows(probe_dicts(entry, result), entry.model)
    refusals = {plan.probe.id for plan in result.plans if plan.refuses}
    main = main_boundary_index(entry)
    names = entry.project.ground.boundary_names
    query = {"layout": chosen, "rev": str(project.revision)}
    base = f"/projects/{project_id}"
    layout_doc = next(lay for lay in entry.model.get("layouts") or [] if lay["name"] == chosen)
    context.update(
        chosen=chosen,
        layout_description=layout_doc.get("description") or "",
        result=result,
        rows=rows,
        refusals=refusals,
        methods=method_rows(entry, result),
        justification=justification_of(entry, chosen),
        main_boundary=names[main] if main is not None else None,
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
    result = entry.result_named(chosen)
    return entry, chosen, schedule_rows(probe_dicts(entry, result), entry.model)


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
