"""Fieldwork: the planned probes of a layout recorded as existing probes of a new stage.

``GET /projects/{id}/fieldwork?layout=NAME`` shows a table with one row per planned probe:
whether it was drilled, its as-drilled position, its final depth (the planned depth to start
with) and the depth it found for the base of each unit (empty: not found above the final
depth; ``absent``: the unit is missing there). A CSV/XLSX table or an AGS4/AGS3 file (probe
ids matching the layout's) fills the table through the probe readers (probewise.io.probes_in)
and stores nothing; "Record" stores the probes with the stage name as one revision
(server/app/fieldwork.py); undo takes it back. Bad input names the field, answers 4xx and
stores nothing.
"""

from __future__ import annotations

import re
from typing import Any

import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.fieldwork import (
    ABSENT,
    FieldworkError,
    ProbeFound,
    found_from_probes,
    layout_entry,
    record_fieldwork,
    used_stages,
)
from probewise.app.results import project_results
from probewise.errors import InputError
from probewise.io import probes_in
from probewise.store import StoredProject, get_project
from probewise.web.ags_mapping import guess_unit
from probewise.web.deps import Db
from probewise.web.edits import (
    FormReader,
    PostedForm,
    expected_revision_of,
    last_change,
    run_edit,
    run_undo,
)
from probewise.web.templating import render_page_or_fragment
from probewise.web.workflow import project_context

router = APIRouter(include_in_schema=False)

TABLE_SUFFIXES = (".csv", ".txt", ".xlsx")


def _units(model: dict) -> list[str]:
    return [u["name"] for u in model["units"][:-1]]


def planned_depths(db: sqlite_utils.Database, project_id: int, name: str) -> dict[str, float]:
    """Planned depth of each probe of a layout (as the schedule gives it); {} when the
    project cannot be evaluated."""
    entry = project_results(db, project_id)
    try:
        plans = entry.memo(
            ("fieldwork-plan", name),
            lambda: entry.evaluator.analysis.plan(entry.core_layout(name)),
        )
    except InputError:
        return {}
    return {plan.probe.id: float(plan.depth_m) for plan in plans}


def _number_text(value: float | str | None) -> str:
    if value is None:
        return ""
    return value if isinstance(value, str) else format(float(value), ".12g")


def default_values(layout: dict, depths: dict[str, float]) -> dict[str, str]:
    """The form as first shown: every probe ticked, at its planned place and depth."""
    values: dict[str, str] = {}
    for i, p in enumerate(layout.get("probes") or []):
        values[f"done_{i}"] = "on"
        values[f"x_{i}"] = _number_text(p["x"])
        values[f"y_{i}"] = _number_text(p["y"])
        depth = p.get("depth_m") or depths.get(p["id"])
        values[f"final_{i}"] = _number_text(None if depth is None else round(depth, 2))
    return values


def found_values(found: list[ProbeFound], units: list[str]) -> dict[str, str]:
    """The form filled from an imported file: the probes it holds ticked, the others not."""
    values: dict[str, str] = {}
    for item in found:
        i = item.row
        values[f"done_{i}"] = "on"
        values[f"x_{i}"] = _number_text(item.x)
        values[f"y_{i}"] = _number_text(item.y)
        values[f"final_{i}"] = _number_text(item.final_depth_m)
        for j, unit in enumerate(units):
            value = item.bases.get(unit)
            values[f"base_{i}_{j}"] = _number_text(value)
    return values


def read_found(reader: FormReader, layout: dict, units: list[str]) -> list[ProbeFound]:
    """The ticked rows of the form; problems of parsing go to ``reader.problems``."""
    found = []
    for i in range(len(layout.get("probes") or [])):
        if not reader.flag(f"done_{i}"):
            continue
        at = f"found[{i}]"
        x = reader.number(f"x_{i}", f"{at}.x")
        y = reader.number(f"y_{i}", f"{at}.y")
        final = reader.number(f"final_{i}", f"{at}.final_depth_m")
        bases: dict[str, float | str] = {}
        for j, unit in enumerate(units):
            text = reader.raw(f"base_{i}_{j}").strip()
            if text.lower() == ABSENT:
                bases[unit] = ABSENT
            elif text:
                value = reader.number(f"base_{i}_{j}", f"{at}.observed.{unit}", required=False)
                if isinstance(value, float):
                    bases[unit] = value
        if not all(isinstance(v, float) for v in (x, y, final)):
            continue
        found.append(ProbeFound(i, reader.raw(f"id_{i}").strip(), x, y, final, bases))
    return found


