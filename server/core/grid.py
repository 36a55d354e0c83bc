"""The evaluation grid: cell centres of a regular grid inside the site, with weights.

Cells are aligned to the site's bounding box (first centre half a spacing in from its lower
left corner). Every centre inside the outline counts, exclusions included: exclusions limit
where probes go, not where the ground matters. A cell's weight is that of the heaviest area
of interest containing it, else 1 (DESIGN.md "Numbers reported for a layout").
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from server.core.geometry import local_rings, points_in_polygon
from server.core.model import Site


class EmptyGridError(ValueError):
    """No cell centre of the evaluation grid falls inside the site."""


@dataclass(frozen=True, eq=False)
class EvaluationGrid:
    """Cell centres relative to ``origin``: ``xy (n, 2)``, ``weight (n,)`` and the area of
    one cell (m2). ``shape``/``index`` place each cell on the full bbox raster
    (``index (n, 2)`` = row from the bottom, column from the left) for maps."""

    xy: np.ndarray
    weight: np.ndarray
    cell_area_m2: float
    spacing_m: float
    shape: tuple[int, int]
    index: np.ndarray
    origin: tuple[float, float] = (0.0, 0.0)

    @property
    def n_cells(self) -> int:
        return int(self.xy.shape[0])

    @property
    def xy_project(self) -> np.ndarray:
        """Cell centres in project coordinates ``(n, 2)``."""
        return self.xy + np.asarray(self.origin, dtype=float)


def evaluation_grid(site: Site, origin: tuple[float, float]) -> EvaluationGrid:
    """Cell centres of the site's evaluation grid and their weights.

    Parameters
    ----------
    site : Site
        Outline, spacing (``grid_spacing_m``) and areas of interest.
    origin : (float, float)
        Project coordinates of the local origin of the returned points.

    Returns
    -------
    EvaluationGrid

    Raises
    ------
    EmptyGridError
        When no cell centre falls inside the outline (spacing too coarse for the site).
    """
    g = float(site.grid_spacing_m)
    pts = np.vstack(local_rings(site.outline, origin))
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    nx = max(int(np.ceil((hi[0] - lo[0]) / g - 1e-9)), 1)
    ny = max(int(np.ceil((hi[1] - lo[1]) / g - 1e-9)), 1)
    cx = lo[0] + g * (np.arange(nx) + 0.5)
    cy = lo[1] + g * (np.arange(ny) + 0.5)
    gx, gy = np.meshgrid(cx, cy)
    rows, cols = np.meshgrid(np.arange(ny), np.arange(nx), indexing="ij")
    xy = np.column_stack([gx.ravel(), gy.ravel()])
    keep = points_in_polygon(xy, site.outline, origin)
    if not keep.any():
        raise EmptyGridError("no evaluation cell centre falls inside the site; use a finer spacing")
    xy = xy[keep]
    index = np.column_stack([rows.ravel()[keep], cols.ravel()[keep]])
    weight = np.ones(len(xy))
    heaviest = np.full(len(xy), -np.inf)
    for area in site.areas_of_interest:
        inside = points_in_polygon(xy, area.polygon, origin)
        heaviest = np.where(inside, np.maximum(heaviest, area.weight), heaviest)
    weight = np.where(np.isfinite(heaviest), heaviest, weight)
    return EvaluationGrid(
        xy, weight, g * g, g, (ny, nx), index, (float(origin[0]), float(origin[1]))
    )
