"""Options: the project's layouts, edited on a map or in a table, a guidance grid generator and
the optimiser (started here, run by server/app/optimiser_jobs.py).

The page's fragment is ``_options.html`` (root ``#options``); every action answers with it
whole, so the layouts list, the probe table, the revision and the undo button always agree.
The Leaflet map inside it (static/js/sitemap.js) is drawn again after each swap, keeping its
view, and static/js/options.js adds the layout's probes from the JSON the fragment carries.

Probe edits go through ``probewise.web.edits.run_edit``: a stale page is refused (409) and an
invalid result (a probe outside the site, a depth beyond the method's reach) is refused
with the validator's message (422); the store is unchanged either way. A probe inside an
exclusion is allowed by the model file, so it is saved with a visible warning.
"""

from __future__ import annotations

import copy
from typing import Any
from urllib.parse import parse_qs, quote, urlsplit

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.layouts import KIND_LABELS, layout_kind
from probewise.app.optimiser_jobs import latest_optimiser_job
from probewise.app.project import layout_position, model_layout
from probewise.app.results import results_of
from probewise.core.options import GUIDANCE_SPACINGS, guidance_grid_layout
from probewise.errors import InputError
from probewise.io.model_file import unique_layout_name
from probewise.store import StoredProject, get_project
from probewise.web.deps import Db
from probewise.web.edits import (
    EditResult,
    FormReader,
    PostedForm,
    expected_revision_of,
    page_context,
    run_edit,
    run_undo,
)
from probewise.web.layout_edits import (
    exclusion_hits,
    inside_site,
    layout_index,
    layout_warnings,
    method_kinds,
    next_probe_id,
    probe_index,
)
from probewise.web.map_data import map_data
from probewise.web.summary import layout_rows
from probewise.web.templating import kind_label, render_action, render_page_or_fragment

router = APIRouter(include_in_schema=False)

MAX_PROBE_ID = 40


def page_url(project_id: int) -> str:
    return f"/projects/{project_id}/options"


def layout_url(project_id: int, name: str | None) -> str:
    base = page_url(project_id)
    return f"{base}?layout={quote(name, safe='')}" if name else base


# ---------------------------------------------------------------- page context


def probes_data(
    model: dict[str, Any], project: StoredProject, selected: str | None
) -> dict[str, Any]:
    """The selected layout's probes for the map, with the revision every edit must send."""
    kinds = method_kinds(model)
    layout = model_layout(model, selected)
    probes = []
    for p in (layout or {}).get("probes") or []:
        probes.append(
            {
                "id": str(p["id"]),
                "method": p["method"],
                "kind": kinds.get(p["method"], "other"),
                "x": p["x"],
                "y": p["y"],
                "depth_m": p.get("depth_m"),
            }
        )
    base = page_url(project.id)
    return {
        "revision": project.revision,
        "layout": selected,
        "editable": not project.deleted and selected is not None,
        "probes": probes,
        "urls": {
            "add": f"{base}/probes/add",
            "update": f"{base}/probes/update",
            "remove": f"{base}/probes/remove",
        },
    }


def options_context(
    db: sqlite_utils.Database,
    project_id: int,
    selected: str | None = None,
    result: EditResult | None = None,
    add_method: str | None = None,
) -> dict[str, Any]:
    project = result.project if result is not None else get_project(db, project_id)
    context = page_context(
        db,
        project,
        "options",
        result=result,
        page_url=page_url(project_id),
        fragment_id="options",
    )
    model = project.model  # always the stored state: edits here are structural
    context["model"] = model
    layouts = list(model.get("layouts") or [])
    names = [layout["name"] for layout in layouts]
    if selected not in names:
        selected = names[0] if names else None
    methods = model.get("methods") or []
    rows = layout_rows(model)
    kinds = {layout["name"]: layout_kind(layout) for layout in layouts}
    editable = not project.deleted
    layout = model_layout(model, selected)
    job = latest_optimiser_job(db, project_id)
    context.update(
        page_title="Options",
        layouts=[
            {
                "name": row.name,
                "n_probes": row.n_probes,
                "mix": row.mix,
                "kind": kinds[row.name],
                "kind_label": KIND_LABELS.get(kinds[row.name], kinds[row.name]),
                "href": layout_url(project_id, row.name),
                "selected": row.name == selected,
            }
            for row in rows
        ],
        selected=selected,
        layout=layout,
        layout_description=(layout or {}).get("description") or "",
        method_options=[(m["id"], f"{m['id']} \u2014 {m['name']}") for m in methods],
        method_ids=[m["id"] for m in methods],
        add_method=add_method or "",
        method_labels={
            m["id"]: f"{m['name']} ({kind_label(m.get('kind', 'other'))})" for m in methods
        },
        map_json=map_data(model),
        probes_json=probes_data(model, project, selected),
        warnings=layout_warnings(model, selected),
        guidance_spacings=GUIDANCE_SPACINGS,
        job=job,
        job_watching=False,
        editable=editable,
        currency=model.get("currency") or "",
        options_url=page_url(project_id),
    )
    return context