def fieldwork_context(
    db: sqlite_utils.Database,
    project: StoredProject,
    wanted: str | None,
    *,
    values: dict[str, str] | None = None,
    problems: list[InputError] | None = None,
    notice: dict | None = None,
) -> dict[str, Any]:
    model = project.model
    layouts = model.get("layouts") or []
    names = [lay["name"] for lay in layouts]
    open_names = [lay["name"] for lay in layouts if not lay.get("recorded_stage")]
    chosen = wanted if wanted in names else (open_names[0] if open_names else None)
    context: dict[str, Any] = {
        **project_context(project, "existing"),
        "layout_names": names,
        "chosen": chosen,
        "layout": None,
        "units": _units(model),
        "stages": used_stages(model),
        "notice": notice,
        "last_change": last_change(db, project.id),
        "problems": {},
        "problem_list": [],
        "absent_word": ABSENT,
    }
    if chosen is None:
        return context
    _, layout = layout_entry(model, chosen)
    depths = planned_depths(db, project.id, chosen) if values is None else {}
    shown = values if values is not None else default_values(layout, depths)
    by_field: dict[str, list[str]] = {}
    for p in problems or []:
        by_field.setdefault(p.field, []).append(p.problem)
    context.update(
        layout=layout,
        recorded_stage=layout.get("recorded_stage"),
        values=shown,
        problems=by_field,
        problem_list=[(p.field, p.problem) for p in problems or []],
    )
    return context


def _answer(request: Request, context: dict[str, Any], status: int = 200) -> Response:
    return render_page_or_fragment(
        request, "fieldwork.html", "_fieldwork.html", context, status_code=status
    )


@router.get("/projects/{project_id}/fieldwork")
def fieldwork_page(request: Request, project_id: int, db: Db, layout: str | None = None):
    project = get_project(db, project_id)
    return _answer(request, fieldwork_context(db, project, layout))


def _remap(model: dict, layout: dict) -> Any:
    """Model-check paths of the new probes (``existing[n]``) -> the table's ``found[i]``."""
    first = len(model.get("existing") or [])
    rows = {p["id"]: i for i, p in enumerate(layout.get("probes") or [])}

    def remap(path: str, new: dict) -> str:
        match = re.match(r"^existing\[(\d+)\](.*)$", path)
        if not match or int(match.group(1)) < first:
            return path
        probes = new.get("existing") or []
        n = int(match.group(1))
        row = rows.get(probes[n]["id"]) if n < len(probes) else None
        return path if row is None else f"found[{row}]{match.group(2)}"

    return remap


