"""Behaviour check: does the potential band behave like the fill or like the natural ground?
(server/app/behaviour.py; docs/model.md "Behaviour of the potential band").

The page shows, for the boundary a history rule bounds (``?base_of=`` picks one), the reading
counts by domain, a strip-and-box figure per parameter, the table of medians, intervals and
tests with a verdict each, the summary and where tests in the band would settle it. The test
results themselves live on the Existing page: a fragment loaded after that page
(``/existing/tests``) lists them per probe with a profile figure, and takes a CSV or AGS4 file
of results (nothing stored unless the whole file reads and the model stays valid).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.levels import history_limits
from probewise.app.results import ProjectResults, project_results, results_of
from probewise.core.insitu import PARAMETER_BY_NAME, unit_factor
from probewise.errors import InputError
from probewise.io.tests_in import merge_tests, read_tests
from probewise.store import get_project
from probewise.web.behaviour_plots import ProfileSeries, StripPanel, domain_strips, probe_profile
from probewise.web.behaviour_view import behaviour_of, behaviour_view, history_boundaries
from probewise.web.deps import Db
from probewise.web.edits import PostedForm, expected_revision_of, run_edit
from probewise.web.forms import FormReader
from probewise.web.result_figures import current_revision_named, image_response
from probewise.web.templating import render, render_page_or_fragment
from probewise.web.workflow import project_context

router = APIRouter(include_in_schema=False)
MAX_UPLOAD_BYTES = 20 * 1024 * 1024


def behaviour_context(db: sqlite_utils.Database, project_id: int, base_of: str | None) -> dict:
    project = get_project(db, project_id)
    entry = results_of(db, project)
    return {
        **project_context(project, "behaviour"),
        "boundaries": history_boundaries(entry.model),
        "view": behaviour_view(entry, base_of),
    }


@router.get("/projects/{project_id}/behaviour")
def behaviour_page(
    request: Request, project_id: int, db: Db, base_of: str | None = None
) -> Response:
    context = behaviour_context(db, project_id, base_of)
    return render_page_or_fragment(request, "behaviour.html", "_behaviour.html", context)


@router.get("/projects/{project_id}/behaviour/strips.svg")
def behaviour_strips(
    request: Request, project_id: int, db: Db, base_of: str | None = None
) -> Response:
    entry = project_results(db, project_id)
    report = behaviour_of(entry, base_of)

    def draw() -> bytes:
        r = report.readings
        panels = []
        for p in report.parameters:
            pick = r.parameter == p.name
            values = tuple(r.value[pick & (r.domain == d)] for d in (0, 1, 2))
            panels.append(StripPanel(p.label, p.unit, values, p.comparison.verdict))
        return domain_strips(panels, seed=report.seed)

    svg = entry.memo(("behaviour-strips", report.boundary), draw)
    return image_response(svg, "image/svg+xml", current_revision_named(request, entry))


# ---------------------------------------------------------------- on the Existing page


def _probe_rows(entry: ProjectResults) -> list[dict[str, Any]]:
    probes = entry.model.get("existing") or []
    bounded = history_boundaries(entry.model)
    lo = hi = np.full(len(probes), np.nan)
    if bounded and probes:
        k = entry.project.ground.boundary_names.index(bounded[0])
        xy = np.array([(p["x"], p["y"]) for p in probes], dtype=float)
        lo, hi = history_limits(entry.project, xy).get(k, (lo, hi))
    rows = []
    for i, p in enumerate(probes):
        tests = p.get("tests") or []
        if not tests:
            continue
        by_param: dict[str, list[float]] = {}
        for t in tests:
            by_param.setdefault(t["parameter"], []).append(float(t["depth_m"]))
        rows.append(
            {
                "index": i,
                "id": p["id"],
                "n": len(tests),
                "parameters": [
                    {"name": k, "n": len(v), "top_m": min(v), "base_m": max(v)}
                    for k, v in by_param.items()
                ],
                "band": None if not np.isfinite(lo[i]) else (float(lo[i]), float(hi[i])),
                "src": f"/projects/{entry.project_id}/existing/tests/{i}.svg?rev={entry.revision}",
            }
        )
    return rows


def tests_context(
    db: sqlite_utils.Database, project_id: int, notice: dict | None = None, error=None
) -> dict:
    project = get_project(db, project_id)
    entry = results_of(db, project)
    bounded = history_boundaries(entry.model)
    return {
        **project_context(project, "existing"),
        "test_rows": _probe_rows(entry),
        "band_of": bounded[0] if bounded else None,
        "notice": notice,
        "tests_error": error,
    }


@router.get("/projects/{project_id}/existing/tests")
def tests_fragment(request: Request, project_id: int, db: Db) -> Response:
    return render(request, "_existing_tests.html", tests_context(db, project_id))


@router.get("/projects/{project_id}/existing/tests/{index:int}.svg")
def tests_profile(request: Request, project_id: int, index: int, db: Db) -> Response:
    entry = project_results(db, project_id)
    probes = entry.model.get("existing") or []
    if not 0 <= index < len(probes) or not probes[index].get("tests"):
        raise InputError("index", f"no existing probe {index} with test results")
    rows = {r["index"]: r for r in _probe_rows(entry)}
    probe = probes[index]

    def draw() -> bytes:
        series: dict[str, list[tuple[float, float]]] = {}
        for t in probe["tests"]:
            spec = PARAMETER_BY_NAME[t["parameter"]]
            value = float(t["value"]) * unit_factor(spec, t["unit"])
            series.setdefault(spec.name, []).append((float(t["depth_m"]), value))
        drawn = [
            ProfileSeries(
                PARAMETER_BY_NAME[name].name,
                PARAMETER_BY_NAME[name].unit,
                np.array([d for d, _ in pairs]),
                np.array([v for _, v in pairs]),
            )
            for name, pairs in series.items()
        ]
        bounded = history_boundaries(entry.model)
        observed = probe["observed"].get(bounded[0]) if bounded else None
        return probe_profile(
            f"{probe['id']}: test results by depth; shaded, the band of the fill base",
            drawn,
            rows[index]["band"],
            observed,
        )

    svg = entry.memo(("tests-profile", index), draw)
    return image_response(svg, "image/svg+xml", current_revision_named(request, entry))


@router.post("/projects/{project_id}/existing/tests/import")
def tests_import(request: Request, project_id: int, form: PostedForm, db: Db) -> Response:
    reader = FormReader(form)
    status = 200
    notice = error = None
    try:
        upload = reader.file("tests_file")
        if upload is None:
            raise InputError("tests_file", "choose a CSV or AGS4 file of test results first")
        data = upload.file.read(MAX_UPLOAD_BYTES + 1)
        if len(data) > MAX_UPLOAD_BYTES:
            raise InputError("tests_file", "is larger than the 20 MB limit for uploads")
        filename = upload.filename or "upload"
        mode = "replace" if reader.raw("mode") == "replace" else "append"
        stored = get_project(db, project_id)
        read = read_tests(data, stored.model, filename=filename)
        merged = merge_tests(stored.model, read, mode)
    except InputError as exc:
        error = {"field": exc.field, "problem": exc.problem}
        status = 422
    else:

        def edit(model: dict) -> str:
            model.clear()
            model.update(merged)
            return f"Imported {read.total} test results on {len(read.by_probe)} probes"

        result = run_edit(db, project_id, expected_revision_of(form), edit, keep_input=False)
        status, notice = result.status_code, result.notice
        if result.refused and result.errors.problems:
            first = result.errors.problems[0]
            error = {"field": "tests_file", "problem": f"{first.label}: {first.problem}"}
    context = tests_context(db, project_id, notice, error)
    return render(request, "_existing_tests.html", context, status_code=status)
