"""The figures of the value of an investigation, shared by the Compare and Schedule pages:
``value/chart.png`` (expected saving and net value of every option against its GI cost) and
``value/design.png`` (one design element's design level now and expected after an option).
Cached per revision; cacheable when the URL names the current revision (``rev``).
"""

from __future__ import annotations

from fastapi import APIRouter, Request
from starlette.responses import Response

from probewise.app.results import project_results
from probewise.errors import InputError
from probewise.web.deps import Db
from probewise.web.result_figures import chosen_layout, current_revision_named, image_response
from probewise.web.value_views import design_map_png, value_chart_png

router = APIRouter(include_in_schema=False)


def _valued(db, project_id: int, layout: str | None):
    entry = project_results(db, project_id)
    if not entry.project.elements:
        raise InputError("elements", "the model has no design elements to value")
    chosen = chosen_layout(entry, layout)
    if chosen is None:
        raise InputError("layout", "the project has no layout to value")
    return entry, chosen


@router.get("/projects/{project_id}/value/chart.png")
def value_chart(request: Request, project_id: int, db: Db, layout: str | None = None) -> Response:
    entry, chosen = _valued(db, project_id, layout)
    png = value_chart_png(entry, chosen)
    return image_response(png, "image/png", current_revision_named(request, entry))


@router.get("/projects/{project_id}/value/design.png")
def value_design_map(
    request: Request, project_id: int, db: Db, element: int, layout: str | None = None
) -> Response:
    entry, chosen = _valued(db, project_id, layout)
    png = design_map_png(entry, element, chosen)
    return image_response(png, "image/png", current_revision_named(request, entry))
