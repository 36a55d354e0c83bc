"""A project's posterior: existing probes as the baseline, layouts on top, queries at points.

``ProjectAnalysis`` is the entry point the CLI, the web and the optimiser share. It localises
coordinates (relative to ``Project.origin``), conditions on the existing probes once, plans
layouts against that baseline and answers point queries.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from probewise.core.blocks import cell_blocks, predict_cells
from probewise.core.bounds import depth_bounds, truncated_quantiles
from probewise.core.grid import EvaluationGrid
from probewise.core.local_conditioning import LocalState, condition_scaled, estimated_cells
from probewise.core.model import ExistingProbe, Layout, Method, Project
from probewise.core.planning import ProbePlan, plan_probes, planned_observations
from probewise.core.posterior import Observations, PosteriorState, Prediction

# Precision of a reading when neither the probe nor its method gives one for that boundary
# (common practice, no source).
DEFAULT_PRECISION_M = 0.5


def reading_precision_m(method: Method | None, boundary: int, override: float | None = None):
    """Std (m) of an existing probe's recorded depth of one boundary.

    The probe's own figure, else its method's for that boundary, else (the method does not
    resolve that boundary) the coarsest precision the method has, else 0.5 m (common
    practice, no source).
    """
    if override is not None and np.isfinite(override):
        return float(override)
    if method is not None:
        own = method.precision_m[boundary]
        if np.isfinite(own):
            return float(own)
        known = [p for p in method.precision_m if np.isfinite(p)]
        if known:
            return float(max(known))
    return DEFAULT_PRECISION_M


def existing_observations(
    probes: tuple[ExistingProbe, ...], methods: dict[str, Method], origin: tuple[float, float]
) -> Observations:
    """Readings of the existing probes: one entry per recorded boundary depth.

    Returns
    -------
    Observations
        Local coordinates, noise from :func:`reading_precision_m`, ``probe`` = index into
        ``probes``.
    """
    xy, bnd, tau, val, idx = [], [], [], [], []
    for j, probe in enumerate(probes):
        method = methods.get(probe.method)
        for k, depth in sorted(probe.observed.items()):
            xy.append((probe.x - origin[0], probe.y - origin[1]))
            bnd.append(k)
            tau.append(reading_precision_m(method, k, probe.precision_m.get(k)))
            val.append(depth)
            idx.append(j)
    return Observations.build(np.array(xy, float).reshape(-1, 2), bnd, tau, val, idx)


@dataclass(frozen=True, eq=False)
class PointPosterior:
    """Prior and posterior of every boundary at points; arrays ``(n, B)`` in m.

    ``std_m`` is the Gaussian posterior std; ``p05_m``/``p95_m`` the truncated-posterior
    quantiles; ``lo_m``/``hi_m`` the hard bounds.
    """

    xy: np.ndarray  # (n, 2) project coordinates
    prior_mean_m: np.ndarray
    prior_std_m: np.ndarray
    mean_m: np.ndarray
    std_m: np.ndarray
    p05_m: np.ndarray
    p95_m: np.ndarray
    lo_m: np.ndarray
    hi_m: np.ndarray


class ProjectAnalysis:
    """The baseline (existing probes) of a project and what layouts add to it.

    Attributes
    ----------
    project : Project
    origin : (float, float)
        Local origin (centre of the site bbox); every array of local points is relative to it.
    existing : Observations
        Readings of the existing probes.
    baseline : PosteriorState or LocalState
        Conditioned on ``existing``; the "current" state used for planning. Local (tile by
        tile) beyond the thresholds of ``probewise.core.local_conditioning`` for ``n_cells``
        targets (default: the cells of the site's evaluation grid).
    """

    def __init__(self, project: Project, n_cells: int | None = None):
        self.project = project
        self.ground = project.ground
        self.methods = project.methods
        self.origin = project.origin
        self.existing = existing_observations(project.existing, project.methods, self.origin)
        # exact, or tile by tile beyond the thresholds of probewise.core.local_conditioning
        cells = estimated_cells(project.site) if n_cells is None else n_cells
        self.baseline: PosteriorState | LocalState = condition_scaled(
            self.ground, self.origin, self.existing, cells
        )
        self._bounds_at: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None

    def to_local(self, xy: np.ndarray) -> np.ndarray:
        """Project coordinates ``(n, 2)`` -> local coordinates ``(n, 2)``."""
        return np.asarray(xy, dtype=float).reshape(-1, 2) - np.asarray(self.origin)

    def plan(self, layout: Layout) -> tuple[ProbePlan, ...]:
        """Planned depth and observed set of every probe of a layout (against the baseline)."""
        return plan_probes(self.ground, self.methods, self.baseline, layout.probes)

    def layout_state(self, layout: Layout | None) -> tuple[PosteriorState, tuple[ProbePlan, ...]]:
        """The baseline extended by a layout's planned readings, and the plans."""
        if layout is None or not layout.probes:
            return self.baseline, ()
        plans = self.plan(layout)
        return self.baseline.extend(planned_observations(plans, self.methods, self.origin)), plans

    def quantiles(self, pred: Prediction) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Hard bounds and P5/P95 of a prediction: ``(lo, hi, p05, p95)``, each ``(n, B)``."""
        lo, hi = self.bounds(pred)
        std = pred.std_m
        return (
            lo,
            hi,
            truncated_quantiles(pred.mean_m, std, lo, hi, 0.05),
            truncated_quantiles(pred.mean_m, std, lo, hi, 0.95),
        )

    def bounds(self, pred: Prediction) -> tuple[np.ndarray, np.ndarray]:
        """Hard bounds ``(lo, hi)`` at a prediction's points, each ``(n, B)``.

        The last points' bounds are kept: every layout of an evaluation is scored on the
        same grid, and the history rules (levels, settlement) cost more than a lookup.
        """
        cached = self._bounds_at
        if cached is not None and np.array_equal(cached[0], pred.xy):
            return cached[1], cached[2]
        lo, hi = depth_bounds(self.ground, pred.xy, self.origin, pred.fields)
        self._bounds_at = (np.array(pred.xy, copy=True), lo, hi)
        return lo, hi

    def at_cells(self, grid: EvaluationGrid, layout: Layout | None = None) -> PointPosterior:
        """Prior and posterior of the cell average of every boundary over a grid's cells.

        Cells are areas (``probewise.core.blocks``; docs/model.md "Numbers reported for a
        layout"): means and stds are those of the cell averages, hard bounds and the
        truncation of P5/P95 those at the cell centres (``xy``, project coordinates).
        """
        state, _ = self.layout_state(layout)
        blocks = cell_blocks(self.ground, grid.xy, grid.spacing_m, self.origin)
        pred = predict_cells(state, blocks)
        return self._posterior(grid.xy_project, pred)

    def at_points(self, xy: np.ndarray, layout: Layout | None = None) -> PointPosterior:
        """Prior and posterior of every boundary at points given in project coordinates.

        Parameters
        ----------
        xy : (n, 2) float
            Project coordinates; points outside the site are allowed.
        layout : Layout, optional
            Planned probes added to the existing ones (they reduce the variance only).
        """
        state, _ = self.layout_state(layout)
        return self._posterior(xy, state.predict(self.to_local(xy)))

    def _posterior(self, xy: np.ndarray, pred: Prediction) -> PointPosterior:
        lo, hi, p05, p95 = self.quantiles(pred)
        return PointPosterior(
            np.asarray(xy, dtype=float).reshape(-1, 2),
            pred.prior_mean_m,
            pred.prior_std_m,
            pred.mean_m,
            pred.std_m,
            p05,
            p95,
            lo,
            hi,
        )
