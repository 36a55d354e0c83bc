"""The Ground model page: units top to bottom (thickness range, shape, correlation), zone
overrides, boundaries of interest and hard bounds, with a small chart per unit.

Structural rules the page keeps (the validator checks the rest):
- the basal (last) unit has no thickness; it stays last (it cannot be moved or removed) and a
  new unit goes above it unless another place is chosen;
- renaming a unit renames every reference to it (zones, boundaries, bounds, methods, probes);
- removing a unit that anything refers to is refused, naming what refers to it.
The thickness chart is an image route, cached by (project, revision, unit).
"""

from __future__ import annotations

import re
from typing import Any

import sqlite_utils
from fastapi import APIRouter, HTTPException, Request
from starlette.responses import Response

from probewise.core.correlation import CORRELATION_MODELS
from probewise.core.priors import DEFAULT_SHAPE, THICKNESS_SHAPES
from probewise.errors import InputError
from probewise.store import StoredProject, get_project, get_revision
from probewise.web.charts import thickness_chart_svg, thickness_charts
from probewise.web.deps import Db
from probewise.web.edits import (
    EditPage,
    EditRefused,
    EditResult,
    FormReader,
    PostedForm,
    item_at,
)
from probewise.web.ground_units import (
    moments_of,
    rename_unit,
    safe_depth_limits,
    site_moments,
    unit_references,
)
from probewise.web.polygon_text import parse_polygon_text, polygon_text

router = APIRouter(include_in_schema=False)


def ground_extra(
    db: sqlite_utils.Database, project: StoredProject, model: dict, result: EditResult | None
) -> dict[str, Any]:
    units = model.get("units") or []
    names = [u.get("name", "") for u in units]
    limits = safe_depth_limits(model)
    rows = []
    for i, unit in enumerate(units):
        thickness = unit.get("thickness_m")
        rows.append(
            {
                "index": i,
                "unit": unit,
                "basal": i == len(units) - 1,
                "moments": moments_of(thickness) if thickness else None,
                "site_moments": site_moments(thickness, unit.get("presence")),
                "limits": limits.get(unit.get("name")),
                "chart_url": (
                    f"/projects/{project.id}/charts/thickness/{i}.svg?rev={project.revision}"
                    if i < len(project.model["units"]) - 1
                    else None
                ),
            }
        )
    boundaries = names[:-1]
    boi_index = {
        b.get("base_of"): k for k, b in enumerate(model.get("boundaries_of_interest") or [])
    }
    zones = []
    for z, zone in enumerate(model.get("zones") or []):
        overrides = zone.get("units") or {}
        zones.append(
            {
                "index": z,
                "zone": zone,
                "rows": [
                    {
                        "unit_index": j,
                        "name": name,
                        "override": (overrides.get(name) or {}).get("thickness_m"),
                        "default": units[j].get("thickness_m") or {},
                    }
                    for j, name in enumerate(boundaries)
                ],
                "others": [name for name in overrides if name not in boundaries],
            }
        )
    return {
        "unit_rows": rows,
        "boundary_names": boundaries,
        "boi_index": boi_index,
        "limits": limits,
        "zone_rows": zones,
        "bounds": [
            {"index": b, "bound": bound, "text": polygon_text(bound.get("geometry"))}
            for b, bound in enumerate(model.get("bounds") or [])
        ],
        "boundary_options": [(name, f"Base of {name}") for name in boundaries],
        "position_options": [(str(i), name) for i, name in enumerate(names)],
        "shape_options": [(s.name, s.label) for s in THICKNESS_SHAPES.values()],
        "model_options": [(m.name, m.label) for m in CORRELATION_MODELS.values()],
    }


PAGE = EditPage(
    "ground",
    "Ground model",
    ground_extra,
    own=("units", "zones", "boundaries_of_interest", "bounds"),
)
PAGE.add_undo_route(router)