@router.post("/projects/{project_id}/fieldwork")
def record(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    project = get_project(db, project_id)
    reader = FormReader(form)
    name = reader.raw("layout")
    try:
        _, layout = layout_entry(project.model, name)
    except InputError as exc:
        context = fieldwork_context(db, project, None, problems=[exc])
        context["notice"] = {"kind": "error", "text": f"Not saved: {exc.field}: {exc.problem}."}
        return _answer(request, context, 422)
    units = _units(project.model)
    app_problems: list[InputError] = []
    built: dict[str, dict] = {}

    def edit(model: dict) -> str:
        found = read_found(reader, layout, units)
        try:
            new, message = record_fieldwork(model, name, reader.raw("stage"), found)
        except FieldworkError as exc:
            app_problems.extend(exc.problems)
            raise
        except InputError as exc:
            app_problems.append(exc)
            raise
        built["model"] = new
        model.clear()
        model.update(new)
        return message

    result = run_edit(
        db,
        project_id,
        expected_revision_of(form),
        edit,
        reader=reader,
        keep_input=False,
        page_url=f"/projects/{project_id}/fieldwork",
    )
    if not result.refused:
        notice = dict(result.notice or {})
        context = fieldwork_context(db, result.project, name, notice=notice)
        return _answer(request, context)
    if result.status_code == 409:  # a stale page or a deleted project: nothing read
        context = fieldwork_context(db, result.project, name, notice=result.notice)
        return _answer(request, context, 409)
    if app_problems:  # the entry's own checks (the form's parse problems come first)
        problems = list(reader.problems) + app_problems
    else:  # the form's parse problems and the model checks, placed on the table
        remap = _remap(project.model, layout)
        new = built.get("model", {})
        problems = [InputError(remap(p.field, new), p.problem) for p in result.errors.problems]
    context = fieldwork_context(db, result.project, name, values=reader.values(), problems=problems)
    first = problems[0] if problems else InputError("found", "the entry was refused")
    more = len(problems) - 1
    text = f"Not saved: {first.field}: {first.problem}" + (
        f" (and {more} more, each shown beside its field)." if more else "."
    )
    context["notice"] = {"kind": "error", "text": text}
    return _answer(request, context, result.status_code)


# ---------------------------------------------------------------- a file fills the table


def _ags_probes(data: bytes, filename: str, model: dict, mapping_text: str) -> list[dict]:
    """Existing-probe entries of an AGS4/AGS3 file; each geology code goes to the unit named
    in ``mapping_text`` (``CODE = UNIT`` a line, ``CODE = -`` leaves it out), else to the unit
    guessed from its description."""
    holes = probes_in.read_ags(data, filename=filename)
    units = [u["name"] for u in model["units"]]
    mapping = {
        code: guess_unit(code, description, units)
        for code, description, _n in probes_in.ags4_legends(holes)
    }
    for n, line in enumerate(mapping_text.splitlines(), start=1):
        if not line.strip():
            continue
        code, sep, unit = line.rpartition("=")
        if not sep or not code.strip():
            raise InputError(f"mapping line {n}", f"expected CODE = UNIT, got {line.strip()!r}")
        mapping[code.strip()] = unit.strip()
    mapping = {code: unit for code, unit in mapping.items() if unit}
    first_method = (model.get("methods") or [{}])[0].get("id")  # the plan's method is kept
    result = probes_in.ags4_to_existing(holes, model, mapping, default_method=first_method)
    if result.problems:
        raise InputError(filename, result.problems[0])
    if result.outside_site:
        raise probes_in.outside_error(filename, result.outside_site)
    return result.probes


@router.post("/projects/{project_id}/fieldwork/import")
def import_file(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    project = get_project(db, project_id)
    reader = FormReader(form)
    name = reader.raw("layout")
    try:
        _, layout = layout_entry(project.model, name)
        upload = reader.file("file")
        if upload is None:
            raise InputError("file", "choose a CSV, XLSX or AGS file first")
        data, filename = upload.file.read(), upload.filename or "upload"
        if filename.lower().endswith(TABLE_SUFFIXES):
            first_method = (project.model.get("methods") or [{}])[0].get("id")
            probes = probes_in.parse_csv(
                data, project.model, filename=filename, method_default=first_method
            )
        elif filename.lower().endswith(".ags"):
            probes = _ags_probes(data, filename, project.model, reader.raw("mapping"))
        else:
            raise InputError("file", f"{filename}: give a .csv, .xlsx or .ags file")
        found = found_from_probes(project.model, name, probes, filename)
    except InputError as exc:
        context = fieldwork_context(db, project, name or None, problems=[exc])
        context["notice"] = {
            "kind": "error",
            "text": f"Nothing read: {exc.field}: {exc.problem}.",
        }
        return _answer(request, context, 422)
    values = {
        "stage": reader.raw("stage"),
        "mapping": reader.raw("mapping"),
        **found_values(found, _units(project.model)),
    }
    n = len(found)
    notice = {
        "kind": "info",
        "text": f"Read {n} probe{'s' if n != 1 else ''} of {name} from {filename}; nothing is "
        "stored yet. Check the table, name the stage and press \u201cRecord the fieldwork\u201d.",
    }
    context = fieldwork_context(db, project, name, values=values, notice=notice)
    return _answer(request, context)


@router.post("/projects/{project_id}/fieldwork/undo")
def undo_fieldwork(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    result = run_undo(db, project_id, expected_revision_of(form))
    context = fieldwork_context(db, result.project, FormReader(form).raw("layout") or None)
    context["notice"] = result.notice
    return _answer(request, context, result.status_code)
