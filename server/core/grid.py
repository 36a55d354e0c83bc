"""The evaluation grid: cell centres of a regular grid inside the site, with weights.

Cells are aligned to the site's bounding box (first centre half a spacing in from its lower
left corner). Every centre inside the outline counts, exclusions included: exclusions limit
where probes go, not where the ground matters. A cell's weight is that of the heaviest area
of interest containing it, else 1 (docs/model.md "Numbers reported for a layout").

A grid finer than ``MAX_GRID_CELLS`` would make every evaluation slow without changing the
engineer's decision, so ``evaluation_grid_capped`` coarsens it by a whole factor and says so
in a notice (the optimiser coarsens its own working grid the same way).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from probewise.core.geometry import local_rings, points_in_polygon, polygon_area_m2
from probewise.core.model import Site

MAX_GRID_CELLS = 60_000  # evaluation cells; a finer grid is coarsened with a notice
# Bounding-box raster built per try (inside and outside cells): keeps memory bounded for a
# long thin site lying diagonally, whose box is far larger than its area.
MAX_RASTER_CELLS = 4_000_000


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


def _raster_cells(site: Site, spacing_m: float) -> float:
    """Cells of the bounding-box raster at ``spacing_m`` (what evaluation_grid allocates)."""
    pts = np.vstack(site.outline.rings)
    span = pts.max(axis=0) - pts.min(axis=0)
    return float(max(math.ceil(span[0] / spacing_m), 1) * max(math.ceil(span[1] / spacing_m), 1))


def evaluation_grid_capped(
    site: Site, origin: tuple[float, float], max_cells: int = MAX_GRID_CELLS
) -> tuple[EvaluationGrid, str | None]:
    """The evaluation grid, coarsened by a whole factor until it has at most ``max_cells``.

    The spacing becomes ``factor x grid_spacing_m`` for the smallest whole factor found by
    the search below (each step jumps by the square root of the cell ratio, so a few tries
    suffice); cells stay aligned to the site's bounding box as in ``evaluation_grid``.

    Parameters
    ----------
    site : Site
    origin : (float, float)
        Project coordinates of the local origin of the returned points.
    max_cells : int
        Most cells the returned grid may have (>= 1).

    Returns
    -------
    grid : EvaluationGrid
    notice : str or None
        A sentence for the user when the grid was coarsened, else None.

    Raises
    ------
    EmptyGridError
        When no cell centre falls inside the outline.
    """
    if max_cells < 1:
        raise ValueError("max_cells must be at least 1")
    spacing = float(site.grid_spacing_m)
    factor = 1
    requested = None  # cells at the requested spacing, when that grid was built
    raster = _raster_cells(site, spacing)
    if raster > MAX_RASTER_CELLS:
        # Never build an absurd raster: start from a factor the area and the box allow.
        area = max(polygon_area_m2(site.outline), 0.0)
        factor = max(
            math.ceil(math.sqrt(raster / MAX_RASTER_CELLS)),
            math.ceil(math.sqrt(area / spacing**2 / max_cells)),
            2,
        )
    grid = evaluation_grid(replace(site, grid_spacing_m=spacing * factor), origin)
    if factor == 1:
        requested = grid.n_cells
    while grid.n_cells > max_cells:
        factor = max(factor + 1, math.ceil(factor * math.sqrt(grid.n_cells / max_cells)))
        grid = evaluation_grid(replace(site, grid_spacing_m=spacing * factor), origin)
    if factor == 1:
        return grid, None
    if requested is None:
        requested = round(max(polygon_area_m2(site.outline), 0.0) / spacing**2)
        about = "about "
    else:
        about = ""
    notice = (
        f"grid_spacing_m: {spacing:g} m would give {about}{requested:,} evaluation cells, "
        f"over the limit of {max_cells:,}; the evaluation uses {grid.spacing_m:g} m "
        f"({grid.n_cells:,} cells) instead"
    )
    return grid, notice