@router.get("/projects/{project_id}/ground")
def ground_page(request: Request, project_id: int, db: Db) -> Response:
    return PAGE.show(request, db, project_id)


# ---------------------------------------------------------------- units


def read_range(reader: FormReader, path: str, suffix: str = "") -> dict[str, Any]:
    return {
        "min": reader.number(f"min{suffix}", f"{path}.min"),
        "likely": reader.number(f"likely{suffix}", f"{path}.likely"),
        "max": reader.number(f"max{suffix}", f"{path}.max"),
        "shape": reader.choice(f"shape{suffix}", f"{path}.shape", tuple(THICKNESS_SHAPES)),
    }


def read_unit(reader: FormReader, path: str, unit: dict, basal: bool) -> None:
    """The unit form's fields into ``unit`` (extra keys of the unit are kept)."""
    unit["name"] = reader.text("name", f"{path}.name")
    unit["description"] = reader.text(
        "description", f"{path}.description", required=False, max_len=2000
    )
    if basal:
        unit.pop("thickness_m", None)
        unit.pop("correlation", None)
        unit.pop("presence", None)
        return
    if "presence" in reader.form:  # optional: empty means present everywhere
        presence = reader.number("presence", f"{path}.presence", required=False)
        if presence is None:
            unit.pop("presence", None)
        else:
            unit["presence"] = presence
    unit["thickness_m"] = {
        **(unit.get("thickness_m") or {}),
        **read_range(reader, f"{path}.thickness_m"),
    }
    unit["correlation"] = {
        **(unit.get("correlation") or {}),
        "model": reader.choice(
            "correlation_model", f"{path}.correlation.model", tuple(CORRELATION_MODELS)
        ),
        "range_m": reader.number("range_m", f"{path}.correlation.range_m"),
    }


def change_words(old: dict, new: dict) -> list[str]:
    words = []
    if old.get("thickness_m") != new.get("thickness_m"):
        words.append("thickness")
    if old.get("correlation") != new.get("correlation"):
        words.append("correlation")
    if (old.get("description") or "") != (new.get("description") or ""):
        words.append("description")
    if old.get("presence") != new.get("presence"):
        words.append("presence")
    return words


@router.post("/projects/{project_id}/ground/units/{index:int}")
def save_unit(request: Request, project_id: int, index: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)

    def edit(model: dict) -> str:
        units = model["units"]
        unit = item_at(units, index, f"units[{index}]", "unit")
        old = dict(unit)
        read_unit(reader, f"units[{index}]", unit, basal=index == len(units) - 1)
        parts = []
        others = [u["name"] for u in units if u is not unit]
        if unit["name"] in others:
            reader.problem(
                f"units[{index}].name", f"\u201c{unit['name']}\u201d is the name of another unit"
            )
        elif unit["name"] and unit["name"] != old["name"]:
            rename_unit(model, old["name"], unit["name"])
            parts.append(f"Renamed unit {old['name']} to {unit['name']}")
        words = change_words(old, unit)
        if words:
            joined = " and ".join([", ".join(words[:-1]), words[-1]] if len(words) > 1 else words)
            parts.append(f"Changed {joined} of {unit['name'] or old['name']}")
        return "; ".join(parts) or f"Saved unit {unit['name']}"

    return PAGE.edit(request, db, project_id, form, edit, reader=reader, fallback=f"units[{index}]")


def _move(request: Request, project_id: int, index: int, form: Any, db: Any, step: int) -> Response:
    def edit(model: dict) -> str:
        units = model["units"]
        unit = item_at(units, index, f"units[{index}]", "unit")
        other = index + step
        basal = len(units) - 1
        if index == basal:
            raise EditRefused(f"units[{index}]", "the basal unit stays at the bottom")
        if not 0 <= other < basal:
            where = "top" if other < 0 else "bottom of the units with a base"
            raise EditRefused(f"units[{index}]", f"{unit['name']} is already at the {where}")
        units[index], units[other] = units[other], units[index]
        relation = "above" if step < 0 else "below"
        return f"Moved {unit['name']} {relation} {units[index]['name']}"

    return PAGE.edit(
        request, db, project_id, form, edit, fallback=f"units[{index}]", keep_input=False
    )


