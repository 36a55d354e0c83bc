"""Candidate locations of the optimiser: a regular grid inside the site, outside exclusions,
times the allowed methods, each planned exactly as evaluation plans it."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from probewise.core.analysis import ProjectAnalysis
from probewise.core.geometry import points_in_polygon
from probewise.core.grid import EvaluationGrid, evaluation_grid_capped
from probewise.core.model import PlannedProbe, Project
from probewise.core.optimise_types import MAX_CANDIDATE_LOCATIONS, Candidates, OptimiseError
from probewise.core.planning import plan_probes
from probewise.core.programme import probe_cost


def nice_spacing_m(raw_m: float) -> float:
    """Round a spacing up to 1, 2, 2.5 or 5 times a power of ten (m)."""
    if raw_m <= 0 or not math.isfinite(raw_m):
        raise ValueError("spacing must be positive")
    decade = 10.0 ** math.floor(math.log10(raw_m))
    for step in (1.0, 2.0, 2.5, 5.0, 10.0):
        if step * decade >= raw_m * (1 - 1e-12):
            return step * decade
    return 10.0 * decade  # pragma: no cover - loop always returns


def optimisation_grid(project: Project, origin, max_cells: int) -> EvaluationGrid:
    """The evaluation grid, coarsened by a whole factor until it has at most ``max_cells``."""
    return evaluation_grid_capped(project.site, origin, max_cells)[0]


def check_candidate_count(area_m2: float, spacing_m: float, count: int | None = None) -> None:
    """Refuse a candidate grid of more than ``MAX_CANDIDATE_LOCATIONS`` locations.

    Called with the site area before the grid is built (``count`` None: estimated, refused
    only when well over, so an absurd spacing never allocates its grid) and with the count
    after.
    """
    field = "candidate_spacing_m"
    if not (spacing_m > 0 and math.isfinite(spacing_m)):
        raise OptimiseError(f"must be a positive number of metres, not {spacing_m:g}", field)
    estimate = area_m2 / spacing_m**2
    if count is not None:
        over = count > MAX_CANDIDATE_LOCATIONS
    else:
        over = estimate > 2 * MAX_CANDIDATE_LOCATIONS
    if over:
        shown = f"{count:,}" if count is not None else f"about {estimate:,.0f}"
        finest = nice_spacing_m(math.sqrt(area_m2 / MAX_CANDIDATE_LOCATIONS))
        raise OptimiseError(
            f"a candidate spacing of {spacing_m:g} m gives {shown} candidate locations, over "
            f"the limit of {MAX_CANDIDATE_LOCATIONS:,}; use {finest:g} m or more",
            field,
        )


def candidate_locations(project: Project, origin, spacing_m: float) -> np.ndarray:
    """Regular grid of locations inside the site and outside every exclusion: ``(L, 2)``
    in project coordinates (cell centres of a grid aligned to the site bounding box)."""
    site = project.site
    pts = np.vstack(site.outline.rings)
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    nx = max(int(math.ceil((hi[0] - lo[0]) / spacing_m - 1e-9)), 1)
    ny = max(int(math.ceil((hi[1] - lo[1]) / spacing_m - 1e-9)), 1)
    gx, gy = np.meshgrid(
        lo[0] + spacing_m * (np.arange(nx) + 0.5), lo[1] + spacing_m * (np.arange(ny) + 0.5)
    )
    xy = np.column_stack([gx.ravel(), gy.ravel()])
    keep = points_in_polygon(xy, site.outline)
    for excl in site.exclusions:
        keep &= ~points_in_polygon(xy, excl)
    return xy[keep]


def build_candidates(
    analysis: ProjectAnalysis, xy: np.ndarray, method_ids: Sequence[str]
) -> Candidates:
    """Plan every (location, method) candidate against the baseline (existing probes)."""
    methods = analysis.methods
    B = analysis.ground.n_boundaries
    L, J = len(xy), len(method_ids)
    probes = [
        PlannedProbe(f"c{l}-{m}", m, float(x), float(y))
        for l, (x, y) in enumerate(xy)
        for m in method_ids
    ]
    plans = plan_probes(analysis.ground, methods, analysis.baseline, probes)
    depth = np.zeros((L, J))
    cost = np.zeros((L, J))
    noise = np.full((L, J, B), np.nan)
    for n, plan in enumerate(plans):
        l, j = divmod(n, J)
        method = methods[method_ids[j]]
        depth[l, j] = plan.depth_m
        cost[l, j] = probe_cost(method, plan.depth_m, plan.predrill_m, analysis.project.costs)
        for k in plan.observes:
            noise[l, j, k] = method.precision_m[k] ** 2
    valid = np.isfinite(noise).any(axis=2)
    local = analysis.to_local(xy)
    return Candidates(xy, local, tuple(method_ids), depth, cost, noise, valid)