def answer(
    request: Request,
    db: sqlite_utils.Database,
    project_id: int,
    result: EditResult,
    selected: str | None,
    add_method: str | None = None,
) -> Response:
    return render_action(
        request,
        "options.html",
        "_options.html",
        lambda: options_context(db, project_id, selected, result, add_method),
        redirect_to=layout_url(project_id, selected),
        status_code=result.status_code,
    )


def with_exclusion_warning(result: EditResult, model: dict[str, Any], x: float, y: float, pid: str):
    """Turn a saved edit's notice into a warning when the probe landed in an exclusion."""
    if not result.saved:
        return result
    hits = exclusion_hits(model, x, y)
    if hits:
        names = ", ".join(f"\u201c{h}\u201d" for h in hits)
        result.notice = {
            "kind": "warning",
            "text": f"{result.notice['text']} Note: {pid} lies in the exclusion {names}; the "
            "model allows it, but check access, services and permits there.",
        }
    return result


# ---------------------------------------------------------------- pages


@router.get("/projects/{project_id}/options")
def options_page(request: Request, project_id: int, db: Db, layout: str | None = None) -> Response:
    return render_page_or_fragment(
        request, "options.html", "_options.html", options_context(db, project_id, layout)
    )


# ---------------------------------------------------------------- probe edits


def read_point(reader: FormReader, at: str) -> tuple[float, float]:
    x = reader.number("x", f"{at}.x")
    y = reader.number("y", f"{at}.y")
    if reader.problems:
        raise reader.problems[0]
    return float(x), float(y)  # type: ignore[arg-type]


def read_depth(reader: FormReader, at: str) -> float | None:
    depth = reader.number("depth_m", f"{at}.depth_m", required=False)
    if reader.problems:
        raise reader.problems[0]
    if depth is not None and float(depth) <= 0:  # type: ignore[arg-type]
        raise InputError(f"{at}.depth_m", "must be above 0 m (leave it blank to plan the depth)")
    return None if depth is None else float(depth)  # type: ignore[arg-type]


def check_inside(model: dict[str, Any], x: float, y: float, at: str, probe_id: str) -> None:
    if not inside_site(model, x, y):
        raise InputError(
            at,
            f"{probe_id} at ({x:.1f}, {y:.1f}) would lie outside the site; probes go inside "
            "the site outline",
        )


