"""The Levels and site history page: ground level, reference (tide) levels and the history
rules that bound a boundary between its maximum and minimum potential levels
(docs/model.md "Levels and site history"), edited as one JSON text, with a map of the
potential band's thickness.
"""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.levels import history_limits
from probewise.app.project import core_project
from probewise.app.results import project_results
from probewise.core.grid import EmptyGridError, evaluation_grid_capped
from probewise.errors import InputError
from probewise.io.model_file import validate_model
from probewise.io.model_history import SECTIONS, resolve_level
from probewise.store import StoredProject
from probewise.web import plots
from probewise.web.deps import Db
from probewise.web.edits import EditPage, EditResult, FormReader, PostedForm
from probewise.web.result_figures import existing_points, image_response

router = APIRouter(include_in_schema=False)
MAX_TEXT = 2_000_000  # characters of the JSON text (20,000 survey points fit)


def sections_text(model: dict) -> str:
    """The three sections as the JSON text the form edits (absent ones left out)."""
    doc = {key: model[key] for key in SECTIONS if model.get(key) not in (None, [])}
    return json.dumps(doc, indent=2, ensure_ascii=False) if doc else "{}"


def _band(value: Any, reference: dict | None) -> float | None:
    try:
        return resolve_level(value, reference)
    except (KeyError, TypeError):
        return None


def history_summary(model: dict) -> list[dict[str, Any]]:
    """Each rule with its environments' bands resolved to the project datum."""
    reference = model.get("reference_levels")
    rules = []
    for rule in model.get("history") or []:
        rows = [
            {
                "name": env.get("name"),
                "given": (env.get("level_min"), env.get("level_max")),
                "min": _band(env.get("level_min"), reference),
                "max": _band(env.get("level_max"), reference),
            }
            for env in rule.get("environments") or []
        ]
        outside = rule.get("outside")
        if outside:
            rows.append(
                {
                    "name": "(outside the environments)",
                    "given": (outside.get("level_min"), outside.get("level_max")),
                    "min": _band(outside.get("level_min"), reference),
                    "max": _band(outside.get("level_max"), reference),
                }
            )
        rules.append({"rule": rule, "rows": rows})
    return rules


def history_extra(
    db: sqlite_utils.Database, project: StoredProject, model: dict, result: EditResult | None
) -> dict[str, Any]:
    text = result.draft.get("sections") if result and result.refused else None
    problem = None
    if project.model.get("history"):
        try:
            project_results(db, project.id)
        except InputError as exc:  # a conflict between a history bound and another bound
            problem = str(exc)
    return {
        "sections_text": text if text is not None else sections_text(project.model),
        "rules": history_summary(project.model),
        "ground_level": project.model.get("ground_level"),
        "reference_levels": project.model.get("reference_levels"),
        "band_problem": problem,
    }


PAGE = EditPage("history", "Levels and site history", history_extra, own=SECTIONS)
PAGE.add_undo_route(router)


@router.get("/projects/{project_id}/history")
def history_page(request: Request, project_id: int, db: Db) -> Response:
    return PAGE.show(request, db, project_id)


def read_sections(text: str) -> dict:
    """The JSON text of the form: an object with some of the three sections."""
    try:
        doc = json.loads(text or "{}")
    except json.JSONDecodeError as exc:
        raise InputError(
            "sections", f"is not valid JSON: {exc.msg} at line {exc.lineno} column {exc.colno}"
        ) from None
    if not isinstance(doc, dict):
        raise InputError("sections", "must be a JSON object with ground_level, history...")
    unknown = [k for k in doc if k not in SECTIONS]
    if unknown:
        raise InputError("sections", f"{unknown[0]!r} is not one of {', '.join(SECTIONS)}")
    return doc


@router.post("/projects/{project_id}/history/sections")
def save_sections(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)

    def edit(model: dict) -> str:
        doc = read_sections(reader.text("sections", "sections", required=False, max_len=MAX_TEXT))
        for key in SECTIONS:
            if doc.get(key) in (None, []):
                model.pop(key, None)
            else:
                model[key] = doc[key]
        try:
            normal = validate_model(model)
        except InputError:
            return "Changed the levels and site history"  # run_edit lists every problem
        core_project(normal)  # refuses a history bound that conflicts with another bound
        return "Changed the levels and site history"

    return PAGE.edit(request, db, project_id, form, edit, reader=reader)


@router.get("/projects/{project_id}/history/band.png")
def band_png(project_id: int, db: Db, revision: int | None = None) -> Response:
    """Thickness of the potential band (max - min depth the history allows) on the grid."""
    entry = project_results(db, project_id)
    project = entry.project
    if not project.ground.history:
        raise InputError("history", "the model has no history rule to map")

    def draw() -> bytes:
        try:
            grid, _ = evaluation_grid_capped(project.site, project.origin)
        except EmptyGridError as exc:
            raise InputError("grid_spacing_m", str(exc)) from None
        xy = grid.xy + np.asarray(project.origin)
        limits = history_limits(project, xy)
        corner = np.vstack(project.site.outline.rings).min(axis=0)
        raster = plots.GridRaster(
            grid.index, grid.shape, (float(corner[0]), float(corner[1])), grid.spacing_m
        )
        names = project.ground.boundary_names
        panels = [
            (f"Base of {names[k]}", hi - lo, existing_points(entry))
            for k, (lo, hi) in sorted(limits.items())
        ]
        return plots.uncertainty_maps(
            raster,
            panels,
            plots.SiteShapes.of_model(entry.model),
            title="Potential band from the site history: maximum minus minimum depth",
            quantity_label="Band thickness (m); blank where no history rule applies",
            crs=project.crs,
        )

    png = entry.memo(("history-band",), draw)
    return image_response(png, "image/png", revision == entry.revision)
