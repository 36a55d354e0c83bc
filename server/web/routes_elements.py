"""The Design elements page: the parts of the works whose cost follows a boundary
(docs/model.md "The value of an investigation"; model file ``elements``).

Each element has a name, a footprint (typed as "x, y" lines as on the Site page, or imported
from a GIS file), the boundary that drives its cost, which way is adverse, a design fractile
and a consequence: a quantity (rate per m3 past a reference depth) or a choice (a cheaper and
a robust design, and the threshold depth the cheaper one needs). Every edit is a revision with
undo; the model checks (fractile in [0.5, 0.999], robust cost not below cheaper, a footprint
inside the site holding a grid cell, a known boundary) answer beside the field, nothing stored.
The map draws each footprint and the evaluation cells it covers.
"""

from __future__ import annotations

from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.errors import InputError
from probewise.io import geo_io
from probewise.store import StoredProject, get_project
from probewise.web.deps import Db
from probewise.web.edits import EditPage, EditResult, FormReader, ImportArea, PostedForm, item_at
from probewise.web.element_map import element_cells_map, elements_map_data
from probewise.web.gis_upload import area_m2, uploaded_gis_file
from probewise.web.polygon_text import parse_polygon_text, polygon_text

router = APIRouter(include_in_schema=False)

ADVERSE = (("deeper", "Deeper is adverse"), ("shallower", "Shallower is adverse"))
KINDS = (("quantity", "Quantity: rate per m\u00b3"), ("choice", "Choice of two designs"))
DEFAULT_FRACTILE = 0.95


def element_rows(model: dict, cells: dict[int, int]) -> list[dict[str, Any]]:
    rows = []
    for n, item in enumerate(model.get("elements") or []):
        geometry = item.get("geometry")
        rows.append(
            {
                "index": n,
                "tag": f"E{n + 1}",
                "item": item,
                "consequence": item.get("consequence") or {},
                "area_m2": area_m2(geometry) if isinstance(geometry, dict) else None,
                "text": polygon_text(geometry) if isinstance(geometry, dict) else "",
                "cells": cells.get(n),
            }
        )
    return rows


def elements_extra(
    db: sqlite_utils.Database, project: StoredProject, model: dict, result: EditResult | None
) -> dict[str, Any]:
    stored = project.model
    cells = element_cells_map(stored)
    units = [u.get("name", "") for u in stored.get("units") or []]
    return {
        "map_data": elements_map_data(stored, cells),
        "element_rows": element_rows(model, {i: c["count"] for i, c in cells.items()}),
        "boundary_options": [(n, f"Base of {n}") for n in units[:-1]],
        "adverse_options": ADVERSE,
        "kind_options": KINDS,
        "grid_spacing_m": stored.get("grid_spacing_m"),
        "preview": None,
    }


PAGE = EditPage("elements", "Design elements", elements_extra, own=("elements",))
PAGE.add_undo_route(router)
IMPORT_AREA = ImportArea("_elements_import_preview.html", "elements-import-preview")


@router.get("/projects/{project_id}/elements")
def elements_page(request: Request, project_id: int, db: Db) -> Response:
    return PAGE.show(request, db, project_id)


# ---------------------------------------------------------------- the form


def read_settings(reader: FormReader, path: str, item: dict) -> None:
    """Boundary, adverse side, fractile and consequence from the form into ``item``."""
    item["base_of"] = reader.text("base_of", f"{path}.base_of")
    item["adverse"] = reader.choice("adverse", f"{path}.adverse", [a for a, _ in ADVERSE])
    fractile = reader.number("design_fractile", f"{path}.design_fractile", required=False)
    item["design_fractile"] = DEFAULT_FRACTILE if fractile is None else fractile
    kind = reader.choice("kind", f"{path}.consequence.kind", [k for k, _ in KINDS])
    at = f"{path}.consequence"
    if kind == "choice":
        item["consequence"] = {
            "kind": "choice",
            "basis": "mean",
            "threshold_depth_m": reader.number("threshold_depth_m", f"{at}.threshold_depth_m"),
            "cheaper_cost": reader.number("cheaper_cost", f"{at}.cheaper_cost", money=True),
            "robust_cost": reader.number("robust_cost", f"{at}.robust_cost", money=True),
        }
    else:
        reference = reader.number("reference_depth_m", f"{at}.reference_depth_m", required=False)
        item["consequence"] = {
            "kind": "quantity",
            "rate_per_m3": reader.number("rate_per_m3", f"{at}.rate_per_m3", money=True),
            "reference_depth_m": 0.0 if reference is None else reference,
        }
    description = reader.text("description", f"{path}.description", required=False, max_len=500)
    if description:
        item["description"] = description
    else:
        item.pop("description", None)


