"""The Site page: project settings (name, CRS, grid spacing), the outline, zones, areas of
interest and exclusions, entered as coordinates or imported from a GIS file, on a map.

Geometry as text: one "x, y" pair per line (commas, semicolons, tabs or spaces between the
two numbers); the ring is closed automatically. A blank line starts a hole in the polygon
above it; for the site outline, a line "---" starts a further polygon (a MultiPolygon).

GET /projects/{id}/site.json serves what static/js/sitemap.js draws
(``probewise.web.map_data``) for any page.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import JSONResponse, Response

from probewise.core.grid import MAX_GRID_CELLS as CORE_MAX_GRID_CELLS
from probewise.errors import InputError
from probewise.io import geo_io
from probewise.store import StoredProject, get_project
from probewise.web.deps import Db
from probewise.web.edits import EditPage, EditResult, FormReader, ImportArea, PostedForm, item_at
from probewise.web.gis_upload import area_m2, uploaded_gis_file
from probewise.web.map_data import build_map_data
from probewise.web.outline_change import CHOICES, Outside, apply_choices, find_outside, read_choices
from probewise.web.polygon_text import parse_polygon_text, polygon_text

router = APIRouter(include_in_schema=False)

# URL role -> (model key, words for one, words for many, map tag prefix)
ROLES: dict[str, tuple[str, str, str, str]] = {
    "zones": ("zones", "zone", "zones", "Z"),
    "areas": ("areas_of_interest", "area of interest", "areas of interest", "A"),
    "exclusions": ("exclusions", "exclusion", "exclusions", "X"),
}
IMPORT_ROLES = (
    ("site", "Site outline"),
    ("zones", "Zones"),
    ("areas", "Areas of interest"),
    ("exclusions", "Exclusions"),
)


# ---------------------------------------------------------------- derived figures


def grid_cell_count(site: dict | None, spacing_m: Any) -> int | None:
    """Cell centres of the evaluation grid inside the site (aligned as server/core/grid.py:
    first centre half a spacing in from the lower-left corner of the bounding box)."""
    import numpy as np
    import shapely
    from shapely.geometry import shape

    try:
        spacing = float(spacing_m)
        outline = shape(site)
    except Exception:  # noqa: BLE001 - shown back after a refused edit
        return None
    if not (spacing > 0 and math.isfinite(spacing)) or outline.is_empty:
        return None
    min_x, min_y, max_x, max_y = outline.bounds
    nx = max(math.ceil((max_x - min_x) / spacing), 1)
    ny = max(math.ceil((max_y - min_y) / spacing), 1)
    if nx * ny > 4_000_000:
        return round(outline.area / spacing**2)
    xs = min_x + (np.arange(nx) + 0.5) * spacing
    ys = min_y + (np.arange(ny) + 0.5) * spacing
    gx, gy = np.meshgrid(xs, ys)
    return int(shapely.contains_xy(outline, gx.ravel(), gy.ravel()).sum())


def vertex_count(geometry: dict | None) -> int:
    if not geometry:
        return 0
    kind = geometry.get("type")
    polygons = [geometry["coordinates"]] if kind == "Polygon" else geometry.get("coordinates", [])
    return sum(max(len(ring) - 1, 0) for rings in polygons for ring in rings)


# ---------------------------------------------------------------- the page


def _feature_rows(model: dict, role: str) -> list[dict[str, Any]]:
    key, _one, _many, tag = ROLES[role]
    rows = []
    for n, item in enumerate(model.get(key) or []):
        rows.append(
            {
                "index": n,
                "tag": f"{tag}{n + 1}",
                "item": item,
                "area_m2": area_m2(item.get("geometry")),
                "text": polygon_text(item.get("geometry"))
                if isinstance(item.get("geometry"), dict)
                else "",
                "n_overrides": len(item.get("units") or {}) if role == "zones" else 0,
            }
        )
    return rows


def site_extra(
    db: sqlite_utils.Database, project: StoredProject, model: dict, result: EditResult | None
) -> dict[str, Any]:
    stored = project.model
    site = model.get("site") if isinstance(model.get("site"), dict) else stored.get("site")
    cells = grid_cell_count(stored.get("site"), stored.get("grid_spacing_m"))
    return {
        "map_data": build_map_data(stored, include_layouts=False),
        "site_area_m2": area_m2(stored.get("site")),
        "site_vertices": vertex_count(stored.get("site")),
        "site_text": polygon_text(site) if isinstance(site, dict) else "",
        "n_cells": cells,
        "core_max_cells": CORE_MAX_GRID_CELLS,
        "roles": ROLES,
        "feature_rows": {role: _feature_rows(model, role) for role in ROLES},
        "import_roles": IMPORT_ROLES,
        "preview": None,
    }


PAGE = EditPage(
    "site",
    "Site",
    site_extra,
    own=("name", "crs", "grid_spacing_m", "site", "zones", "areas_of_interest", "exclusions"),
)
PAGE.add_undo_route(router)
IMPORT_AREA = ImportArea("_site_import_preview.html", "site-import-preview")


@router.get("/projects/{project_id}/site")
def site_page(request: Request, project_id: int, db: Db) -> Response:
    return PAGE.show(request, db, project_id)


@router.get("/projects/{project_id}/site.json")
def site_json(project_id: int, db: Db) -> JSONResponse:
    """Outline, zones, areas, exclusions, existing probes and layouts for a map."""
    return JSONResponse(build_map_data(get_project(db, project_id).model))


# ---------------------------------------------------------------- settings and outline


def reproject_model(model: dict, source: str, target: str) -> None:
    """Move every coordinate of the model from CRS ``source`` to ``target`` (in place)."""
    from pyproj import Transformer

    transformer = Transformer.from_crs(source, target, always_xy=True)

    def move(coords: Any) -> Any:
        if coords and isinstance(coords[0], int | float):
            x, y = transformer.transform(coords[0], coords[1])
            if not (math.isfinite(x) and math.isfinite(y)):
                raise InputError("crs", f"cannot move ({coords[0]}, {coords[1]}) into {target}")
            return [x, y]
        return [move(c) for c in coords]

    if model.get("site"):
        model["site"]["coordinates"] = move(model["site"]["coordinates"])
    for key in ("zones", "areas_of_interest", "exclusions", "bounds"):
        for item in model.get(key) or []:
            if item.get("geometry"):
                item["geometry"]["coordinates"] = move(item["geometry"]["coordinates"])
    probes = list(model.get("existing") or [])
    for layout in model.get("layouts") or []:
        probes += layout.get("probes") or []
    for probe in probes:
        probe["x"], probe["y"] = move([probe["x"], probe["y"]])


@router.post("/projects/{project_id}/site/settings")
def save_settings(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)

    def edit(model: dict) -> str:
        changes = []
        name = reader.text("name", "name")
        if name and name != model.get("name"):
            model["name"] = name
            changes.append(f"renamed the project to {name}")
        crs_text = reader.text("crs", "crs", required=False) or None
        old_crs = model.get("crs")
        if crs_text != old_crs:
            if crs_text and old_crs and reader.raw("crs_change") == "reproject":
                from probewise.io.model_file import validate_all

                problems = [p for p in validate_all({**model, "crs": crs_text}) if p.field == "crs"]
                if problems:
                    raise problems[0]
                reproject_model(model, old_crs, crs_text)
                changes.append(f"reprojected from {old_crs} to {crs_text}")
            else:
                changes.append(f"set the coordinate system to {crs_text or 'a local site grid'}")
            model["crs"] = crs_text
        spacing = reader.number("grid_spacing_m", "grid_spacing_m")
        if spacing != model.get("grid_spacing_m"):
            model["grid_spacing_m"] = spacing
            if isinstance(spacing, float):
                changes.append(f"set the grid spacing to {spacing:g} m")
        text = "; ".join(changes) or "Saved project settings"
        return text[0].upper() + text[1:]

    return PAGE.edit(request, db, project_id, form, edit, reader=reader)


@router.post("/projects/{project_id}/site/outline")
def save_outline(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    """A new outline; what it leaves outside is listed first, then dealt with as the user
    chose, in the same save (server/web/outline_change.py)."""
    reader = FormReader(form)
    stored = get_project(db, project_id).model
    try:
        geometry = parse_polygon_text(reader.raw("geometry_text"), "site", allow_multi=True)
        problem = None
    except InputError as exc:  # the text is shown back from the draft
        geometry, problem = None, exc
    outside = find_outside(stored, geometry) if geometry else Outside()
    confirmed = reader.flag("outside_confirmed")

    def edit(model: dict) -> str:
        if geometry is None:
            reader.problems.append(problem)
            return "Changed the site outline"
        if outside and not confirmed:
            raise InputError(
                "site",
                "the new outline leaves some of the project outside it; choose below what "
                "to do with each and save again",
            )
        done = apply_choices(model, geometry, read_choices(reader.values()))
        return "Changed the site outline" + (f" ({'; '.join(done)})" if done else "")

    return PAGE.edit(
        request,
        db,
        project_id,
        form,
        edit,
        reader=reader,
        fallback="site",
        more_when_refused={"outline_outside": outside.lines(), "outside_choices": CHOICES},
    )


# ---------------------------------------------------------------- zones, areas, exclusions


def _role(role: str) -> tuple[str, str, str, str]:
    if role not in ROLES:
        from fastapi import HTTPException

        raise HTTPException(404, f"no such part of the site: {role}")
    return ROLES[role]


def _read_feature(reader: FormReader, role: str, path: str, item: dict) -> str:
    """Name, weight (areas) and geometry from the form into ``item``; returns the name."""
    name = reader.text("name", f"{path}.name")
    item["name"] = name
    if role == "areas":
        item["weight"] = reader.number("weight", f"{path}.weight")
    try:
        item["geometry"] = parse_polygon_text(reader.raw("geometry_text"), f"{path}.geometry")
    except InputError as exc:  # the text is shown back from the draft
        reader.problems.append(exc)
        item.setdefault("geometry", {"type": "Polygon", "coordinates": []})
    return name


@router.post("/projects/{project_id}/site/{role}/add")
def add_feature(request: Request, project_id: int, role: str, form: PostedForm, db: Db) -> Response:
    key, one, _many, _tag = _role(role)

    def fill(reader: FormReader, path: str, item: dict, model: dict) -> str:
        if role == "zones":
            item["units"] = {}  # thickness overrides come from the Ground model page
        return f"Added {one} {_read_feature(reader, role, path, item)}"

    return PAGE.add_item(request, db, project_id, form, key, f"new_{role}", fill)


@router.post("/projects/{project_id}/site/{role}/{index:int}")
def save_feature(
    request: Request, project_id: int, role: str, index: int, form: PostedForm, db: Db
) -> Response:
    key, one, _many, _tag = _role(role)
    reader = FormReader(form)

    def edit(model: dict) -> str:
        items = model.get(key) or []
        item = item_at(items, index, f"{key}[{index}]", one)
        old = dict(item)
        name = _read_feature(reader, role, f"{key}[{index}]", item)
        if old.get("geometry") != item.get("geometry"):
            return f"Changed the outline of {one} {name}"
        if old.get("name") != name:
            return f"Renamed {one} {old.get('name')} to {name}"
        return f"Changed {one} {name}"

    return PAGE.edit(request, db, project_id, form, edit, reader=reader, fallback=f"{key}[{index}]")


@router.post("/projects/{project_id}/site/{role}/{index:int}/remove")
def remove_feature(
    request: Request, project_id: int, role: str, index: int, form: PostedForm, db: Db
) -> Response:
    key, one, _many, _tag = _role(role)
    return PAGE.remove_item(
        request,
        db,
        project_id,
        form,
        key,
        index,
        one,
        lambda item: f"Removed {one} {item.get('name', index + 1)}",
    )


# ---------------------------------------------------------------- GIS import


def gis_preview(path: Path, filename: str, reader: FormReader, model: dict) -> dict[str, Any]:
    """What an import would take from the file: layers, columns, features, warnings.

    Raises InputError for a file that cannot be used as it stands (the message says why).
    """
    layers = geo_io.list_layers(path, filename=filename)
    if not layers:
        raise InputError("gis_file", f"{filename} holds no layer with geometry")
    layer = reader.raw("layer").strip() or None
    if layer not in layers:
        layer = layers[0] if len(layers) == 1 else None
    preview: dict[str, Any] = {
        "filename": filename,
        "layers": layers,
        "layer": layer,
        "columns": [],
        "features": [],
        "outside": [],
        "outline_outside": [],
        "outside_choices": CHOICES,
        "problem": None,
        "ready": False,
    }
    if layer is None:
        preview["problem"] = f"{filename} has {len(layers)} layers; choose one and preview again."
        return preview
    preview["columns"] = geo_io.layer_columns(path, filename=filename, layer=layer)
    features = geo_io.read_polygons(path, **_read_options(reader, filename, layer, model))
    preview["features"] = [
        {"name": f["name"], "weight": f.get("weight"), "area_m2": area_m2(f["geometry"])}
        for f in features
    ]
    if reader.raw("role") != "site":
        preview["outside"] = geo_io.features_outside_site(model, features)
    elif features:  # a new outline: what it would leave outside, and the choices for it
        site = geo_io.apply_polygons(model, "site", features, "replace", check=False)["site"]
        preview["outline_outside"] = find_outside(model, site).lines()
    preview["ready"] = True
    return preview


def _read_options(reader: FormReader, filename: str, layer: str | None, model: dict) -> dict:
    role = reader.raw("role")
    return {
        "filename": filename,
        "layer": layer,
        "target_crs": model.get("crs"),
        "source_crs_override": reader.raw("source_crs").strip() or None,
        "name_column": reader.raw("name_column").strip() or None,
        "weight_column": (reader.raw("weight_column").strip() or None) if role == "areas" else None,
        "repair": reader.flag("repair"),
        "assume_local": reader.flag("as_local"),
    }


@router.post("/projects/{project_id}/site/import/preview")
def preview_gis(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    project = get_project(db, project_id)
    reader = FormReader(form)
    try:
        with uploaded_gis_file(reader) as (path, filename):
            preview = gis_preview(path, filename, reader, project.model)
    except InputError as exc:
        return PAGE.answer_import(request, db, project, reader, IMPORT_AREA, exc)
    return PAGE.answer_import(request, db, project, reader, IMPORT_AREA, None, preview=preview)


@router.post("/projects/{project_id}/site/import")
def import_gis(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    project = get_project(db, project_id)
    reader = FormReader(form)
    role = reader.raw("role")
    mode = "replace" if reader.raw("mode") == "replace" or role == "site" else "append"
    notes: list[str] = []
    try:
        if role not in dict(IMPORT_ROLES):
            raise InputError("role", "choose what the polygons are: site, zones, areas, exclusions")
        layer = reader.raw("layer").strip() or None
        with uploaded_gis_file(reader) as (path, filename):
            features = geo_io.read_polygons(
                path, **_read_options(reader, filename, layer, project.model)
            )
        imported = geo_io.apply_polygons(project.model, role, features, mode, check=role != "site")
        if role == "site":  # what the new outline leaves outside, as the user chose
            done = apply_choices(imported, imported["site"], read_choices(reader.values()))
            if done:
                notes.append("outside the new outline: " + "; ".join(done))
        else:
            outside = geo_io.features_outside_site(project.model, features)
            if outside:
                notes.append(
                    f"{len(outside)} of them lie wholly outside the site: {', '.join(outside[:10])}"
                )
    except InputError as exc:
        return PAGE.answer_import(request, db, project, reader, IMPORT_AREA, exc)

    what = dict(IMPORT_ROLES)[role].lower()
    message = (
        f"Imported the site outline from {filename}"
        if role == "site"
        else f"Imported {len(features)} {what} from {filename}"
        + (" (replacing the old ones)" if mode == "replace" else "")
    )
    return PAGE.save_import(
        request,
        db,
        project,
        reader,
        IMPORT_AREA,
        imported,
        message,
        file_field="gis_file",
        warning=f"Note: {notes[0]}" if notes else "",
    )
