"""The Methods and rates page: the catalogue of investigation methods (costs, production,
depth limits, units they cannot penetrate) and the precision table (method x boundary).

Renaming a method's id renames it in the existing probes and layouts that use it; removing a
method that probes or layouts use is refused, naming them.
"""

from __future__ import annotations

from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.io.model_file import METHOD_KINDS
from probewise.io.model_programme import COST_ITEM_KEYS
from probewise.store import StoredProject
from probewise.web.deps import Db
from probewise.web.edits import EditPage, EditRefused, EditResult, FormReader, PostedForm, item_at
from probewise.web.method_programme import read_cost_items, read_method_programme
from probewise.web.method_requirements import add_requirement_routes, requirements_context
from probewise.web.templating import kind_label

router = APIRouter(include_in_schema=False)


def method_usage(model: dict, method_id: str) -> dict[str, list[str]]:
    """Existing probe ids and layout names that use ``method_id``."""
    probes = [p["id"] for p in model.get("existing") or [] if p.get("method") == method_id]
    layouts = [
        layout["name"]
        for layout in model.get("layouts") or []
        if any(p.get("method") == method_id for p in layout.get("probes") or [])
    ]
    return {"probes": probes, "layouts": layouts}


def methods_extra(
    db: sqlite_utils.Database, project: StoredProject, model: dict, result: EditResult | None
) -> dict[str, Any]:
    units = [u.get("name", "") for u in model.get("units") or []]
    methods = model.get("methods") or []
    return {
        "methods": [
            {"index": k, "method": m, "usage": method_usage(project.model, m.get("id"))}
            for k, m in enumerate(methods)
        ],
        "unit_names": units,
        "refusal_unit_options": [("", "(none)")] + [(u, u) for u in units],
        "cost_items": {**dict.fromkeys(COST_ITEM_KEYS), **(model.get("cost_items") or {})},
        "boundary_names": units[:-1],
        "kind_options": [(kind, kind_label(kind)) for kind in METHOD_KINDS],
        **requirements_context(model),
    }


PAGE = EditPage(
    "methods", "Methods and rates", methods_extra, own=("methods", "currency", "cost_items")
)
PAGE.add_undo_route(router)
add_requirement_routes(router, PAGE)  # requirements and what methods deliver


@router.get("/projects/{project_id}/methods")
def methods_page(request: Request, project_id: int, db: Db) -> Response:
    return PAGE.show(request, db, project_id)


@router.post("/projects/{project_id}/methods/currency")
def save_currency(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)

    def edit(model: dict) -> str:
        model["currency"] = reader.text("currency", "currency", required=False, max_len=12)
        return f"Set the currency label to {model['currency'] or '(none)'}"

    return PAGE.edit(request, db, project_id, form, edit, reader=reader)


@router.post("/projects/{project_id}/methods/cost-items")
def save_cost_items(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)
    return PAGE.edit(
        request, db, project_id, form, lambda model: read_cost_items(reader, model), reader=reader
    )


def read_method(reader: FormReader, path: str, method: dict) -> None:
    """The method form's fields into ``method`` (precision and extra keys are kept)."""
    method["id"] = reader.text("id", f"{path}.id", max_len=20)
    method["name"] = reader.text("name", f"{path}.name", max_len=120)
    method["kind"] = reader.choice("kind", f"{path}.kind", METHOD_KINDS)
    method["cost"] = {
        **(method.get("cost") or {}),
        "mobilisation": reader.number("mobilisation", f"{path}.cost.mobilisation", money=True),
        "per_location": reader.number("per_location", f"{path}.cost.per_location", money=True),
        "per_metre": reader.number("per_metre", f"{path}.cost.per_metre", money=True),
    }
    method["metres_per_day"] = reader.number("metres_per_day", f"{path}.metres_per_day")
    method["max_depth_m"] = reader.number("max_depth_m", f"{path}.max_depth_m")
    method["embedment_m"] = reader.number("embedment_m", f"{path}.embedment_m")
    method["cannot_penetrate"] = reader.all("cannot_penetrate")
    method.setdefault("precision_m", {})
    read_method_programme(reader, path, method)  # refusal rules, rigs, moves


