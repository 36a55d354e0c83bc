"""The Levels and site history page: ground level, reference (tide) levels and the history
rules that bound a boundary between its maximum and minimum potential levels
(docs/model.md "Levels and site history"), with a map of the potential band's thickness.

Edited by forms, one revision per edit (readers in ``probewise.web.history_form``): the
ground level (constant, typed points or points imported from CSV/GIS with a preview), the
reference levels table, each history rule and its former environments (typed or imported
polygons). The three sections as one JSON text stay as an advanced editor.
"""

from __future__ import annotations

import json
import re
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
from probewise.store import StoredProject, get_project
from probewise.web import plots
from probewise.web.deps import Db
from probewise.web.edits import (
    EditPage,
    EditResult,
    FormReader,
    ImportArea,
    PostedForm,
    item_at,
)
from probewise.web.history_form import (
    points_text,
    read_band,
    read_environment,
    read_ground_level,
    read_reference_levels,
    read_rule,
    uploaded_file,
)
from probewise.web.polygon_text import polygon_text
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
    units = [u["name"] for u in model.get("units") or []]
    ground_level = model.get("ground_level") or {}
    return {
        "sections_text": text if text is not None else sections_text(project.model),
        "rules": history_summary(project.model),
        "rule_rows": [
            {
                "index": r,
                "rule": rule,
                "envs": [
                    {"index": e, "env": env, "text": polygon_text(env.get("geometry"))}
                    for e, env in enumerate(rule.get("environments") or [])
                ],
            }
            for r, rule in enumerate(model.get("history") or [])
        ],
        "boundary_options": [(name, f"Base of {name}") for name in units[:-1]],
        "unit_options": [(name, name) for name in units[:-1]],
        "ground_points_text": points_text(ground_level.get("points")),
        "shown_ground_level": ground_level,
        "shown_reference": model.get("reference_levels") or {},
        "ground_level": project.model.get("ground_level"),
        "reference_levels": project.model.get("reference_levels"),
        "band_problem": problem,
    }


PAGE = EditPage("history", "Levels and site history", history_extra, own=SECTIONS)
PAGE.add_undo_route(router)
GROUND_IMPORT = ImportArea("_history_ground_preview.html", "history-ground-preview")


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


# ---------------------------------------------------------------- ground and reference levels


@router.post("/projects/{project_id}/history/ground-level")
def save_ground_level(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)
    return PAGE.edit(
        request,
        db,
        project_id,
        form,
        lambda model: read_ground_level(reader, model),
        reader=reader,
        fallback="ground_level",
    )


