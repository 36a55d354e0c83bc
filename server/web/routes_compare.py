"""Compare: every option's cost, duration and information gain, the cost-gain chart, maps of
the uncertainty before and after the chosen option, and a section along a line.

The page itself answers at once: it is a shell whose heavy part (``_compare_results.html``)
loads with ``hx-get`` on load, computed from the shared per-revision results
(``probewise.app.results``). Figures are images served by their own routes and cached per revision:
``chart.svg``, ``map.png`` (one boundary, before and after) and ``section.png``.
"""

from __future__ import annotations

from typing import Any
from urllib.parse import urlencode

import numpy as np
import sqlite_utils
from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.layouts import KIND_LABELS
from probewise.app.levels import history_limits
from probewise.app.results import ProjectResults, project_results, results_of
from probewise.app.sections import SectionLine, default_section, read_section
from probewise.core.bounds import truncated_quantiles
from probewise.core.evaluate import LayoutResult
from probewise.errors import InputError
from probewise.store import get_project
from probewise.web import plots
from probewise.web.deps import Db
from probewise.web.map_data import map_data
from probewise.web.result_figures import (
    chosen_layout,
    current_revision_named,
    existing_points,
    image_response,
    planned_points,
    raster_of,
    section_layout,
)
from probewise.web.templating import render, render_page_or_fragment
from probewise.web.workflow import project_context

router = APIRouter(include_in_schema=False)

QUANTITIES = {
    "std": ("Posterior standard deviation", "Posterior std (m)"),
    "width": ("P5\u2013P95 width", "P5\u2013P95 width (m)"),
}
QUANTITY_PHRASES = {"std": "posterior standard deviation", "width": "P5\u2013P95 width"}
SECTION_SAMPLES = 200


def quantity_of(value: str | None) -> str:
    return value if value in QUANTITIES else "std"


def boundary_title(name: str) -> str:
    return f"Base of {name}"


def uncertainty_map_png(entry: ProjectResults, layout: str, boundary: int, quantity: str) -> bytes:
    """One boundary before and after a layout, on one colour scale (cached per revision)."""

    def draw() -> bytes:
        result = entry.result_named(layout)
        base = entry.evaluator.baseline.grid
        after = result.grid
        pick = (
            (lambda g: g.std_m[:, boundary])
            if quantity == "std"
            else (lambda g: g.width90_m[:, boundary])
        )
        existing = existing_points(entry)
        names = entry.project.ground.boundary_names
        label = QUANTITIES[quantity][1]
        return plots.uncertainty_maps(
            raster_of(entry),
            [
                ("Existing information only", pick(base), existing),
                (f"With {layout}", pick(after), existing + planned_points(entry, result)),
            ],
            plots.SiteShapes.of_model(entry.model),
            title=f"{boundary_title(names[boundary])}: {QUANTITY_PHRASES[quantity]}",
            quantity_label=label,
            crs=entry.project.crs,
        )

    return entry.memo(("map", layout, boundary, quantity), draw)


def chart_svg(entry: ProjectResults, chosen: str | None) -> bytes:
    def draw() -> bytes:
        ranking = entry.ranking()
        points = [
            plots.ChartPoint(o.name, o.cost, o.information_gain_bits, o.pareto, o.name == chosen)
            for o in ranking
        ]
        curves = []
        layouts = entry.model.get("layouts") or []
        ordered = sorted(layouts, key=lambda lay: lay["name"] != chosen)
        for layout in ordered:
            curve = layout.get("optimiser_curve")
            if isinstance(curve, list) and curve:
                try:
                    pts = tuple(
                        (float(p["cost"]), float(p["information_gain_bits"])) for p in curve
                    )
                except (KeyError, TypeError, ValueError):
                    continue
                curves.append(plots.ChartCurve(layout["name"], pts))
        return plots.cost_gain_chart(points, curves, currency=entry.project.currency)

    return entry.memo(("chart", chosen), draw)


# ---------------------------------------------------------------- section


def section_png(entry: ProjectResults, layout: str, line: SectionLine) -> bytes:
    def draw() -> bytes:
        analysis = entry.evaluator.analysis
        t = np.linspace(0.0, 1.0, SECTION_SAMPLES)
        xy = np.column_stack([line.x1 + t * (line.x2 - line.x1), line.y1 + t * (line.y2 - line.y1)])
        distance = t * line.length_m
        names = entry.project.ground.boundary_names
        result = entry.result_named(layout)

        limits = history_limits(entry.project, xy)  # maximum/minimum potential levels

        def bands(layout_obj) -> list[plots.SectionBand]:
            post = analysis.at_points(xy, layout_obj)
            p50 = truncated_quantiles(post.mean_m, post.std_m, post.lo_m, post.hi_m, 0.5)
            return [
                plots.SectionBand(
                    name, post.p05_m[:, k], p50[:, k], post.p95_m[:, k], *limits.get(k, ())
                )
                for k, name in enumerate(names)
            ]

        existing, planned = section_probes(entry, result, line)
        return plots.depth_section(
            distance,
            [
                ("Existing information only", bands(None), existing),
                (f"With {layout}", bands(entry.core_layout(layout)), existing + planned),
            ],
            title=(
                f"Section from ({line.x1:.0f}, {line.y1:.0f}) to ({line.x2:.0f}, {line.y2:.0f}), "
                f"{line.length_m:.0f} m: P5, P50 and P95 of every boundary"
            ),
        )

    return entry.memo(("section", layout, *line.query().values()), draw)