@router.post("/projects/{project_id}/ground/units/{index:int}/up")
def move_unit_up(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
    return _move(request, project_id, index, form, db, -1)


@router.post("/projects/{project_id}/ground/units/{index:int}/down")
def move_unit_down(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
    return _move(request, project_id, index, form, db, +1)


@router.post("/projects/{project_id}/ground/units/{index:int}/remove")
def remove_unit(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
    def check(model: dict, unit: dict) -> None:
        units = model["units"]
        if index == len(units) - 1:
            raise EditRefused(
                f"units[{index}]",
                "the basal unit cannot be removed (every model ends in one); edit it instead",
            )
        if len(units) <= 2:
            raise EditRefused(f"units[{index}]", "a model needs at least 2 units")
        refs = unit_references(model, unit["name"])
        if refs:
            raise EditRefused(
                f"units[{index}]",
                f"{unit['name']} is still referred to by {'; '.join(refs)}. Remove those "
                "references first (Site, Ground model, Methods and Existing pages), then the unit.",
            )

    return PAGE.remove_item(
        request,
        db,
        project_id,
        form,
        "units",
        index,
        "unit",
        lambda unit: f"Removed unit {unit['name']}",
        check=check,
    )


@router.post("/projects/{project_id}/ground/units/add")
def add_unit(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)
    at = {"index": 0}

    def edit(model: dict) -> str:
        units = model["units"]
        position = reader.raw("position").strip()
        index = int(position) if position.isdigit() else len(units) - 1
        index = min(max(index, 0), len(units) - 1)  # never below the basal unit
        at["index"] = index
        unit: dict[str, Any] = {}
        read_unit(reader, f"units[{index}]", unit, basal=False)
        below = units[index]["name"]
        units.insert(index, unit)
        return f"Added unit {unit['name']} above {below}"

    def remap(field: str) -> str:
        return re.sub(rf"^units\[{at['index']}\]", "new_unit", field)

    return PAGE.edit(
        request,
        db,
        project_id,
        form,
        edit,
        reader=reader,
        own=("new_unit",),
        fallback="new_unit",
        remap=remap,
        keep_input=False,
    )


# ---------------------------------------------------------------- zone overrides


@router.post("/projects/{project_id}/ground/zones/{index:int}")
def save_zone_overrides(
    request: Request, project_id: int, index: int, form: PostedForm, db: Db
) -> Response:
    reader = FormReader(form)

    def edit(model: dict) -> str:
        zone = item_at(model.get("zones") or [], index, f"zones[{index}]", "zone")
        names = [u["name"] for u in model["units"][:-1]]
        old = zone.get("units") or {}
        overrides: dict[str, Any] = {}
        for j, name in enumerate(names):
            fields = [reader.raw(f"{k}_{j}").strip() for k in ("min", "likely", "max")]
            if not any(fields):
                continue
            path = f"zones[{index}].units.{name}.thickness_m"
            entry = dict(old.get(name) or {})
            entry["thickness_m"] = read_range(reader, path, f"_{j}")
            overrides[name] = entry
        for name, entry in old.items():  # overrides of units the form does not show
            if name not in names:
                overrides[name] = entry
        zone["units"] = overrides
        return f"Changed the thickness overrides of zone {zone['name']}"

    return PAGE.edit(request, db, project_id, form, edit, reader=reader, fallback=f"zones[{index}]")


# ---------------------------------------------------------------- boundaries of interest


@router.post("/projects/{project_id}/ground/boundaries")
def save_boundaries(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)

    def edit(model: dict) -> str:
        names = [u["name"] for u in model["units"][:-1]]
        old = {b["base_of"]: b for b in model.get("boundaries_of_interest") or []}
        chosen = [name for j, name in enumerate(names) if reader.flag(f"interest_{j}")]
        order = [n for n in old if n in chosen] + [n for n in chosen if n not in old]
        entries = []
        for k, name in enumerate(order):
            j = names.index(name)
            path = f"boundaries_of_interest[{k}]"
            entry = dict(old.get(name) or {"base_of": name})
            entry["weight"] = reader.number(f"weight_{j}", f"{path}.weight")
            entry["tolerance_m"] = reader.number(f"tolerance_{j}", f"{path}.tolerance_m")
            entries.append(entry)
        model["boundaries_of_interest"] = entries
        return "Changed the boundaries of interest"

    return PAGE.edit(
        request, db, project_id, form, edit, reader=reader, fallback="boundaries_of_interest"
    )


# ---------------------------------------------------------------- hard bounds


def read_bound(reader: FormReader, path: str, bound: dict, model: dict) -> None:
    names = [u["name"] for u in model["units"][:-1]]
    bound["base_of"] = reader.choice("base_of", f"{path}.base_of", names)
    bound["min_depth_m"] = reader.number("min_depth_m", f"{path}.min_depth_m")
    bound["max_depth_m"] = reader.number("max_depth_m", f"{path}.max_depth_m")
    text = reader.raw("geometry_text")
    if not text.strip():
        bound["geometry"] = None
        return
    try:
        bound["geometry"] = parse_polygon_text(text, f"{path}.geometry")
    except InputError as exc:
        reader.problems.append(exc)


@router.post("/projects/{project_id}/ground/bounds/{index:int}")
def save_bound(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
    reader = FormReader(form)

    def edit(model: dict) -> str:
        bound = item_at(model.get("bounds") or [], index, f"bounds[{index}]", "bound")
        read_bound(reader, f"bounds[{index}]", bound, model)
        return f"Changed the bound on the base of {bound['base_of']}"

    return PAGE.edit(
        request, db, project_id, form, edit, reader=reader, fallback=f"bounds[{index}]"
    )


@router.post("/projects/{project_id}/ground/bounds/{index:int}/remove")
def remove_bound(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
    return PAGE.remove_item(
        request,
        db,
        project_id,
        form,
        "bounds",
        index,
        "bound",
        lambda bound: f"Removed the bound on the base of {bound['base_of']}",
    )


@router.post("/projects/{project_id}/ground/bounds/add")
def add_bound(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    def fill(reader: FormReader, path: str, bound: dict, model: dict) -> str:
        read_bound(reader, path, bound, model)
        return f"Added a bound on the base of {bound['base_of']}"

    return PAGE.add_item(request, db, project_id, form, "bounds", "new_bound", fill)


# ---------------------------------------------------------------- thickness chart


@router.get("/projects/{project_id}/charts/thickness/{unit_index:int}.svg")
def thickness_chart(project_id: int, unit_index: int, db: Db, rev: int | None = None) -> Response:
    """The unit's thickness density as SVG; ``rev`` pins a revision (then cached for good)."""
    pinned = rev is not None
    if rev is None:
        project = get_project(db, project_id)
        rev, model = project.revision, project.model
    else:
        model = None
    key = (project_id, rev, unit_index)
    svg = thickness_charts.get(key)
    if svg is None:
        if model is None:
            model = get_revision(db, project_id, rev)
        units = model.get("units") or []
        if not 0 <= unit_index < len(units) - 1:
            raise HTTPException(404, f"unit {unit_index + 1} has no thickness (basal or missing)")
        t = units[unit_index]["thickness_m"]
        svg = thickness_chart_svg(
            t.get("shape", DEFAULT_SHAPE), float(t["min"]), float(t["likely"]), float(t["max"])
        )
        thickness_charts.put(key, svg)
    return Response(
        svg,
        media_type="image/svg+xml",
        headers={"Cache-Control": "private, max-age=31536000, immutable" if pinned else "no-cache"},
    )