@router.post("/projects/{project_id}/history/ground-level/remove")
def remove_ground_level(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    def edit(model: dict) -> str:
        model.pop("ground_level", None)
        return "Removed the ground level"

    return PAGE.edit(request, db, project_id, form, edit, fallback="ground_level")


@router.post("/projects/{project_id}/history/reference-levels")
def save_reference_levels(request: Request, project_id: int, form: PostedForm, db: Db):
    reader = FormReader(form)
    return PAGE.edit(
        request,
        db,
        project_id,
        form,
        lambda model: read_reference_levels(reader, model),
        reader=reader,
        fallback="reference_levels",
    )


def ground_points_of(reader: FormReader, model: dict) -> tuple[list[dict], str]:
    """The points of the uploaded CSV or GIS file, and the file's name."""
    from probewise.errors import OptionNeededError
    from probewise.io.ground_points import read_points_file

    with uploaded_file(reader, "points_file") as (path, filename):
        try:
            points = read_points_file(
                path,
                filename,
                layer=reader.raw("layer").strip() or None,
                target_crs=model.get("crs"),
                level_column=reader.raw("level_column").strip() or None,
                source_crs_override=reader.raw("source_crs").strip() or None,
                assume_local=reader.flag("as_local"),
            )
        except OptionNeededError as exc:
            raise InputError(exc.field, exc.problem) from None
    return points, filename


def points_preview(points: list[dict], filename: str) -> dict[str, Any]:
    levels = [p["level_m"] for p in points]
    return {
        "filename": filename,
        "count": len(points),
        "level_range": (min(levels), max(levels)),
        "x_range": (min(p["x"] for p in points), max(p["x"] for p in points)),
        "y_range": (min(p["y"] for p in points), max(p["y"] for p in points)),
        "first": points[:10],
    }


@router.post("/projects/{project_id}/history/ground-level/import/preview")
def preview_ground_points(request: Request, project_id: int, form: PostedForm, db: Db):
    project = get_project(db, project_id)
    reader = FormReader(form)
    try:
        points, filename = ground_points_of(reader, project.model)
    except InputError as exc:
        return PAGE.answer_import(request, db, project, reader, GROUND_IMPORT, exc)
    preview = points_preview(points, filename)
    return PAGE.answer_import(
        request, db, project, reader, GROUND_IMPORT, None, points_preview=preview
    )


@router.post("/projects/{project_id}/history/ground-level/import")
def import_ground_points(request: Request, project_id: int, form: PostedForm, db: Db):
    from probewise.io.ground_points import apply_ground_points

    project = get_project(db, project_id)
    reader = FormReader(form)
    try:
        points, filename = ground_points_of(reader, project.model)
    except InputError as exc:
        return PAGE.answer_import(request, db, project, reader, GROUND_IMPORT, exc)
    datum = reader.raw("datum").strip() or None
    imported = apply_ground_points(project.model, points, datum)
    message = f"Imported {len(points)} ground-level points from {filename}"
    return PAGE.save_import(
        request, db, project, reader, GROUND_IMPORT, imported, message, file_field="points_file"
    )


# ---------------------------------------------------------------- history rules


def rule_at(model: dict, r: int) -> dict:
    return item_at(model.get("history") or [], r, f"history[{r}]", "history rule")


@router.post("/projects/{project_id}/history/rules/add")
def add_rule(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)

    def edit(model: dict) -> str:
        rules = model.setdefault("history", [])
        rule = {"name": reader.text("name", f"history[{len(rules)}].name", max_len=200)}
        rule.update(base_of=reader.raw("base_of").strip(), environments=[])
        rules.append(rule)
        return f"Added the history rule {rule['name']}"

    def remap(field: str) -> str:
        return re.sub(r"^history\[\d+\]", "new_rule", field)

    return PAGE.edit(
        request, db, project_id, form, edit, reader=reader, own=("new_rule",),
        fallback="new_rule", remap=remap, keep_input=False,
    )  # fmt: skip


@router.post("/projects/{project_id}/history/rules/{r:int}")
def save_rule(request: Request, project_id: int, r: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)

    def edit(model: dict) -> str:
        rule = rule_at(model, r)
        read_rule(reader, f"history[{r}]", rule)
        return f"Changed the history rule {rule['name']}"

    return PAGE.edit(request, db, project_id, form, edit, reader=reader, fallback=f"history[{r}]")


@router.post("/projects/{project_id}/history/rules/{r:int}/remove")
def remove_rule(request: Request, project_id: int, r: int, form: PostedForm, db: Db):
    def edit(model: dict) -> str:
        rule = rule_at(model, r)
        del model["history"][r]
        if not model["history"]:
            del model["history"]
        return f"Removed the history rule {rule.get('name')}"

    return PAGE.edit(
        request, db, project_id, form, edit, fallback=f"history[{r}]", keep_input=False
    )


def _edit_in_slot(request, db, project_id: int, form, edit, reader, r: int, slot: str):
    """An edit that adds former environments to rule ``r``: problems with the new entries are
    shown beside the form ``slot`` that typed or imported them."""

    def remap(field: str) -> str:
        return re.sub(rf"^history\[{r}\]\.environments\[\d+\]", slot, field)

    return PAGE.edit(
        request, db, project_id, form, edit, reader=reader, own=(slot,), fallback=slot,
        remap=remap, keep_input=False,
    )  # fmt: skip


@router.post("/projects/{project_id}/history/rules/{r:int}/environments/add")
def add_environment(request: Request, project_id: int, r: int, form: PostedForm, db: Db):
    reader = FormReader(form)
    slot = f"new_env_{r}"

    def edit(model: dict) -> str:
        envs = rule_at(model, r).setdefault("environments", [])
        env: dict[str, Any] = {}
        read_environment(reader, f"history[{r}].environments[{len(envs)}]", env)
        envs.append(env)
        return f"Added the former environment {env['name']}"

    return _edit_in_slot(request, db, project_id, form, edit, reader, r, slot)


@router.post("/projects/{project_id}/history/rules/{r:int}/environments/{e:int}")
def save_environment(request: Request, project_id: int, r: int, e: int, form: PostedForm, db: Db):
    reader = FormReader(form)
    path = f"history[{r}].environments[{e}]"

    def edit(model: dict) -> str:
        env = item_at(rule_at(model, r).get("environments") or [], e, path, "environment")
        read_environment(reader, path, env)
        return f"Changed the former environment {env['name']}"

    return PAGE.edit(request, db, project_id, form, edit, reader=reader, fallback=path)


@router.post("/projects/{project_id}/history/rules/{r:int}/environments/{e:int}/remove")
def remove_environment(
    request: Request, project_id: int, r: int, e: int, form: PostedForm, db: Db
) -> Response:
    path = f"history[{r}].environments[{e}]"

    def edit(model: dict) -> str:
        envs = rule_at(model, r).get("environments") or []
        env = item_at(envs, e, path, "environment")
        del envs[e]
        return f"Removed the former environment {env.get('name')}"

    return PAGE.edit(request, db, project_id, form, edit, fallback=path, keep_input=False)


@router.post("/projects/{project_id}/history/rules/{r:int}/environments/import")
def import_environments(request: Request, project_id: int, r: int, form: PostedForm, db: Db):
    """Former environments from a GIS file's polygons, each given the typed level band."""
    from probewise.errors import OptionNeededError
    from probewise.io.geo_io import read_polygons

    reader = FormReader(form)
    slot = f"import_env_{r}"

    def edit(model: dict) -> str:
        envs = rule_at(model, r).setdefault("environments", [])
        band: dict[str, Any] = {}
        read_band(reader, slot, band)
        with uploaded_file(reader, "env_file", f"{slot}.env_file") as (path, filename):
            try:
                features = read_polygons(
                    path,
                    filename=filename,
                    target_crs=model.get("crs"),
                    name_column=reader.raw("name_column").strip() or None,
                    source_crs_override=reader.raw("source_crs").strip() or None,
                    assume_local=reader.flag("as_local"),
                )
            except OptionNeededError as exc:
                raise InputError(f"{slot}.env_file", exc.problem) from None
            except InputError as exc:
                raise InputError(f"{slot}.env_file", f"{exc.field}: {exc.problem}") from None
        for feature in features:
            envs.append({"name": feature["name"], "geometry": feature["geometry"], **band})
        return f"Imported {len(features)} former environments from {filename}"

    return _edit_in_slot(request, db, project_id, form, edit, reader, r, slot)


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
