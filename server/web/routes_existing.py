"""The Existing information page: earlier probes and the base depths they recorded.

Rows are edited one at a time (``?edit=N`` opens row N), added and deleted; probes come in
from CSV/XLSX tables (preview, then import) or AGS4/AGS3 files (a mapping step assigns each
geology code to a project unit, or text rules place layers by their description, and each
location type gets a method, then preview, then import) through probewise.io.probes_in. Both
previews show each unit's thickness in the holes (server/app/thickness_stats.py). Probes
outside the site are listed and only left out when the user ticks that box; a bad file
stores nothing.
"""

from __future__ import annotations

from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.thickness_stats import thickness_view
from probewise.errors import InputError
from probewise.io import probes_in
from probewise.store import StoredProject, get_project
from probewise.web.ags_mapping import ags4_state
from probewise.web.deps import Db
from probewise.web.edits import (
    EditPage,
    EditRefused,
    EditResult,
    FormReader,
    ImportArea,
    PostedForm,
    item_at,
)
from probewise.web.map_data import build_map_data

router = APIRouter(include_in_schema=False)

MAX_PREVIEW_ROWS = 200
# ---------------------------------------------------------------- the page


def existing_extra(
    db: sqlite_utils.Database, project: StoredProject, model: dict, result: EditResult | None
) -> dict[str, Any]:
    stored = project.model
    kinds = {m["id"]: m.get("kind", "other") for m in model.get("methods") or []}
    names = [u.get("name", "") for u in (model.get("units") or [])[:-1]]
    return {
        "probes": [
            {"index": i, "probe": p, "kind": kinds.get(p.get("method"), "other")}
            for i, p in enumerate(model.get("existing") or [])
        ],
        "boundary_names": names,
        "method_options": [
            (m["id"], f"{m['id']} \u2014 {m.get('name', '')}") for m in model.get("methods") or []
        ],
        "method_id_options": [(m["id"], m["id"]) for m in model.get("methods") or []],
        "map_data": build_map_data(stored, include_layouts=False),
        "editing": None,
        "csv_preview": None,
        "ags4": None,
        "import_error": None,
        "import_which": None,
        "import_form": {},
    }


PAGE = EditPage("existing", "Existing information", existing_extra, own=("existing",))
PAGE.add_undo_route(router)


@router.get("/projects/{project_id}/existing")
def existing_page(request: Request, project_id: int, db: Db, edit: int | None = None) -> Response:
    return PAGE.show(request, db, project_id, editing=edit)


# ---------------------------------------------------------------- rows


def read_probe(reader: FormReader, path: str, probe: dict, model: dict) -> None:
    """The row's fields into ``probe`` (precision overrides and extra keys are kept)."""
    methods = [m["id"] for m in model.get("methods") or []]
    names = [u["name"] for u in model["units"][:-1]]
    probe["id"] = reader.text("id", f"{path}.id", max_len=80)
    probe["method"] = reader.choice("method", f"{path}.method", methods)
    probe["x"] = reader.number("x", f"{path}.x")
    probe["y"] = reader.number("y", f"{path}.y")
    probe["final_depth_m"] = reader.number("final_depth_m", f"{path}.final_depth_m")
    observed = {}
    for j, name in enumerate(names):
        value = reader.number(f"base_{j}", f"{path}.observed.{name}", required=False)
        if value is not None:
            observed[name] = value
    old = probe.get("observed") or {}
    observed.update({k: v for k, v in old.items() if k not in names})  # basal or unknown: kept
    probe["observed"] = observed


