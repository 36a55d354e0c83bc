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
from probewise.store import StoredProject, get_project
from probewise.web import plots
from probewise.web import schedule_document as docs
from probewise.web.behaviour_view import schedule_behaviour
from probewise.web.deps import Db
from probewise.web.downloads import attachment_headers, slug_of
from probewise.web.edits import (
    EditResult,
    FormReader,
    PostedForm,
    expected_revision_of,
    page_context,
    run_edit,
    run_undo,
)
from probewise.web.plan_plot import Placement, PlanProbe, plan_with_placement
from probewise.web.result_figures import (
    chosen_layout,
    current_revision_named,
    image_response,
    ranking_rows,
)
from probewise.web.schedule_lab import lab_context
from probewise.web.stage_sections import stage_context
from probewise.web.symbols import SYMBOLS, methods_drawn
from probewise.web.templating import kind_label, render_action, render_page_or_fragment
from probewise.web.value_views import schedule_value_context
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


def document_context(
    db: sqlite_utils.Database, project: StoredProject, result: EditResult | None
) -> dict[str, Any]:
    """The screen-only edit forms (document control, health and safety) and what prints."""
    shown = result.project if result else project
    context = page_context(
        db,
        shown,
        "schedule",
        result=result,
        page_url=f"/projects/{shown.id}/schedule",
        fragment_id="schedule",
    )
    model, stored = context["model"], context["stored"]
    context.update(
        document=docs.document_of(stored),
        document_form=docs.document_of(model),
        document_fields=docs.DOCUMENT_FIELDS,
        status_suggestions=docs.STATUS_SUGGESTIONS,
        hazards=docs.hazards_of(stored),
        hazards_form=docs.hazards_of(model),
        safety_notes=docs.safety_notes_of(stored),
        safety_notes_form=docs.safety_notes_of(model),
        appendix=docs.appendix_sources(stored),
    )
    return context


def level_datum(project: Any) -> str | None:
    """The datum name the schedule's level column shows, or None without a ground level."""
    ground_level = project.ground.ground_level
    if ground_level is None:
        return None
    return ground_level.datum or "project datum"


def schedule_context(
    db: sqlite_utils.Database,
    project_id: int,
    wanted: str | None,
    paper: str,
    result: EditResult | None = None,
) -> dict[str, Any]:
    project = get_project(db, project_id)
    entry = results_of(db, project)
    context: dict[str, Any] = {
        **project_context(project, "schedule"),
        **document_context(db, project, result),
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
        rows=schedule.probes,  # each with its warnings (probewise.app.schedule_warnings)
        ranking=ranking_rows(entry, chosen),
        plan_key=plan_of(entry, chosen)[1].numbered,
        chart_src=f"{base}/compare/chart.svg?{urlencode(query)}",
        refusals=schedule.refusals,
        methods=schedule.methods,
        programme=schedule.programme,  # _schedule_programme.html
        instructions=schedule.instructions,  # _schedule_instructions.html
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
        **schedule_value_context(entry, project_id, schedule.value),
        behaviour=schedule_behaviour(entry),  # appendix: templates/_schedule_behaviour.html
        level_datum=level_datum(entry.project),
        **lab_context(entry, chosen, project_id),  # the laboratory testing schedule
    )
    context.update(stage_context(entry))  # the last stage against its prediction
    return context


@router.get("/projects/{project_id}/schedule")
def schedule_page(
    request: Request, project_id: int, db: Db, layout: str | None = None, paper: str = "a4"
) -> Response:
    context = schedule_context(db, project_id, layout, paper)
    return render_page_or_fragment(request, "schedule.html", "_schedule.html", context)


def plan_of(entry: ProjectResults, chosen: str) -> tuple[bytes, Placement]:
    """The plan of one layout (PNG) and where its labels went: drawn once per revision."""

    def draw() -> tuple[bytes, Placement]:
        result = entry.result_named(chosen)
        methods = entry.project.methods
        planned = [
            PlanProbe(
                plan.probe.id,
                plan.probe.x,
                plan.probe.y,
                methods[plan.probe.method].kind,
                plan.probe.method,
            )
            for plan in result.plans
        ]
        existing = [
            PlanProbe(
                p.id,
                p.x,
                p.y,
                methods[p.method].kind if p.method in methods else "other",
                p.method,
                existing=True,
            )
            for p in entry.project.existing
        ]
        return plan_with_placement(
            plots.SiteShapes.of_model(entry.model),
            existing + planned,
            title=f"Site plan: {chosen}",
            crs=entry.project.crs,
            legend_methods=methods_drawn(entry.model, {p.code for p in planned}),
            legend_existing=methods_drawn(entry.model, {p.code for p in existing}),
            kind_labels={k: kind_label(k) for k in SYMBOLS},
        )

    return entry.memo(("plan", chosen), draw)


@router.get("/projects/{project_id}/schedule/plan.png")
def schedule_plan(request: Request, project_id: int, db: Db, layout: str | None = None) -> Response:
    entry = project_results(db, project_id)
    chosen = chosen_layout(entry, layout)
    if chosen is None:
        raise InputError("layout", "the project has no layout to draw")
    png, _placement = plan_of(entry, chosen)
    return image_response(png, "image/png", current_revision_named(request, entry))


# ---------------------------------------------------------------- document edits


def answer_edit(request: Request, db: Db, project_id: int, form, result: EditResult) -> Response:
    """The schedule after an edit of its document parts (the option and paper kept)."""
    reader = FormReader(form)
    layout, paper = reader.raw("layout") or None, reader.raw("paper") or "a4"
    query = urlencode({k: v for k, v in (("layout", layout), ("paper", paper)) if v})
    return render_action(
        request,
        "schedule.html",
        "_schedule.html",
        lambda: schedule_context(db, project_id, layout, paper, result),
        redirect_to=f"/projects/{project_id}/schedule?{query}#document-edit",
        status_code=result.status_code,
    )


def run_schedule_edit(
    request: Request, db: Db, project_id: int, form, edit, *, keep_input: bool = True
) -> Response:
    reader = FormReader(form)
    result = run_edit(
        db,
        project_id,
        expected_revision_of(form),
        lambda model: edit(reader, model),
        reader=reader,
        own=("document", "safety"),
        keep_input=keep_input,
        page_url=f"/projects/{project_id}/schedule",
    )
    return answer_edit(request, db, project_id, form, result)


@router.post("/projects/{project_id}/schedule/document")
def save_document(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    return run_schedule_edit(request, db, project_id, form, docs.edit_document)


@router.post("/projects/{project_id}/schedule/safety")
def save_safety(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    return run_schedule_edit(request, db, project_id, form, docs.edit_safety)


@router.post("/projects/{project_id}/schedule/issues/add")
def add_issue(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    return run_schedule_edit(request, db, project_id, form, docs.add_issue, keep_input=False)


@router.post("/projects/{project_id}/schedule/issues/remove-last")
def remove_last_issue(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    return run_schedule_edit(
        request, db, project_id, form, lambda _reader, model: docs.remove_last_issue(model)
    )


@router.post("/projects/{project_id}/schedule/undo")
def undo_schedule_edit(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    result = run_undo(db, project_id, expected_revision_of(form))
    return answer_edit(request, db, project_id, form, result)


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
