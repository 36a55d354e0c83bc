"""Spatial simulated annealing of probe positions: the reference the optimiser is compared with.

After J. W. van Groenigen and A. Stein (1998), Constrained optimization of spatial sampling
using continuous simulated annealing, Journal of Environmental Quality 27, 1078-1086 (details
from memory): a fixed number of points starts at random; each iteration moves one point, chosen
at random, in a random direction by a random distance whose maximum shrinks linearly over the
run; a move that leaves the allowed area (here: outside the site, inside an exclusion or
closer than the minimum spacing to another probe) is drawn again, and a layout over the budget
is rejected; a move is accepted when it does not lower the objective, and otherwise with the
Metropolis probability ``exp(delta / T)``, the temperature ``T`` falling geometrically (here
from the value at which a 1 % loss is accepted half the time, a thousandfold over the run;
common practice, no source).

The objective is the information gain as ``probewise.core.evaluate`` computes it (the layout's
readings planned by ``probewise.core.planning``, the posterior re-solved from the existing
probes by ``PosteriorState.extend``); nothing of the optimiser's cached state is used. Slow by
design; used by the tests and ``benchmarks/optimise.py`` only.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from probewise.core.evaluate import GridEvaluator, information_gain_bits, layout_cost
from probewise.core.geometry import points_in_polygon
from probewise.core.model import Layout, PlannedProbe, Project


@dataclass(frozen=True)
class AnnealResult:
    """The best layout the annealing met, its gain (bits) and cost on the scoring grid."""

    layout: Layout
    gain_bits: float
    cost: float
    iterations: int
    accepted: int


def allowed_xy(project: Project, xy: np.ndarray) -> np.ndarray:
    """``(n,)`` bool: project-coordinate points inside the site and outside every exclusion."""
    keep = points_in_polygon(xy, project.site.outline)
    for excl in project.site.exclusions:
        keep &= ~points_in_polygon(xy, excl)
    return keep


class LayoutScorer:
    """Gain and cost of a one-method layout on an evaluation grid (the path of ``evaluate``)."""

    def __init__(self, project: Project, max_cells: int | None = None):
        kwargs = {} if max_cells is None else {"max_cells": max_cells}
        self.evaluator = GridEvaluator(project, **kwargs)
        self.analysis = self.evaluator.analysis
        self.ground = project.ground

    def score(self, layout: Layout) -> tuple[float, float]:
        """``(gain_bits, cost)`` of a layout."""
        ev = self.evaluator
        state, plans = self.analysis.layout_state(layout)
        pred = state.predict(ev.grid.xy, base=ev.base_pred)
        gain = information_gain_bits(self.ground, ev.grid, ev.base_pred.var_m2, pred.var_m2)
        return gain, layout_cost(plans, self.analysis.methods, self.analysis.project.costs)[0]


def _layout(method_id: str, xy: np.ndarray) -> Layout:
    probes = tuple(
        PlannedProbe(f"{method_id}-A{k + 1:02d}", method_id, float(x), float(y))
        for k, (x, y) in enumerate(xy)
    )
    return Layout("Annealed", probes)


def _spaced(xy: np.ndarray, k: int, point: np.ndarray, min_spacing_m: float) -> bool:
    d = np.hypot(*(xy - point).T)
    d[k] = np.inf
    return bool(d.min() >= min_spacing_m) if len(d) > 1 else True


def anneal_layout(
    project: Project,
    method_id: str,
    n_probes: int,
    budget: float,
    min_spacing_m: float,
    iterations: int,
    seed: int,
    max_cells: int | None = None,
    scorer: LayoutScorer | None = None,
    seconds: float | None = None,
) -> AnnealResult:
    """Anneal ``n_probes`` probes of one method within a budget; the best layout met.

    Parameters
    ----------
    project : Project
    method_id : str
    n_probes : int
    budget : float
        Most a layout may cost (mobilisation included).
    min_spacing_m : float
        Least distance between probes.
    iterations : int
        Number of moves tried (each one scores a layout).
    seed : int
        Seed of the random generator.
    max_cells : int, optional
        Score on the evaluation grid coarsened to at most this many cells.
    scorer : LayoutScorer, optional
        Reused across runs on the same project and grid.
    seconds : float, optional
        Run for this wall time instead of ``iterations`` moves; the step and the
        temperature then follow the fraction of the time spent.
    """
    rng = np.random.default_rng(seed)
    scorer = scorer or LayoutScorer(project, max_cells)
    rings = np.vstack(project.site.outline.rings)
    lo, hi = rings.min(axis=0), rings.max(axis=0)
    xy = _random_start(project, scorer, method_id, n_probes, budget, min_spacing_m, rng, lo, hi)
    gain, cost = scorer.score(_layout(method_id, xy))
    best = (gain, cost, xy.copy())
    step0_m = 0.5 * float(np.max(hi - lo))  # first moves may cross half the site
    step1_m = 1.0
    temp0 = max(0.01 * gain, 1e-9) / math.log(2.0)  # a 1 % loss is accepted half the time
    accepted = it = 0
    t0 = time.perf_counter()
    while True:
        spent = time.perf_counter() - t0
        frac = it / max(iterations, 1) if seconds is None else spent / seconds
        if frac >= 1.0:
            break
        it += 1
        temp = temp0 * 1e-3**frac  # T falls a thousandfold over the run
        step_m = step0_m + (step1_m - step0_m) * frac
        k = int(rng.integers(n_probes))
        for _ in range(100):  # draw again until the move lands where a probe may go
            angle = rng.uniform(0.0, 2.0 * math.pi)
            point = xy[k] + rng.uniform(0.0, step_m) * np.array([math.cos(angle), math.sin(angle)])
            if allowed_xy(project, point[None, :])[0] and _spaced(xy, k, point, min_spacing_m):
                break
        else:
            continue
        trial = xy.copy()
        trial[k] = point
        g_new, c_new = scorer.score(_layout(method_id, trial))
        delta = g_new - gain
        if c_new <= budget + 1e-9 and (delta >= 0 or rng.random() < math.exp(delta / temp)):
            xy, gain, cost = trial, g_new, c_new
            accepted += 1
            if gain > best[0]:
                best = (gain, cost, xy.copy())
    return AnnealResult(_layout(method_id, best[2]), best[0], best[1], it, accepted)


def _random_start(project, scorer, method_id, n_probes, budget, min_spacing_m, rng, lo, hi):
    """``n_probes`` random allowed points, spaced, whose layout fits the budget."""
    for _ in range(1000):
        pts: list[np.ndarray] = []
        tries = 0
        while len(pts) < n_probes and tries < 100 * n_probes:
            tries += 1
            p = rng.uniform(lo, hi)
            if not allowed_xy(project, p[None, :])[0]:
                continue
            if pts and np.hypot(*(np.array(pts) - p).T).min() < min_spacing_m:
                continue
            pts.append(p)
        if len(pts) == n_probes:
            xy = np.array(pts)
            if scorer.score(_layout(method_id, xy))[1] <= budget + 1e-9:
                return xy
    raise ValueError(f"no random start of {n_probes} probes fits a budget of {budget:g}")