@router.post("/projects/{project_id}/existing/{index:int}")
def save_probe(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
    reader = FormReader(form)

    def edit(model: dict) -> str:
        probes = model.get("existing") or []
        probe = item_at(probes, index, f"existing[{index}]", "probe")
        old_id = probe.get("id")
        read_probe(reader, f"existing[{index}]", probe, model)
        if probe["id"] != old_id:
            return f"Changed probe {old_id} (now {probe['id']})"
        return f"Changed probe {probe['id']}"

    return PAGE.edit(
        request,
        db,
        project_id,
        form,
        edit,
        reader=reader,
        fallback=f"existing[{index}]",
        more_when_refused={"editing": index},
    )


@router.post("/projects/{project_id}/existing/{index:int}/remove")
def remove_probe(request: Request, project_id: int, index: int, form: PostedForm, db: Db):
    return PAGE.remove_item(
        request,
        db,
        project_id,
        form,
        "existing",
        index,
        "probe",
        lambda probe: f"Deleted existing probe {probe['id']}",
    )


@router.post("/projects/{project_id}/existing/add")
def add_probe(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    def fill(reader: FormReader, path: str, probe: dict, model: dict) -> str:
        read_probe(reader, path, probe, model)
        return f"Added existing probe {probe['id']}"

    return PAGE.add_item(request, db, project_id, form, "existing", "new_probe", fill)


# ---------------------------------------------------------------- imports: shared


def _upload(reader: FormReader, name: str, what: str) -> tuple[bytes, str]:
    upload = reader.file(name)
    if upload is None:
        raise InputError(name, f"choose {what} first")
    return upload.file.read(), upload.filename or "upload"


def _import_area(which: str) -> ImportArea:
    """The CSV or the AGS4 import's area (#csv-preview, #ags4-preview)."""
    return ImportArea(f"_existing_{which}_preview.html", f"{which}-preview")


def _import_answer(
    request: Request,
    db: sqlite_utils.Database,
    project: StoredProject,
    reader: FormReader,
    which: str,
    error: InputError | None,
    **state: Any,
) -> Response:
    """The import area of ``which`` ("csv", "ags4") alone for htmx, else the page."""
    area = _import_area(which)
    return PAGE.answer_import(
        request, db, project, reader, area, error, import_which=which, **state
    )


def _save_import(
    request: Request,
    db: sqlite_utils.Database,
    project: StoredProject,
    reader: FormReader,
    which: str,
    probes: list[dict],
    message: str,
    left_out: list[str],
) -> Response:
    mode = "replace" if reader.raw("mode") == "replace" else "append"
    try:
        merged = probes_in.merge_existing(project.model, probes, mode)
    except InputError as exc:
        return _import_answer(request, db, project, reader, which, exc)

    return PAGE.save_import(
        request,
        db,
        project,
        reader,
        _import_area(which),
        merged,
        message + (" (replacing the old ones)" if mode == "replace" else ""),
        file_field=f"{which}_file",
        warning=f"Left out: {'; '.join(left_out)}" if left_out else "",
        import_which=which,
    )


def _ids(ids: list[str]) -> str:
    return ", ".join(ids[:10]) + (f" and {len(ids) - 10} more" if len(ids) > 10 else "")


# ---------------------------------------------------------------- CSV / XLSX


def _csv_options(reader: FormReader) -> dict[str, Any]:
    return {"method_default": reader.raw("default_method").strip() or None}


def _read_csv(reader: FormReader, model: dict) -> tuple[bytes, str, probes_in.ProbePreview]:
    """The uploaded table, its name and what it holds."""
    data, filename = _upload(reader, "csv_file", "a CSV or XLSX table")
    preview = probes_in.preview_csv(data, model, filename=filename, **_csv_options(reader))
    return data, filename, preview


@router.post("/projects/{project_id}/existing/import/csv/preview")
def preview_csv(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    project = get_project(db, project_id)
    reader = FormReader(form)
    try:
        _data, filename, preview = _read_csv(reader, project.model)
    except InputError as exc:
        return _import_answer(request, db, project, reader, "csv", exc)
    thickness = thickness_view(project.model, preview.importable)
    return _import_answer(
        request,
        db,
        project,
        reader,
        "csv",
        None,
        csv_preview=preview,
        preview_file=filename,
        thickness=thickness,
    )


@router.post("/projects/{project_id}/existing/import/csv")
def import_csv(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    project = get_project(db, project_id)
    reader = FormReader(form)
    leave_outside = reader.flag("leave_outside")
    preview = None
    try:
        data, filename, preview = _read_csv(reader, project.model)
        probes = probes_in.parse_csv(
            data,
            project.model,
            filename=filename,
            leave_outside=leave_outside,
            **_csv_options(reader),
        )
    except InputError as exc:
        return _import_answer(request, db, project, reader, "csv", exc, csv_preview=preview)
    left_out = []
    if preview.outside_site:
        left_out.append(
            f"{len(preview.outside_site)} outside the site ({_ids(preview.outside_site)})"
        )
    message = (
        f"Imported {len(probes)} existing probe{'s' if len(probes) != 1 else ''} from {filename}"
    )
    return _save_import(request, db, project, reader, "csv", probes, message, left_out)


# ---------------------------------------------------------------- AGS4


def _read_ags4(reader: FormReader, model: dict) -> tuple[probes_in.Ags4Holes, dict[str, Any]]:
    """The uploaded AGS4 file's holes and its mapping step (see ags4_state)."""
    data, filename = _upload(reader, "ags4_file", "an AGS4 file")
    holes = probes_in.read_ags(data, filename=filename)
    return holes, ags4_state(holes, reader, model, filename)


def _ags4_choices(state: dict[str, Any]) -> tuple[dict[str, str], dict[str, str]]:
    mapping = {c["code"]: c["unit"] for c in state["codes"] if c["unit"]}
    by_type = {t["type"]: t["method"] for t in state["types"] if t["method"]}
    return mapping, by_type


def _ags4_result(
    holes: probes_in.Ags4Holes, state: dict[str, Any], model: dict
) -> probes_in.ImportResult:
    mapping, by_type = _ags4_choices(state)
    if state["undecided"]:
        shown = ", ".join(f"{c} ({n} layer(s))" for c, n in state["undecided"].items())
        raise InputError(
            "mapping",
            f"choose a unit (or \u201cleave out\u201d) for code(s) {shown}, or add text rules "
            "that match their descriptions",
        )
    untyped = [t["type"] or "(blank)" for t in state["types"] if not t["method"]]
    if untyped:
        raise InputError("method", f"choose a method for location type(s) {', '.join(untyped)}")
    return probes_in.ags4_to_existing(holes, model, mapping, by_type, text_rules=state["rules"])


@router.post("/projects/{project_id}/existing/import/ags4/preview")
def preview_ags4(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    project = get_project(db, project_id)
    reader = FormReader(form)
    state = None
    try:
        holes, state = _read_ags4(reader, project.model)
        if reader.raw("step") == "preview":
            state["result"] = _ags4_result(holes, state, project.model)
            state["thickness"] = thickness_view(project.model, state["result"].importable)
    except InputError as exc:
        return _import_answer(request, db, project, reader, "ags4", exc, ags4=state)
    return _import_answer(request, db, project, reader, "ags4", None, ags4=state)


@router.post("/projects/{project_id}/existing/import/ags4")
def import_ags4(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    project = get_project(db, project_id)
    reader = FormReader(form)
    state = None
    try:
        holes, state = _read_ags4(reader, project.model)
        result = _ags4_result(holes, state, project.model)
        state["result"] = result
        if result.outside_site and not reader.flag("leave_outside"):
            raise InputError(
                "ags4_file",
                f"{len(result.outside_site)} location(s) lie outside the site: "
                f"{_ids(result.outside_site)}; check the coordinates and the CRS, or tick "
                "\u201cLeave out the probes outside the site\u201d",
            )
        if result.problems and not reader.flag("skip_problems"):
            raise InputError(
                "ags4_file",
                f"{len(result.problems)} problem(s), listed below; fix the file or tick "
                "\u201cLeave out the locations with problems\u201d",
            )
        if not result.importable:
            raise EditRefused("ags4_file", "no location is left to import")
    except InputError as exc:
        return _import_answer(request, db, project, reader, "ags4", exc, ags4=state)
    left_out = []
    if result.outside_site:
        left_out.append(
            f"{len(result.outside_site)} outside the site ({_ids(result.outside_site)})"
        )
    if result.problems:
        left_out.append(f"{len(result.problems)} with problems")
    n = len(result.importable)
    message = (
        f"Imported {n} existing probe{'s' if n != 1 else ''} from {state['filename']} "
        f"({holes.format})"
    )
    return _save_import(request, db, project, reader, "ags4", result.importable, message, left_out)