def rename_method(model: dict, old: str, new: str) -> None:
    for probe in model.get("existing") or []:
        if probe.get("method") == old:
            probe["method"] = new
    for layout in model.get("layouts") or []:
        for probe in layout.get("probes") or []:
            if probe.get("method") == old:
                probe["method"] = new


@router.post("/projects/{project_id}/methods/{index:int}")
def save_method(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
    reader = FormReader(form)

    def edit(model: dict) -> str:
        method = item_at(model.get("methods") or [], index, f"methods[{index}]", "method")
        old = dict(method)
        read_method(reader, f"methods[{index}]", method)
        if method["id"] and method["id"] != old["id"]:
            if any(m is not method and m.get("id") == method["id"] for m in model["methods"]):
                pass  # the validator names the clash at methods[k].id
            else:
                rename_method(model, old["id"], method["id"])
                return f"Changed method {old['id']} (now {method['id']})"
        changed = []
        if old.get("cost") != method.get("cost"):
            changed.append("costs")
        if any(old.get(k) != method.get(k) for k in ("metres_per_day",)):
            changed.append("production")
        if any(old.get(k) != method.get(k) for k in ("max_depth_m", "embedment_m")):
            changed.append("depth limits")
        if old.get("cannot_penetrate") != method.get("cannot_penetrate"):
            changed.append("refusal units")
        if any(old.get(k) != method.get(k) for k in ("refusal", "proves_refusal")):
            changed.append("refusal rules")
        if any(old.get(k) != method.get(k) for k in ("rigs", "move_days")):
            changed.append("rigs and moves")
        if old.get("name") != method.get("name") or old.get("kind") != method.get("kind"):
            changed.append("name and kind")
        what = " and ".join([", ".join(changed[:-1]), changed[-1]] if len(changed) > 1 else changed)
        return f"Changed {what or 'details'} of method {method['id']}"

    return PAGE.edit(
        request, db, project_id, form, edit, reader=reader, fallback=f"methods[{index}]"
    )


@router.post("/projects/{project_id}/methods/{index:int}/remove")
def remove_method(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
    def check(model: dict, method: dict) -> None:
        usage = method_usage(model, method["id"])
        users = []
        if usage["probes"]:
            shown = ", ".join(usage["probes"][:8]) + (", ..." if len(usage["probes"]) > 8 else "")
            users.append(f"{len(usage['probes'])} existing probe(s) ({shown})")
        if usage["layouts"]:
            users.append(f"layout(s) {', '.join(usage['layouts'])}")
        if users:
            raise EditRefused(
                f"methods[{index}]",
                f"method {method['id']} is used by {' and '.join(users)}; change or delete "
                "those probes first (Existing and Options pages)",
            )

    return PAGE.remove_item(
        request,
        db,
        project_id,
        form,
        "methods",
        index,
        "method",
        lambda method: f"Removed method {method['id']}",
        check=check,
    )


@router.post("/projects/{project_id}/methods/add")
def add_method(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    def fill(reader: FormReader, path: str, method: dict, model: dict) -> str:
        read_method(reader, path, method)
        return f"Added method {method['id']}"

    return PAGE.add_item(request, db, project_id, form, "methods", "new_method", fill)


@router.post("/projects/{project_id}/methods/precision")
def save_precision(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)

    def edit(model: dict) -> str:
        names = [u["name"] for u in model["units"][:-1]]
        for k, method in enumerate(model.get("methods") or []):
            precision = {}
            for j, name in enumerate(names):
                value = reader.number(
                    f"precision_{k}_{j}", f"methods[{k}].precision_m.{name}", required=False
                )
                if value is not None:
                    precision[name] = value
            method["precision_m"] = precision
        return "Changed the precision table"

    return PAGE.edit(request, db, project_id, form, edit, reader=reader, fallback="precision")
