"""The value of an investigation on the Compare and Schedule pages: the saving and net value
chart, the chance each choice element's cheaper design holds per option, and the design level
maps of each element, computed once per revision (``ProjectResults.memo``).

docs/model.md "The value of an investigation". Images are served by ``routes_value``.
"""

from __future__ import annotations

from typing import Any
from urllib.parse import urlencode

import numpy as np

from probewise.app.design_value import (
    ValueFigures,
    cell_design_depths,
    choice_decisions_now,
    value_evaluator,
    value_figures,
)
from probewise.app.justification import BITS_MEANING, fractile_text, value_table
from probewise.app.results import ProjectResults
from probewise.core.model import ChoiceConsequence
from probewise.core.value import ValueEvaluator
from probewise.errors import InputError
from probewise.web.result_figures import existing_points, planned_points, raster_of
from probewise.web.site_map import polygon_rings
from probewise.web.value_plots import ValuePoint, design_level_maps, optimum_of, value_chart


def values_of(entry: ProjectResults) -> ValueEvaluator:
    """The project's design elements on its grid (InputError: an element holds no cell)."""
    return entry.memo(("value-evaluator",), lambda: value_evaluator(entry.project, entry.evaluator))


def figures_for(entry: ProjectResults, chosen: str) -> ValueFigures:
    """Every element for one option, with the best option of the ranking."""
    return entry.memo(
        ("value-figures", chosen),
        lambda: value_figures(
            entry.project,
            entry.evaluator,
            values_of(entry),
            entry.result_named(chosen),
            entry.ranking(),
        ),  # fmt: skip
    )


def value_points(entry: ProjectResults, chosen: str | None) -> list[ValuePoint]:
    """Every ranked option on the value chart."""
    return [
        ValuePoint(o.name, o.cost, o.expected_saving, o.net_value, o.name == chosen)
        for o in entry.ranking()
        if o.net_value is not None
    ]


def value_chart_png(entry: ProjectResults, chosen: str | None) -> bytes:
    return entry.memo(
        ("value-chart", chosen),
        lambda: value_chart(value_points(entry, chosen), currency=entry.project.currency),
    )


def design_map_png(entry: ProjectResults, index: int, chosen: str) -> bytes:
    """One element's design level now and expected after ``chosen`` (cells it covers)."""
    values = values_of(entry)
    if not 0 <= index < len(values.setups):
        raise InputError("element", f"there is no design element number {index + 1}")

    def draw() -> bytes:
        result = entry.result_named(chosen)
        cells, now, after = cell_design_depths(values, index, result)
        n = entry.evaluator.grid.n_cells
        before_map, after_map = np.full(n, np.nan), np.full(n, np.nan)
        before_map[cells], after_map[cells] = now, after
        element = values.setups[index].element
        doc = (entry.model.get("elements") or [])[index]
        basis = fractile_text(element.design_fractile, element.adverse)
        boundary = entry.project.ground.boundary_names[element.boundary]
        existing = existing_points(entry)
        return design_level_maps(
            raster_of(entry),
            [
                (f"Existing information only: mean {np.mean(now):.2f} m", before_map),
                (f"Expected with {chosen}: mean {np.mean(after):.2f} m", after_map),
            ],
            polygon_rings(doc.get("geometry")),
            polygon_rings(entry.model.get("site")),
            existing + planned_points(entry, result),
            title=f"{element.name}: design level of the base of {boundary} ({basis})"
            + (
                f"; the cheaper design needs the average's level no {element.adverse} than "
                f"{element.consequence.threshold_depth_m:g} m"
                if isinstance(element.consequence, ChoiceConsequence)
                else ""
            ),
            quantity_label=f"Design depth, {basis} (m below ground level)",
            crs=entry.project.crs,
        )

    return entry.memo(("value-map", index, chosen), draw)


def choice_rows(entry: ProjectResults) -> tuple[list[dict[str, Any]], list[dict[str, Any]]]:
    """The choice elements (name, decision now) and per option the chance of each."""
    now = choice_decisions_now(values_of(entry))
    columns = [{"name": name, "cheaper_now": ok} for name, ok in now.items()]
    rows = [
        {"name": o.name, "chances": dict(o.p_cheaper_allowed)}
        for o in entry.ranking()
        if o.net_value is not None
    ]
    return columns, rows


def value_context(entry: ProjectResults, project_id: int, chosen: str | None) -> dict[str, Any]:
    """What ``_compare_value.html`` and ``_schedule_value.html`` show; ``value`` is None
    without design elements (the pages then keep their information-only form)."""
    if not entry.project.elements or chosen is None:
        return {"value": None, "bits_meaning": BITS_MEANING}
    try:
        figures = figures_for(entry, chosen)
    except InputError as exc:
        return {"value": {"problem": f"{exc.field}: {exc.problem}"}, "bits_meaning": BITS_MEANING}
    points = value_points(entry, chosen)
    best = optimum_of(points)
    columns, rows = choice_rows(entry)
    query = {"layout": chosen, "rev": str(entry.revision)}
    base = f"/projects/{project_id}/value"
    elements = []
    for i, e in enumerate(figures.elements):
        elements.append(
            {
                "index": i,
                "figures": e,
                "map_src": f"{base}/design.png?{urlencode({**query, 'element': i})}",
                "basis": fractile_text(e.fractile, e.adverse),
            }
        )
    return {
        "value": {
            "problem": None,
            "chosen": chosen,
            "figures": figures,
            "table": value_table(figures),
            "optimum": best.name if best else None,
            "optimum_net": best.net_value if best else None,
            "chart_src": f"{base}/chart.png?{urlencode(query)}",
            "choice_columns": columns,
            "choice_rows": rows,
            "elements": elements,
        },
        "bits_meaning": BITS_MEANING,
    }


def schedule_value_context(entry: ProjectResults, project_id: int, value) -> dict[str, Any]:
    """What ``_schedule_value.html`` shows: the table the justification quotes (``value``:
    the schedule's ``ValueFigures``, None without design elements) and the value chart."""
    if value is None:
        return {"schedule_value": None, "bits_meaning": BITS_MEANING}
    query = {"layout": value.option, "rev": str(entry.revision)}
    points = value_points(entry, value.option)
    best = optimum_of(points)
    return {
        "schedule_value": {
            "figures": value,
            "table": value_table(value),
            "chart_src": f"/projects/{project_id}/value/chart.png?{urlencode(query)}",
            "optimum": best.name if best else None,
        },
        "bits_meaning": BITS_MEANING,
    }
