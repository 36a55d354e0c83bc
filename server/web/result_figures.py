"""Figures and choices shared by the Compare and Schedule pages: the layout shown, the probes
drawn on maps, the grid raster, the ranked options table, and image answers cached per
revision."""

from __future__ import annotations

from typing import Any

import numpy as np
from fastapi import Request
from starlette.responses import Response

from probewise.app.layouts import KIND_LABELS
from probewise.app.results import ProjectResults
from probewise.core.evaluate import LayoutResult
from probewise.errors import InputError
from probewise.web import plots

IMAGE_CACHE = "private, max-age=3600"


def image_response(content: bytes, media_type: str, current: bool) -> Response:
    """An image; cacheable when the URL named the current revision (it never changes)."""
    headers = {"Cache-Control": IMAGE_CACHE if current else "no-store"}
    return Response(content, media_type=media_type, headers=headers)


def raster_of(entry: ProjectResults) -> plots.GridRaster:
    grid = entry.evaluator.grid
    corner = np.vstack(entry.project.site.outline.rings).min(axis=0)
    return plots.GridRaster(
        grid.index, grid.shape, (float(corner[0]), float(corner[1])), grid.spacing_m
    )


def existing_points(entry: ProjectResults) -> list[plots.MapProbePoint]:
    methods = entry.project.methods
    return [
        plots.MapProbePoint(
            p.id,
            p.x,
            p.y,
            methods[p.method].kind if p.method in methods else "other",
            existing=True,
        )
        for p in entry.project.existing
    ]


def planned_points(entry: ProjectResults, result: LayoutResult) -> list[plots.MapProbePoint]:
    methods = entry.project.methods
    return [
        plots.MapProbePoint(
            plan.probe.id, plan.probe.x, plan.probe.y, methods[plan.probe.method].kind
        )
        for plan in result.plans
    ]


def chosen_layout(entry: ProjectResults, wanted: str | None) -> str | None:
    """The layout asked for when it exists, else the page's default option."""
    if wanted and wanted in entry.layout_names:
        return wanted
    return entry.default_layout()


def section_layout(entry: ProjectResults, wanted: str | None) -> str:
    """The layout a section shows; a project without layouts has no section (InputError)."""
    chosen = chosen_layout(entry, wanted)
    if chosen is None:
        raise InputError("layout", "the project has no layout to show in a section")
    return chosen


def current_revision_named(request: Request, entry: ProjectResults) -> bool:
    return request.query_params.get("rev") == str(entry.revision)


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
                "rig_days": option.rig_days,
                "requirements_met": option.requirements_met,
                "unmet": option.unmet,
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
            }
        )
    return rows