def section_buffer_m(line: SectionLine) -> float:
    """Probes this close to the line are shown on it: 10% of its length, at least 10 m."""
    return max(0.1 * line.length_m, 10.0)


def section_probes(
    entry: ProjectResults, result: LayoutResult, line: SectionLine
) -> tuple[list[plots.SectionProbe], list[plots.SectionProbe]]:
    """Existing and planned probes within the buffer, projected onto the line."""
    a = np.array([line.x1, line.y1])
    d = np.array([line.x2 - line.x1, line.y2 - line.y1])
    length2 = float(d @ d)
    buffer = section_buffer_m(line)
    methods = entry.project.methods

    def project(x: float, y: float) -> float | None:
        s = float((np.array([x, y]) - a) @ d) / length2
        if s < 0 or s > 1:
            return None
        offset = np.array([x, y]) - (a + s * d)
        return s * line.length_m if float(np.hypot(*offset)) <= buffer else None

    existing = []
    for p in entry.project.existing:
        at = project(p.x, p.y)
        if at is not None:
            kind = methods[p.method].kind if p.method in methods else "other"
            existing.append(plots.SectionProbe(p.id, at, p.final_depth_m, kind, True))
    planned = []
    for plan in result.plans:
        at = project(plan.probe.x, plan.probe.y)
        if at is not None:
            kind = methods[plan.probe.method].kind
            planned.append(plots.SectionProbe(plan.probe.id, at, plan.depth_m, kind, False))
    return existing, planned


# ---------------------------------------------------------------- page context


def ranking_rows(entry: ProjectResults, chosen: str | None) -> list[dict[str, Any]]:
    rows = []
    for option in entry.ranking():
        rows.append(
            {
                "name": option.name,
                "kind": option.kind,
                "kind_label": KIND_LABELS.get(option.kind, option.kind),
                "n_probes": option.n_probes,
                "cost": option.cost,
                "duration_days": option.duration_days,
                "metres": option.metres,
                "gain_bits": option.information_gain_bits,
                "gain_per_1000": None
                if option.gain_per_cost is None
                else 1000.0 * option.gain_per_cost,
                "pareto": option.pareto,
                "chosen": option.name == chosen,
                "expected_saving": option.expected_saving,
                "net_value": option.net_value,
                "benefit_cost": option.benefit_cost_ratio,
                "p_cheaper": option.p_cheaper_allowed,
                "requirements_met": option.requirements_met,
                "unmet": option.unmet,
            }
        )
    return rows


def boundary_rows(entry: ProjectResults, result: LayoutResult | None) -> list[dict[str, Any]]:
    """Per boundary: before and after (std, width, confident share), interest marked."""
    interest = {b.boundary: b for b in entry.project.ground.boundaries_of_interest}
    rows = []
    for k, name in enumerate(entry.project.ground.boundary_names):
        before = entry.evaluator.baseline.boundaries[name]
        after = result.boundaries[name] if result is not None else None
        boi = interest.get(k)
        rows.append(
            {
                "index": k,
                "name": name,
                "weight": boi.weight if boi else None,
                "tolerance_m": boi.tolerance_m if boi else None,
                "before": before,
                "after": after,
            }
        )
    return rows


def compare_urls(project_id: int, layout: str | None, quantity: str, revision: int) -> dict:
    base = f"/projects/{project_id}/compare"
    query = {"quantity": quantity, "rev": str(revision)}
    if layout:
        query["layout"] = layout
    return {"base": base, "query": urlencode(query)}


def results_context(
    db: sqlite_utils.Database,
    project_id: int,
    wanted: str | None,
    quantity: str,
    section: SectionLine | None = None,
) -> dict[str, Any]:
    project = get_project(db, project_id)
    entry = results_of(db, project)
    context: dict[str, Any] = {
        "project": project,
        "currency": project.model.get("currency") or "",
        "quantity": quantity,
        "quantities": QUANTITIES,
        "quantity_phrase": QUANTITY_PHRASES[quantity],
        "problem": None,
        "chosen": None,
        "ranking": [],
        "boundaries": [],
        "grid_notice": None,
    }
    try:
        evaluator = entry.evaluator
    except InputError as exc:
        context["problem"] = f"{exc.field}: {exc.problem}"
        return context
    chosen = chosen_layout(entry, wanted)
    result = entry.result_named(chosen) if chosen else None
    context.update(
        chosen=chosen,
        ranking=ranking_rows(entry, chosen) if chosen else [],
        boundaries=boundary_rows(entry, result),
        grid=evaluator.grid,
        grid_notice=getattr(evaluator, "grid_notice", None),
        urls=compare_urls(project_id, chosen, quantity, project.revision),
        result=result,
    )
    if chosen:
        context.update(section_context(entry, project_id, chosen, section))
    return context