def read_element(reader: FormReader, path: str, item: dict) -> str:
    """Every field of an element from the form into ``item``; returns its name."""
    item["name"] = reader.text("name", f"{path}.name")
    try:
        item["geometry"] = parse_polygon_text(
            reader.raw("geometry_text"), f"{path}.geometry", allow_multi=True
        )
    except InputError as exc:  # the text is shown back from the draft
        reader.problems.append(exc)
        item.setdefault("geometry", {"type": "Polygon", "coordinates": []})
    read_settings(reader, path, item)
    return item["name"]


@router.post("/projects/{project_id}/elements/add")
def add_element(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    def fill(reader: FormReader, path: str, item: dict, model: dict) -> str:
        return f"Added design element {read_element(reader, path, item)}"

    return PAGE.add_item(request, db, project_id, form, "elements", "new_element", fill)


@router.post("/projects/{project_id}/elements/{index:int}")
def save_element(
    request: Request, project_id: int, index: int, form: PostedForm, db: Db
) -> Response:
    reader = FormReader(form)
    path = f"elements[{index}]"

    def edit(model: dict) -> str:
        item = item_at(model.get("elements") or [], index, path, "design element")
        old = dict(item)
        name = read_element(reader, path, item)
        if old.get("name") != name:
            return f"Renamed design element {old.get('name')} to {name}"
        if old.get("geometry") != item.get("geometry"):
            return f"Changed the footprint of design element {name}"
        return f"Changed design element {name}"

    return PAGE.edit(request, db, project_id, form, edit, reader=reader, fallback=path)


@router.post("/projects/{project_id}/elements/{index:int}/remove")
def remove_element(
    request: Request, project_id: int, index: int, form: PostedForm, db: Db
) -> Response:
    return PAGE.remove_item(
        request,
        db,
        project_id,
        form,
        "elements",
        index,
        "design element",
        lambda item: f"Removed design element {item.get('name', index + 1)}",
    )


# ---------------------------------------------------------------- GIS import


def _read_options(reader: FormReader, filename: str, layer: str | None, model: dict) -> dict:
    return {
        "filename": filename,
        "layer": layer,
        "target_crs": model.get("crs"),
        "source_crs_override": reader.raw("source_crs").strip() or None,
        "name_column": reader.raw("name_column").strip() or None,
        "repair": reader.flag("repair"),
        "assume_local": reader.flag("as_local"),
    }


def _features(reader: FormReader, model: dict) -> tuple[list[dict], str, str | None]:
    layer = reader.raw("layer").strip() or None
    with uploaded_gis_file(reader) as (path, filename):
        layers = geo_io.list_layers(path, filename=filename)
        if not layers:
            raise InputError("gis_file", f"{filename} holds no layer with geometry")
        if layer not in layers:
            if len(layers) > 1:
                raise InputError("layer", f"{filename} has {len(layers)} layers; choose one")
            layer = layers[0]
        features = geo_io.read_polygons(path, **_read_options(reader, filename, layer, model))
    return features, filename, layer


def unique_name(name: str, taken: set[str]) -> str:
    """``name``, or ``name (2)``, ``name (3)``... when it is taken."""
    out, n = name, 1
    while out in taken:
        n += 1
        out = f"{name} ({n})"
    taken.add(out)
    return out


@router.post("/projects/{project_id}/elements/import/preview")
def preview_elements(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    project = get_project(db, project_id)
    reader = FormReader(form)
    try:
        features, filename, layer = _features(reader, project.model)
    except InputError as exc:
        return PAGE.answer_import(request, db, project, reader, IMPORT_AREA, exc)
    preview = {
        "filename": filename,
        "layer": layer,
        "features": [{"name": f["name"], "area_m2": area_m2(f["geometry"])} for f in features],
        "outside": geo_io.features_outside_site(project.model, features),
    }
    return PAGE.answer_import(request, db, project, reader, IMPORT_AREA, None, preview=preview)


@router.post("/projects/{project_id}/elements/import")
def import_elements(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    """Each polygon of the file becomes an element with the settings of the import form."""
    project = get_project(db, project_id)
    reader = FormReader(form)
    try:
        features, filename, _ = _features(reader, project.model)
        if not features:
            raise InputError("gis_file", f"{filename} holds no polygon")
        settings: dict[str, Any] = {}
        read_settings(reader, "elements[0]", settings)
        if reader.problems:
            raise reader.problems[0]
    except InputError as exc:
        return PAGE.answer_import(request, db, project, reader, IMPORT_AREA, exc)
    imported = dict(project.model)
    replace = reader.raw("mode") == "replace"
    current = [] if replace else list(project.model.get("elements") or [])
    taken = {e["name"] for e in current}
    added = [
        {"name": unique_name(f["name"], taken), "geometry": f["geometry"], **settings}
        for f in features
    ]
    imported["elements"] = current + added
    message = f"Imported {len(added)} design element{'s' if len(added) != 1 else ''} from " + (
        f"{filename} (replacing the old ones)" if replace else filename
    )
    return PAGE.save_import(
        request, db, project, reader, IMPORT_AREA, imported, message, file_field="gis_file"
    )
