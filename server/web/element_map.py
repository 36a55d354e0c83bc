"""The design elements on the page's map: each footprint and the evaluation cells it covers
(the cells whose centres lie inside it, on the grid the evaluation uses: ``probewise.core.grid``,
coarsened as the evaluation coarsens it)."""

from __future__ import annotations

from typing import Any

import numpy as np
import shapely

from probewise.app.to_core import to_core
from probewise.core.grid import EmptyGridError, evaluation_grid_capped
from probewise.core.value import element_cells
from probewise.web.map_data import build_map_data
from probewise.web.site_map import label_point, polygon_rings


def element_cells_map(model: dict) -> dict[int, dict[str, Any]]:
    """Per element index: ``count`` of cells and their union as GeoJSON (``geometry``).

    Empty when the stored model cannot be laid on a grid (a site with no cell)."""
    if not model.get("elements"):
        return {}
    try:
        project = to_core(model)
        grid, _ = evaluation_grid_capped(project.site, project.origin)
    except (EmptyGridError, ValueError, KeyError):
        return {}
    half = grid.spacing_m / 2.0
    centres = grid.xy + np.asarray(project.origin)
    out = {}
    for i, element in enumerate(project.elements):
        cells = element_cells(grid, element)
        xy = centres[cells]
        boxes = shapely.box(xy[:, 0] - half, xy[:, 1] - half, xy[:, 0] + half, xy[:, 1] + half)
        union = shapely.union_all(boxes, grid_size=grid.spacing_m / 1000.0)
        out[i] = {
            "count": int(cells.size),
            "geometry": shapely.geometry.mapping(union) if cells.size else None,
        }
    return out


def elements_map_data(model: dict, cells: dict[int, dict[str, Any]]) -> dict[str, Any]:
    """The site map with the elements (tag E1, E2...) and the cells each covers."""
    data = build_map_data(model, include_layouts=False)
    elements, covered = [], []
    for n, item in enumerate(model.get("elements") or []):
        entry = {
            "tag": f"E{n + 1}",
            "name": item.get("name", ""),
            "geometry": item["geometry"],
            "cells": cells.get(n, {}).get("count"),
        }
        rings = polygon_rings(item["geometry"])
        if rings:
            entry["label"] = list(label_point(item["geometry"], rings))
        elements.append(entry)
        geometry = cells.get(n, {}).get("geometry")
        if geometry:
            covered.append({"name": f"E{n + 1} cells: {entry['cells']}", "geometry": geometry})
    data["elements"] = elements
    data["element_cells"] = covered
    return data