def section_context(
    entry: ProjectResults,
    project_id: int,
    chosen: str,
    line: SectionLine | None,
    notice: dict | None = None,
) -> dict[str, Any]:
    line = line or default_section(entry.model)
    query = {"layout": chosen, "rev": str(entry.revision), **line.query()}
    kinds = {m_id: m.kind for m_id, m in entry.project.methods.items()}
    layout = entry.core_layout(chosen)
    return {
        "chosen": chosen,
        "section": line,
        "section_buffer_m": section_buffer_m(line),
        "section_src": f"/projects/{project_id}/compare/section.png?{urlencode(query)}",
        "section_notice": notice,
        "compare_map_json": map_data(entry.model),
        "compare_probes_json": {
            "layout": chosen,
            "probes": [
                {
                    "id": p.id,
                    "method": p.method,
                    "kind": kinds.get(p.method, "other"),
                    "x": p.x,
                    "y": p.y,
                }
                for p in layout.probes
            ],
            "section": line.query(),
        },
        "section_url": f"/projects/{project_id}/compare/section",
    }


# ---------------------------------------------------------------- routes


@router.get("/projects/{project_id}/compare")
def compare_page(
    request: Request, project_id: int, db: Db, layout: str | None = None, quantity: str = "std"
) -> Response:
    project = get_project(db, project_id)
    quantity = quantity_of(quantity)
    names = [lay["name"] for lay in project.model.get("layouts") or []]
    selected = layout if layout in names else None
    query = {"quantity": quantity}
    if selected:
        query["layout"] = selected
    context = {
        **project_context(project, "compare"),
        "layout_names": names,
        "selected": selected,
        "has_elements": bool(project.model.get("elements")),
        "quantity": quantity,
        "quantities": QUANTITIES,
        "results_url": f"/projects/{project_id}/compare/results?{urlencode(query)}",
    }
    return render_page_or_fragment(request, "compare.html", "compare.html", context)


@router.get("/projects/{project_id}/compare/results")
def compare_results(
    request: Request, project_id: int, db: Db, layout: str | None = None, quantity: str = "std"
) -> Response:
    context = results_context(db, project_id, layout, quantity_of(quantity))
    return render(request, "_compare_results.html", context)


@router.get("/projects/{project_id}/compare/section")
def compare_section(
    request: Request, project_id: int, db: Db, layout: str | None = None
) -> Response:
    """The section figure for a line (``_compare_section_figure.html``)."""
    entry = project_results(db, project_id)
    chosen = section_layout(entry, layout)
    status = 200
    notice = None
    try:
        line = read_section(dict(request.query_params), entry.model)
    except InputError as exc:
        line = None
        notice = {"kind": "error", "text": f"Section not drawn: {exc.field}: {exc.problem}."}
        status = 400
    context = {
        "project": get_project(db, project_id),
        **section_context(entry, project_id, chosen, line, notice),
    }
    return render(request, "_compare_section_figure.html", context, status_code=status)


@router.get("/projects/{project_id}/compare/chart.svg")
def compare_chart(request: Request, project_id: int, db: Db, layout: str | None = None) -> Response:
    entry = project_results(db, project_id)
    chosen = chosen_layout(entry, layout)
    return image_response(
        chart_svg(entry, chosen), "image/svg+xml", current_revision_named(request, entry)
    )


@router.get("/projects/{project_id}/compare/map.png")
def compare_map(
    request: Request,
    project_id: int,
    db: Db,
    boundary: int,
    layout: str | None = None,
    quantity: str = "std",
) -> Response:
    entry = project_results(db, project_id)
    names = entry.project.ground.boundary_names
    if not 0 <= boundary < len(names):
        raise InputError("boundary", f"must be a boundary number from 0 to {len(names) - 1}")
    chosen = chosen_layout(entry, layout)
    if chosen is None:
        raise InputError("layout", "the project has no layout to map")
    png = uncertainty_map_png(entry, chosen, boundary, quantity_of(quantity))
    return image_response(png, "image/png", current_revision_named(request, entry))


@router.get("/projects/{project_id}/compare/section.png")
def compare_section_png(
    request: Request, project_id: int, db: Db, layout: str | None = None
) -> Response:
    entry = project_results(db, project_id)
    chosen = section_layout(entry, layout)
    line = read_section(dict(request.query_params), entry.model)
    png = section_png(entry, chosen, line)
    return image_response(png, "image/png", current_revision_named(request, entry))
