"""The numbers reported for each layout (docs/model.md "Numbers reported for a layout").

Over the evaluation grid (``probewise.core.grid``), with the existing probes as the baseline and a
layout's probes added:

- per boundary: weighted mean posterior std (m); weighted mean P5-P95 width (m); uncertain
  volume (m3 = sum of cell area x width, unweighted); confident fraction (weighted share of
  cells whose width is at most twice the boundary's tolerance; None for a boundary that is not
  of interest, which has no tolerance);
- information gain (bits): sum over boundaries of interest of weight x weighted mean of
  0.5 log2(var_baseline / var_layout), variances floored at ``VAR_FLOOR_M2``;
- cost, metres, rig-days and calendar days from ``probewise.core.programme`` (the one
  place a layout is priced: method rates, cost items, contingency); gain per unit cost;
  Pareto efficiency among the layouts.

Every cell figure is that of the cell average of the boundary depth, not of the depth at the
cell centre (block kriging, ``probewise.core.blocks``; docs/model.md "Numbers reported for a
layout"). The cells' block moments and the baseline are solved once on the grid and reused by
every layout (block Cholesky update).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from probewise.core.analysis import ProjectAnalysis
from probewise.core.blocks import CellBlocks, cell_blocks, predict_cells
from probewise.core.grid import MAX_GRID_CELLS, EvaluationGrid, evaluation_grid_capped
from probewise.core.local_conditioning import (
    ConditioningInfo,
    concat_observations,
    conditioning_info,
)
from probewise.core.model import CostItems, GroundModel, Layout, Method, Project
from probewise.core.planning import ProbePlan
from probewise.core.posterior import Prediction
from probewise.core.programme import Programme, contingency_factor, layout_programme

VAR_FLOOR_M2 = 1e-12  # keeps the log-ratio of an exactly known depth finite


@dataclass(frozen=True)
class BoundaryMetrics:
    std_mean_m: float
    width90_mean_m: float
    uncertain_volume_m3: float
    confident_fraction: float | None


@dataclass(frozen=True)
class MethodTotals:
    """One method's share of a layout: cost with its contingency, ``duration_days`` its
    rig-days."""

    count: int
    metres: float
    cost: float
    duration_days: float


@dataclass(frozen=True, eq=False)
class GridPosterior:
    """Per-cell posterior of every boundary on the evaluation grid; arrays ``(n, B)`` in m.

    Mean and std are those of the cell average of the depth; P5/P95 are truncated at the
    hard bounds of the cell centre.
    """

    mean_m: np.ndarray
    std_m: np.ndarray
    p05_m: np.ndarray
    p95_m: np.ndarray

    @property
    def width90_m(self) -> np.ndarray:
        return self.p95_m - self.p05_m


@dataclass(frozen=True, eq=False)
class StateResult:
    """Metrics of one state (baseline or layout) and its per-cell arrays for maps.

    ``boundaries`` maps boundary (unit) name -> BoundaryMetrics, top down.
    """

    boundaries: dict[str, BoundaryMetrics]
    grid: GridPosterior


@dataclass(frozen=True, eq=False)
class LayoutResult:
    """Everything reported for one layout."""

    name: str
    boundaries: dict[str, BoundaryMetrics]
    grid: GridPosterior
    plans: tuple[ProbePlan, ...]
    cost: float
    metres: float
    duration_days: float  # calendar days: rigs and methods side by side
    information_gain_bits: float
    gain_per_cost: float | None
    pareto: bool
    by_method: dict[str, MethodTotals]
    programme: Programme | None = None  # cost by item, rig-days, method lines

    @property
    def rig_days(self) -> float:
        return self.programme.rig_days if self.programme is not None else self.duration_days


@dataclass(frozen=True, eq=False)
class Evaluation:
    """Baseline and every layout of a project, on one evaluation grid."""

    grid: EvaluationGrid
    boundary_names: tuple[str, ...]
    baseline: StateResult
    layouts: tuple[LayoutResult, ...]
    grid_notice: str | None = None  # set when the grid was coarsened (see grid.py)
    conditioning: ConditioningInfo | None = None  # exact or local (local_conditioning.py)


def weighted_mean(values: np.ndarray, weight: np.ndarray) -> np.ndarray:
    """Weighted mean over cells (axis 0): ``(n, ...) , (n,) -> (...)``."""
    return np.tensordot(weight, values, axes=(0, 0)) / weight.sum()


def grid_posterior(analysis: ProjectAnalysis, pred: Prediction) -> GridPosterior:
    """Mean, std and truncated P5/P95 of a prediction on the grid (a cell prediction of
    :func:`probewise.core.blocks.predict_cells`: bounds at ``pred.xy``, the cell centres)."""
    _, _, p05, p95 = analysis.quantiles(pred)
    return GridPosterior(pred.mean_m, pred.std_m, p05, p95)


def summarise(ground: GroundModel, grid: EvaluationGrid, post: GridPosterior):
    """Per-boundary metrics of a grid posterior: dict boundary name -> BoundaryMetrics."""
    w = grid.weight
    width = post.width90_m
    std_mean = weighted_mean(post.std_m, w)
    width_mean = weighted_mean(width, w)
    volume = grid.cell_area_m2 * width.sum(axis=0)
    tolerance = {b.boundary: b.tolerance_m for b in ground.boundaries_of_interest}
    out = {}
    for k, name in enumerate(ground.boundary_names):
        confident = None
        if k in tolerance:
            confident = float(weighted_mean(width[:, k] <= 2.0 * tolerance[k], w))
        out[name] = BoundaryMetrics(
            float(std_mean[k]), float(width_mean[k]), float(volume[k]), confident
        )
    return out


def information_gain_bits(
    ground: GroundModel, grid: EvaluationGrid, var_base_m2: np.ndarray, var_m2: np.ndarray
) -> float:
    """Sum over boundaries of interest of weight x weighted mean of 0.5 log2(var_base / var).

    Parameters
    ----------
    var_base_m2, var_m2 : (n, B) float
        Baseline and layout posterior variances on the grid.
    """
    ratio = np.log2(np.maximum(var_base_m2, VAR_FLOOR_M2) / np.maximum(var_m2, VAR_FLOOR_M2))
    per_boundary = 0.5 * weighted_mean(ratio, grid.weight)
    return float(sum(b.weight * per_boundary[b.boundary] for b in ground.boundaries_of_interest))


def layout_cost(
    plans: Sequence[ProbePlan], methods: dict[str, Method], items: CostItems | None = None
) -> tuple[float, float, float, dict[str, MethodTotals]]:
    """Cost, metres and calendar days of planned probes, and the split per method
    (``probewise.core.programme.layout_programme``; default cost items: none)."""
    programme = layout_programme(plans, methods, items or CostItems())
    factor = contingency_factor(items or CostItems())
    by_method = {
        line.method: MethodTotals(line.count, line.metres, factor * line.cost, line.rig_days)
        for line in programme.lines
    }
    return programme.cost, programme.metres, programme.calendar_days, by_method


def pareto_flags(costs: Sequence[float], gains: Sequence[float]) -> list[bool]:
    """Pareto efficiency: no other option has at least the gain for at most the cost, with
    one of the two strictly better."""
    flags = []
    for i, (ci, gi) in enumerate(zip(costs, gains, strict=True)):
        dominated = any(
            gj >= gi and cj <= ci and (gj > gi or cj < ci)
            for j, (cj, gj) in enumerate(zip(costs, gains, strict=True))
            if j != i
        )
        flags.append(not dominated)
    return flags


class GridEvaluator:
    """Evaluates layouts on a project's grid, reusing the baseline solve for every layout.

    A grid finer than ``max_cells`` is coarsened by a whole factor; ``grid_notice`` then
    says so (None otherwise). ``blocks`` holds the cells' block moments and ``base_pred`` the
    baseline prediction of the cell averages; :meth:`layout_prediction` gives a layout's.
    """

    def __init__(
        self,
        project: Project,
        analysis: ProjectAnalysis | None = None,
        max_cells: int = MAX_GRID_CELLS,
        layouts: Sequence[Layout] = (),
        on_progress: Callable[[float], None] | None = None,
    ):
        self.analysis = analysis if analysis is not None else ProjectAnalysis(project)
        self.ground = project.ground
        self.grid, self.grid_notice = evaluation_grid_capped(
            project.site, self.analysis.origin, max_cells
        )
        self.blocks: CellBlocks = cell_blocks(
            self.ground, self.grid.xy, self.grid.spacing_m, self.analysis.origin
        )
        self._swept: dict[int, tuple[Layout, Prediction, tuple[ProbePlan, ...]]] = {}
        self.base_pred = self._predict_baseline(layouts, on_progress)
        self.conditioning = conditioning_info(self.analysis.baseline)
        base_post = grid_posterior(self.analysis, self.base_pred)
        self.baseline = StateResult(summarise(self.ground, self.grid, base_post), base_post)

    def _predict_baseline(
        self, layouts: Sequence[Layout], on_progress: Callable[[float], None] | None
    ) -> Prediction:
        """The baseline's cell prediction. A local state (many readings) predicts ``layouts``
        in the same sweep of its tiles, so each tile is conditioned on the existing readings
        once rather than once per layout; ``on_progress`` gets the share of tiles done."""
        if not (self.sweeps_tiles and layouts):
            return predict_cells(self.analysis.baseline, self.blocks)
        return self._sweep(layouts, on_progress)

    @property
    def sweeps_tiles(self) -> bool:
        """True when the baseline is conditioned tile by tile (many readings)."""
        return hasattr(self.analysis.baseline, "predict_cells_alternatives")

    def _sweep(
        self, layouts: Sequence[Layout], on_progress: Callable[[float], None] | None = None
    ) -> Prediction:
        """One sweep of a local state's tiles for ``layouts`` (kept for
        :meth:`layout_prediction`); returns the baseline prediction of the sweep."""
        baseline = self.analysis.baseline
        n_known = len(baseline.observations)
        states = [self.analysis.layout_state(layout) for layout in layouts]
        planned = [concat_observations(state.observations[n_known:]) for state, _ in states]
        base_pred, preds = baseline.predict_cells_alternatives(
            self.blocks, tuple(planned), on_progress
        )
        for layout, (_, plans), pred in zip(layouts, states, preds, strict=True):
            self._swept[id(layout)] = (layout, pred, plans)
        return base_pred

    def evaluate_layouts(self, layouts: Sequence[Layout]) -> list[LayoutResult]:
        """Metrics of several layouts; a local state predicts them in one sweep of its
        tiles instead of one per layout."""
        todo = [layout for layout in layouts if id(layout) not in self._swept]
        if self.sweeps_tiles and len(todo) > 1:
            self._sweep(todo)
        return [self.evaluate_layout(layout) for layout in layouts]

    def layout_prediction(self, layout: Layout) -> tuple[Prediction, tuple[ProbePlan, ...]]:
        """Cell averages given the existing probes and a layout's, and the layout's plans."""
        swept = self._swept.get(id(layout))
        if swept is not None and swept[0] is layout:
            return swept[1], swept[2]
        state, plans = self.analysis.layout_state(layout)
        return predict_cells(state, self.blocks, base=self.base_pred), plans

    def evaluate_layout(self, layout: Layout) -> LayoutResult:
        """Metrics of one layout (``pareto`` is provisional: True; set it over all options)."""
        pred, plans = self.layout_prediction(layout)
        post = grid_posterior(self.analysis, pred)
        gain = information_gain_bits(self.ground, self.grid, self.base_pred.var_m2, pred.var_m2)
        costs = self.analysis.project.costs
        programme = layout_programme(plans, self.analysis.methods, costs)
        cost, metres, days, by_method = layout_cost(plans, self.analysis.methods, costs)
        return LayoutResult(
            name=layout.name,
            boundaries=summarise(self.ground, self.grid, post),
            grid=post,
            plans=plans,
            cost=cost,
            metres=metres,
            duration_days=days,
            information_gain_bits=gain,
            gain_per_cost=gain / cost if cost > 0 else None,
            pareto=True,
            by_method=by_method,
            programme=programme,
        )


def with_pareto(results: Sequence[LayoutResult]) -> tuple[LayoutResult, ...]:
    """The results with their ``pareto`` flags set against each other."""
    flags = pareto_flags([r.cost for r in results], [r.information_gain_bits for r in results])
    out = []
    for r, flag in zip(results, flags, strict=True):
        fields = dict(r.__dict__)
        fields["pareto"] = flag
        out.append(LayoutResult(**fields))
    return tuple(out)


def evaluate_project(project: Project, layouts: Sequence[Layout] | None = None) -> Evaluation:
    """Baseline metrics and the results of every layout (default: the project's layouts).

    Returns
    -------
    Evaluation
        Per-layout metrics, plans, costs, Pareto flags, per-cell arrays for maps and the
        grid notice (None unless the grid was coarsened).
    """
    chosen = project.layouts if layouts is None else layouts
    evaluator = GridEvaluator(project, layouts=chosen)
    results = with_pareto([evaluator.evaluate_layout(layout) for layout in chosen])
    return Evaluation(
        evaluator.grid,
        project.ground.boundary_names,
        evaluator.baseline,
        results,
        evaluator.grid_notice,
        evaluator.conditioning,
    )