@router.post("/projects/{project_id}/options/probes/add")
def add_probe(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    reader = FormReader(form)
    name = reader.raw("layout")
    added: dict[str, Any] = {}

    def edit(model: dict[str, Any]) -> str:
        i = layout_index(model, name)
        layout = model["layouts"][i]
        j = len(layout["probes"])
        at = f"layouts[{i}].probes[{j}]"
        method = reader.choice("method", f"{at}.method", method_kinds(model))
        if reader.problems:
            raise reader.problems[0]
        x, y = read_point(reader, at)
        depth = read_depth(reader, at)
        pid = reader.text("id", f"{at}.id", required=False, max_len=MAX_PROBE_ID)
        if reader.problems:
            raise reader.problems[0]
        pid = pid or next_probe_id(layout, method)
        if any(str(p["id"]) == pid for p in layout["probes"]):
            raise InputError(f"{at}.id", f"{pid!r} is already a probe of this layout")
        check_inside(model, x, y, f"layouts[{i}]", pid)
        probe: dict[str, Any] = {"id": pid, "method": method, "x": round(x, 2), "y": round(y, 2)}
        if depth is not None:
            probe["depth_m"] = depth
        layout["probes"].append(probe)
        added.update(probe)
        return f"Added probe {pid} ({method}) to layout {name}"

    result = run_edit(db, project_id, expected_revision_of(form), edit, keep_input=False)
    if added:
        result = with_exclusion_warning(
            result, result.project.model, added["x"], added["y"], added["id"]
        )
    return answer(request, db, project_id, result, name, add_method=reader.raw("method"))


@router.post("/projects/{project_id}/options/probes/update")
def update_probe(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    """Move a probe, change its method or its depth; fields left out stay as they are."""
    reader = FormReader(form)
    name = reader.raw("layout")
    probe_id = reader.raw("probe")
    moved: dict[str, Any] = {}

    def edit(model: dict[str, Any]) -> str:
        i = layout_index(model, name)
        layout = model["layouts"][i]
        j = probe_index(layout, probe_id, f"layouts[{i}].probes")
        at = f"layouts[{i}].probes[{j}]"
        probe = layout["probes"][j]
        changes = []
        if "method" in form:
            method = reader.choice("method", f"{at}.method", method_kinds(model))
            if reader.problems:
                raise reader.problems[0]
            if method != probe["method"]:
                probe["method"] = method
                changes.append(f"method {method}")
        if "x" in form or "y" in form:
            x, y = read_point(reader, at)
            if (round(x, 2), round(y, 2)) != (probe["x"], probe["y"]):
                check_inside(model, x, y, f"layouts[{i}]", probe_id)
                probe["x"], probe["y"] = round(x, 2), round(y, 2)
                moved.update(x=probe["x"], y=probe["y"])
                changes.append(f"moved to {probe['x']:.1f}, {probe['y']:.1f}")
        if "depth_m" in form:
            depth = read_depth(reader, at)
            if depth != probe.get("depth_m"):
                if depth is None:
                    probe.pop("depth_m", None)
                    changes.append("depth planned by the model")
                else:
                    probe["depth_m"] = depth
                    changes.append(f"depth {depth:g} m")
        return f"Probe {probe_id} of layout {name}: " + (", ".join(changes) or "no change")

    result = run_edit(db, project_id, expected_revision_of(form), edit, keep_input=False)
    if moved:
        result = with_exclusion_warning(
            result, result.project.model, moved["x"], moved["y"], probe_id
        )
    return answer(request, db, project_id, result, name)


@router.post("/projects/{project_id}/options/probes/remove")
def remove_probe(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    reader = FormReader(form)
    name = reader.raw("layout")
    probe_id = reader.raw("probe")

    def edit(model: dict[str, Any]) -> str:
        i = layout_index(model, name)
        layout = model["layouts"][i]
        j = probe_index(layout, probe_id, f"layouts[{i}].probes")
        del layout["probes"][j]
        return f"Removed probe {probe_id} from layout {name}"

    result = run_edit(db, project_id, expected_revision_of(form), edit, keep_input=False)
    return answer(request, db, project_id, result, name)


# ---------------------------------------------------------------- layouts


def read_layout_name(reader: FormReader, field: str, path: str) -> str:
    name = reader.text(field, path, max_len=120)
    if reader.problems:
        raise reader.problems[0]
    return name


@router.post("/projects/{project_id}/options/layouts/new")
def new_layout(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    reader = FormReader(form)
    created: list[str] = []

    def edit(model: dict[str, Any]) -> str:
        layouts = model.setdefault("layouts", [])
        name = read_layout_name(reader, "name", f"layouts[{len(layouts)}].name")
        if layout_position(model, name) is not None:
            raise InputError(f"layouts[{len(layouts)}].name", f"{name!r} is already a layout")
        layouts.append({"name": name, "origin": "hand", "probes": []})
        created.append(name)
        return f"New layout {name}"

    result = run_edit(db, project_id, expected_revision_of(form), edit, keep_input=False)
    selected = created[0] if created and result.saved else reader.raw("layout") or None
    return answer(request, db, project_id, result, selected)


@router.post("/projects/{project_id}/options/layouts/duplicate")
def duplicate_layout(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    reader = FormReader(form)
    name = reader.raw("layout")
    created: list[str] = []

    def edit(model: dict[str, Any]) -> str:
        i = layout_index(model, name)
        copy_of = copy.deepcopy(model["layouts"][i])
        copy_of["name"] = unique_layout_name(model, f"{name} (copy)")
        copy_of["origin"] = "hand"
        copy_of.pop("optimiser_curve", None)
        copy_of.pop("recorded_stage", None)  # a copy is a plan not yet drilled
        model["layouts"].insert(i + 1, copy_of)
        created.append(copy_of["name"])
        return f"Copied layout {name} as {copy_of['name']}"

    result = run_edit(db, project_id, expected_revision_of(form), edit, keep_input=False)
    return answer(request, db, project_id, result, created[0] if result.saved else name)


@router.post("/projects/{project_id}/options/layouts/rename")
def rename_layout(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    reader = FormReader(form)
    name = reader.raw("layout")
    renamed: list[str] = []

    def edit(model: dict[str, Any]) -> str:
        i = layout_index(model, name)
        new = read_layout_name(reader, "new_name", f"layouts[{i}].name")
        if new != name and layout_position(model, new) is not None:
            raise InputError(f"layouts[{i}].name", f"{new!r} is already a layout")
        model["layouts"][i]["name"] = new
        renamed.append(new)
        return f"Renamed layout {name} to {new}"

    result = run_edit(db, project_id, expected_revision_of(form), edit, keep_input=False)
    return answer(request, db, project_id, result, renamed[0] if result.saved else name)


@router.post("/projects/{project_id}/options/layouts/delete")
def delete_layout(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    reader = FormReader(form)
    name = reader.raw("layout")

    def edit(model: dict[str, Any]) -> str:
        del model["layouts"][layout_index(model, name)]
        return f"Deleted layout {name}"

    result = run_edit(db, project_id, expected_revision_of(form), edit, keep_input=False)
    if result.saved and result.notice:
        result.notice["text"] += " Undo brings it back."
    return answer(request, db, project_id, result, None if result.saved else name)


@router.post("/projects/{project_id}/options/guidance")
def add_guidance_grid(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    reader = FormReader(form)
    created: list[str] = []

    def edit(model: dict[str, Any]) -> str:
        method = reader.choice("method", "guidance.method", method_kinds(model))
        spacing = reader.number("spacing_m", "guidance.spacing_m")
        wanted = reader.text("name", "guidance.name", required=False, max_len=120)
        if reader.problems:
            raise reader.problems[0]
        if float(spacing) <= 0:  # type: ignore[arg-type]
            raise InputError("guidance.spacing_m", "must be a positive number of metres")
        entry = results_of(db, get_project(db, project_id))
        try:
            layout = guidance_grid_layout(entry.project, method, float(spacing), wanted or None)  # type: ignore[arg-type]
        except ValueError as exc:
            raise InputError("guidance.spacing_m", str(exc)) from None
        name = unique_layout_name(model, layout.name)
        model.setdefault("layouts", []).append(
            {
                "name": name,
                "origin": "guidance",
                "description": f"{method} on a {float(spacing):g} m square grid",  # type: ignore[arg-type]
                "probes": [
                    {"id": p.id, "method": p.method, "x": round(p.x, 2), "y": round(p.y, 2)}
                    for p in layout.probes
                ],
            }
        )
        created.append(name)
        return f"Guidance grid {name} ({len(layout.probes)} probes)"

    result = run_edit(db, project_id, expected_revision_of(form), edit, keep_input=False)
    selected = created[0] if result.saved else reader.raw("layout") or None
    return answer(request, db, project_id, result, selected)


def shown_layout(request: Request, form: Any) -> str | None:
    """The layout the page showed: the form's ``layout`` (every htmx request from the page
    includes #options-shown-layout), else the page URL's (HX-Current-URL)."""
    name = FormReader(form).raw("layout")
    if name:
        return name
    current = request.headers.get("hx-current-url") or ""
    values = parse_qs(urlsplit(current).query).get("layout")
    return values[0] if values else None


@router.post("/projects/{project_id}/options/undo")
def undo_options(request: Request, project_id: int, db: Db, form: PostedForm) -> Response:
    result = run_undo(db, project_id, expected_revision_of(form))
    return answer(request, db, project_id, result, shown_layout(request, form))
