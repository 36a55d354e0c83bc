"""Greedy optimiser: the most information per unit of money, with exact low-rank updates.

docs/model.md "Optimiser". Candidates are a regular grid of locations inside the site and outside
exclusions, times the allowed methods; each candidate's planned depth and observed set are
planned exactly as for evaluation (``probewise.core.planning``), so the optimiser scores what
``evaluate`` will report. Greedy forward selection picks, at each step, the candidate with
the largest information gain per unit cost (per location + per metre x planned depth), until
nothing more fits the budget; references: greedy variance/entropy reduction for Gaussian
processes (Krause, Singh and Guestrin, JMLR 9, 2008).

Exact incremental updates: the posterior covariance ``M`` between every candidate
location-boundary and every target (the cell average of a boundary of interest over a cell
of the optimisation grid: cells are areas, ``probewise.core.blocks``) is kept and updated by a
rank-k step after each pick; a candidate is scored from its rows of ``M`` without re-solving
anything. The compiled kernel (``probewise.core.greedy_kernel``) finds the best candidate in
about one pass over ``M``: an upper bound per location (an envelope probe reading every
boundary with the best precision) and exact scores only for the few candidates whose bound
per cost can still win, so the pick is the one full scoring would make.
``probewise.core.optimise_reference`` is the brute-force check.

Several budgets can share one :func:`prepare_optimisation` (candidates, covariances), as the
ranking of options does. Long runs report progress through a callback and poll a
``should_stop`` callback between picks (the web's progress bar and cancel button).

Mobilisation makes a method's first probe look expensive, so mixes are handled explicitly:
one greedy run per mix of methods (every subset of the allowed methods of at most
``max_methods_per_mix``), with the mix's mobilisation paid up front; runs are also started
from every hand-made layout that fits the budget (its probes kept, more added), so the result
never gains less than an option the engineer already has. Every prefix of a run is a layout;
the cost-gain curve is the upper envelope of all prefixes, and the best few layouts within
the budget are re-evaluated on the full evaluation grid to choose the answer.
"""

from __future__ import annotations

import itertools
import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from probewise.core.analysis import ProjectAnalysis
from probewise.core.candidates import (  # noqa: F401 - public here as before
    build_candidates,
    candidate_locations,
    check_candidate_count,
    nice_spacing_m,
    optimisation_grid,
)
from probewise.core.evaluate import GridEvaluator
from probewise.core.greedy import (  # noqa: F401 - public here as before
    GreedyProblem,
    GreedyState,
    Targets,
    build_targets,
    forward_substitute,
    greedy_run,
)
from probewise.core.grid import EvaluationGrid
from probewise.core.local_conditioning import (
    LocalState,
    estimated_cells,
    use_local,
)
from probewise.core.model import CORRELATED_OPTIMISER_PROBLEM, Layout, PlannedProbe, Project
from probewise.core.optimise_requirements import (
    candidate_tracker,
    check_finalist,
    no_feasible_prefix,
    requirement_picks,
    unmet_text,
    with_required_methods,
)
from probewise.core.optimise_types import (  # noqa: F401 - public here as before
    FINALISTS,
    KERNEL_LOCK,
    MAX_CANDIDATE_LOCATIONS,
    MIN_GAIN_BITS,
    OBJECTIVES,
    Candidates,
    GreedyRun,
    OptimiseCancelled,
    OptimiseError,
    OptimiseOptions,
    OptimiseResult,
    Pick,
    ProgressFn,
    Refinement,
    RequirementsUnmetError,
)
from probewise.core.programme import method_fixed_cost, project_fixed_cost
from probewise.core.requirements import RequirementTracker


def method_mixes(
    method_ids: Sequence[str], mobilisation: dict[str, float], budget: float, max_size: int
) -> list[tuple[str, ...]]:
    """Every mix of at most ``max_size`` methods whose mobilisation fits the budget."""
    mixes = []
    for size in range(1, min(max_size, len(method_ids)) + 1):
        for mix in itertools.combinations(method_ids, size):
            if sum(mobilisation[m] for m in mix) < budget:
                mixes.append(mix)
    return mixes


def layout_from_run(
    problem: GreedyProblem, run: GreedyRun, n_picks: int, start: Layout | None, name: str
) -> Layout:
    """The layout of the first ``n_picks`` picks of a run (after its start layout)."""
    picks = [(p.location, p.method) for p in run.picks[:n_picks]]
    return layout_from_picks(problem.cand, picks, start, name)


def layout_from_picks(
    cand: Candidates, picks: Sequence[tuple[int, int]], start: Layout | None, name: str
) -> Layout:
    """The layout of ``start``'s probes (if any) and candidates ``(location, method)``."""
    probes = list(start.probes) if start is not None else []
    used_ids = {p.id for p in probes}
    counters: dict[str, int] = {}
    for l, j in picks:
        mid = cand.method_ids[j]
        while True:
            counters[mid] = counters.get(mid, 0) + 1
            pid = f"{mid}-O{counters[mid]:02d}"
            if pid not in used_ids:
                break
        used_ids.add(pid)
        x, y = cand.xy[l]
        probes.append(PlannedProbe(pid, mid, float(x), float(y)))
    return Layout(name, tuple(probes))


def upper_envelope(points: Sequence[tuple[float, float]]) -> tuple[tuple[float, float], ...]:
    """Cost-gain points where the gain rises above every cheaper point: the curve."""
    out: list[tuple[float, float]] = []
    best = -math.inf
    for cost, gain in sorted(points, key=lambda p: (p[0], -p[1])):
        if gain > best + 1e-12:
            out.append((float(cost), float(gain)))
            best = gain
    return tuple(out)


@dataclass(eq=False)
class OptimiseSetup:
    """What one optimisation builds before any greedy run, reusable across budgets.

    Built by :func:`prepare_optimisation`; pass it to :func:`optimise` to run several
    budgets (e.g. for a ranking) without planning candidates and covariances again.
    """

    project: Project
    options: OptimiseOptions
    analysis: ProjectAnalysis
    grid: EvaluationGrid
    candidate_spacing_m: float
    min_spacing_m: float
    problem: GreedyProblem
    mobilisation: dict[str, float]
    fixed_cost: float = 0.0  # what any layout with a probe pays (reporting, with contingency)
    _evaluator: GridEvaluator | None = None
    tracker: RequirementTracker | None = None  # the requirements hook (None: none)

    @property
    def candidates(self) -> Candidates:
        return self.problem.cand

    @property
    def evaluator(self) -> GridEvaluator:
        """Evaluator on the project's full evaluation grid (built on first use)."""
        if self._evaluator is None:
            # the greedy's own grid may be exact where the full grid is not (a corridor): the
            # finalists are then scored on the full grid locally, as evaluate scores them
            # (docs/model.md "Many readings")
            analysis = self.analysis
            full_cells = estimated_cells(self.project.site)
            exact_here = not isinstance(analysis.baseline, LocalState)
            if exact_here and use_local(analysis.existing.size, full_cells):
                analysis = ProjectAnalysis(self.project)
            self._evaluator = GridEvaluator(self.project, analysis)
        return self._evaluator


def prepare_optimisation(
    project: Project, options: OptimiseOptions, progress: ProgressFn | None = None
) -> OptimiseSetup:
    """Check the options, plan the candidates and build the greedy problem.

    ``options.budget`` is not used here. Raises OptimiseError (see :func:`optimise`).
    """
    report = progress or (lambda f, m: None)
    if options.objective not in OBJECTIVES:
        raise OptimiseError(
            f"must be one of {', '.join(OBJECTIVES)}, not {options.objective!r}", "objective"
        )
    net_value = options.objective == "net-value"
    if net_value and not project.elements:
        raise OptimiseError(
            "the model has no design elements: the net value needs at least one", "elements"
        )
    if project.ground.thickness_correlation:  # the greedy updates sum independent units
        raise OptimiseError(CORRELATED_OPTIMISER_PROBLEM, "thickness_correlation")
    # the greedy works on at most max_cells cells: exact unless the readings alone are many
    analysis = ProjectAnalysis(project, n_cells=options.max_cells)
    methods = analysis.methods
    allowed_ids = tuple(dict.fromkeys(options.methods)) if options.methods else tuple(methods)
    unknown = [m for m in allowed_ids if m not in methods]
    if unknown:
        raise OptimiseError(
            f"no method with id {unknown[0]!r}; methods are {', '.join(methods)}", "methods"
        )
    for value, label in (
        (options.candidate_spacing_m, "candidate_spacing_m"),
        (options.min_spacing_m, "min_spacing_m"),
    ):
        if value is not None and not (math.isfinite(value) and value > 0):
            raise OptimiseError(f"must be a positive number of metres, not {value:g}", label)
    grid = optimisation_grid(project, analysis.origin, options.max_cells)
    spacing = options.candidate_spacing_m
    if spacing is None:
        area = grid.n_cells * grid.cell_area_m2
        spacing = nice_spacing_m(max(math.sqrt(area / options.target_locations), 1e-3))
    min_spacing = options.min_spacing_m if options.min_spacing_m is not None else spacing
    check_candidate_count(grid.n_cells * grid.cell_area_m2, spacing)
    xy = candidate_locations(project, analysis.origin, spacing)
    check_candidate_count(grid.n_cells * grid.cell_area_m2, spacing, len(xy))
    if len(xy) == 0:
        raise OptimiseError(
            "no candidate location: the site (less exclusions) is smaller than the candidate "
            "spacing; use a finer --candidate-spacing",
            "candidate_spacing_m",
        )
    report(0.02, f"planning {len(xy)} locations x {len(allowed_ids)} methods")
    cand = build_candidates(analysis, xy, allowed_ids)
    if not cand.valid.any():
        raise OptimiseError(
            "no allowed method can read any boundary anywhere on the site", "methods"
        )
    report(0.05, "building the covariance of candidates and targets")
    if net_value:
        from probewise.core.netvalue import ValueProblem

        problem = ValueProblem(analysis, cand, grid, project)
    else:
        problem = GreedyProblem(analysis, cand, build_targets(analysis, grid))
    # one pricing with evaluation and the schedule (probewise.core.programme)
    mob = {m: method_fixed_cost(methods[m], project.costs) for m in allowed_ids}
    return OptimiseSetup(
        project,
        options,
        analysis,
        grid,
        float(spacing),
        float(min_spacing),
        problem,
        mob,
        project_fixed_cost(project.costs),
        tracker=candidate_tracker(analysis, cand),
    )


def greedy_jobs(
    project: Project, options: OptimiseOptions, setup: OptimiseSetup
) -> list[tuple[tuple[str, ...], Layout | None]]:
    """The greedy runs to make: one per mix of methods, one per usable hand-made layout."""
    mob, allowed_ids = setup.mobilisation, setup.candidates.method_ids
    left_for_mixes = options.budget - setup.fixed_cost
    mixes = method_mixes(allowed_ids, mob, left_for_mixes, options.max_methods_per_mix)
    if setup.tracker is not None:
        mixes = with_required_methods(mixes, setup.analysis, allowed_ids)
        mixes = [m for m in mixes if sum(mob[i] for i in m) < left_for_mixes]
    jobs: list[tuple[tuple[str, ...], Layout | None]] = [(mix, None) for mix in mixes]
    # a warm start conditions on a hand-made layout given the factor of all readings, which
    # local conditioning (many readings) has not
    if options.warm_start and not isinstance(setup.analysis.baseline, LocalState):
        for layout in project.layouts:
            used = tuple(dict.fromkeys(p.method for p in layout.probes))
            if layout.probes and set(used) <= set(allowed_ids):
                jobs.append((used, layout))
    if not jobs:
        raise _no_mobilisation_error(options.budget, mob)
    return jobs


def _no_mobilisation_error(budget: float, mob: dict[str, float]) -> OptimiseError:
    return OptimiseError(
        f"{budget:g} does not cover the mobilisation of any allowed method "
        f"(the cheapest is {min(mob.values()):g})",
        "budget",
    )


def run_greedy_jobs(
    setup: OptimiseSetup,
    budget: float,
    jobs: Sequence[tuple[tuple[str, ...], Layout | None]],
    report: ProgressFn,
    should_stop: Callable[[], bool] | None,
) -> tuple[list[GreedyRun], dict[int, Layout | None]]:
    """Every greedy run of ``jobs``; returns the runs and the start layout of each."""
    analysis, problem, mob = setup.analysis, setup.problem, setup.mobilisation
    cand = problem.cand
    runs: list[GreedyRun] = []
    starts: dict[int, Layout | None] = {}
    for n_job, (mix, start) in enumerate(jobs):
        if should_stop is not None and should_stop():
            raise OptimiseCancelled()
        state = problem.base_state.copy()
        start_cost, start_gain = setup.fixed_cost, 0.0
        taken = np.zeros((0, 2))
        tracker = setup.tracker.copy() if setup.tracker is not None else None
        if start is not None:
            start_cost = problem.layout_cost(start)
            if start_cost > budget:
                continue
            start_cost, start_gain = problem.apply_layout(state, start)
            taken = analysis.to_local(np.array([(p.x, p.y) for p in start.probes]))
            left = budget - start_cost
            if tracker is not None:
                tracker.add_plans(analysis, analysis.plan(start))
        else:
            left = budget - setup.fixed_cost - sum(mob[m] for m in mix)
        allowed = np.array([m in mix for m in cand.method_ids])
        first: list[Pick] = []
        start_meets = tracker is None or tracker.meets()
        if tracker is not None:
            first, left, taken = requirement_picks(
                problem, state, tracker, allowed, left, setup.min_spacing_m, taken
            )
        label = f"from {start.name!r}" if start is not None else "+".join(mix)

        def on_pick(n, n_job=n_job, label=label):
            if should_stop is not None and should_stop():
                raise OptimiseCancelled()
            report(0.05 + 0.75 * (n_job + min(n, 50) / 51) / len(jobs), f"{label}: {n} picks")

        picks = greedy_run(
            problem,
            state,
            allowed,
            left,
            setup.min_spacing_m,
            taken,
            on_pick=on_pick,
            tracker=tracker,
        )
        picks = (*first, *picks)
        unmet = () if tracker is None else unmet_text(analysis, tracker)
        starts[len(runs)] = start
        runs.append(
            GreedyRun(
                mix,
                start.name if start else None,
                start_cost,
                start_gain,
                picks,
                start_meets,
                unmet,
            )
        )
        report(0.05 + 0.75 * (n_job + 1) / len(jobs), f"{label}: done, {len(picks)} picks")
    return runs, starts


def budget_prefixes(
    runs: Sequence[GreedyRun],
    cand: Candidates,
    mob: dict[str, float],
    budget: float,
    fixed_cost: float = 0.0,
    requirements: bool = False,
) -> list[tuple[float, float, int, int]]:
    """``(gain, -cost, run index, n picks)`` of every prefix within the budget (that meets
    every requirement, with ``requirements``; ``fixed_cost``: what any layout with a probe
    pays)."""
    prefixes = []
    for r_idx, run in enumerate(runs):
        for n, cost, gain in run.prefixes(cand, mob, feasible=requirements):
            if cost <= budget + 1e-9 and (n > 0 or run.start is not None):
                prefixes.append((gain, -cost, r_idx, n))
    if not prefixes and requirements and runs:
        raise no_feasible_prefix(budget, runs)
    if not prefixes:
        if budget <= fixed_cost + min(mob.values()):
            raise _no_mobilisation_error(budget, mob)
        raise OptimiseError(
            f"nothing fits a budget of {budget:g}: no allowed probe costs that little "
            "after mobilisation",
            "budget",
        )
    return prefixes


def choose_finalist(
    setup: OptimiseSetup,
    runs: Sequence[GreedyRun],
    starts: dict[int, Layout | None],
    prefixes: Sequence[tuple[float, float, int, int]],
    budget: float,
    title: str,
    should_stop: Callable[[], bool] | None,
):
    """Evaluate the best prefixes on the full grid; ``(layout, result, run index, n picks)``
    of the one with the most gain (then the least cost) within the budget."""
    finalists = sorted(prefixes, reverse=True)[:FINALISTS]
    # the best prefix of each warm start keeps the guarantee against hand-made layouts
    for r_idx, run in enumerate(runs):
        if run.start is not None:
            mine = [p for p in prefixes if p[2] == r_idx]
            if mine:
                finalists.append(max(mine))
    best = None
    missed: tuple[str, ...] = ()
    if should_stop is not None and should_stop():
        raise OptimiseCancelled()
    chosen = list(dict.fromkeys(finalists))
    layouts = [
        layout_from_run(setup.problem, runs[r_idx], n, starts[r_idx], title)
        for _, _, r_idx, n in chosen
    ]
    # one sweep of the tiles for all of them when conditioned locally
    results = setup.evaluator.evaluate_layouts(layouts)
    for (_, _, r_idx, n), layout, result in zip(chosen, layouts, results, strict=True):
        if setup.tracker is not None:
            unmet = check_finalist(setup.analysis, result)
            if unmet:
                missed = unmet
                continue
        key = (result.information_gain_bits, -result.cost)
        if result.cost <= budget + 1e-6 and (best is None or key > best[0]):
            best = (key, layout, result, r_idx, n)
    if best is None and setup.tracker is not None:
        raise RequirementsUnmetError(budget, missed)
    if best is None:  # pragma: no cover - prefixes were costed the same way
        raise OptimiseError(f"nothing fits a budget of {budget:g}", "budget")
    return best[1:]


def optimise(
    project: Project,
    options: OptimiseOptions,
    progress: ProgressFn | None = None,
    should_stop: Callable[[], bool] | None = None,
    name: str | None = None,
    setup: OptimiseSetup | None = None,
) -> OptimiseResult:
    """Propose the layout that buys the most information within ``options.budget``.

    Greedy runs (:func:`run_greedy_jobs`), the best prefixes evaluated on the full grid
    (:func:`choose_finalist`), then the exchange refinement of the chosen one
    (``probewise.core.refine``), kept when it gains more on the full grid.

    Parameters
    ----------
    project : Project
    options : OptimiseOptions
    progress : callable(fraction, message), optional
        Told how far the search is (0..1, never decreasing, 1 at the end).
    should_stop : callable() -> bool, optional
        Polled between picks; when it returns True the search raises OptimiseCancelled.
    name : str, optional
        Name of the returned layout; default ``"Optimised for <budget>"``.
    setup : OptimiseSetup, optional
        From :func:`prepare_optimisation` with the same project and options but the budget;
        saves planning again when several budgets are optimised.

    Returns
    -------
    OptimiseResult

    Raises
    ------
    OptimiseError
        Bad options, no usable candidate, or nothing fits the budget; ``field`` says which.
    OptimiseCancelled
    """
    from probewise.core.refine import refine_layout

    if options.objective == "net-value":
        from probewise.core.optimise_value import optimise_net_value

        return optimise_net_value(project, options, progress, should_stop, name, setup)
    t_start = time.perf_counter()
    done = [0.0]

    def report(fraction: float, message: str) -> None:
        done[0] = max(done[0], min(fraction, 1.0))  # never backwards
        if progress is not None:
            progress(done[0], message)

    if not (math.isfinite(options.budget) and options.budget > 0):
        raise OptimiseError("the budget must be a positive number", "budget")
    if setup is None:
        setup = prepare_optimisation(project, options, report)
    jobs = greedy_jobs(project, options, setup)
    runs, starts = run_greedy_jobs(setup, options.budget, jobs, report, should_stop)
    prefixes = budget_prefixes(
        runs,
        setup.candidates,
        setup.mobilisation,
        options.budget,
        setup.fixed_cost,
        setup.tracker is not None,
    )
    curve = upper_envelope([(-c, g) for g, c, _, _ in prefixes])
    notice = setup.evaluator.grid_notice  # many readings over a large site: coarsened
    where = f"({notice})" if notice else "on the full grid"
    report(0.82, f"re-evaluating the best layouts {where}")
    title = name or f"Optimised for {options.budget:g}"
    layout, result, r_idx, n = choose_finalist(
        setup, runs, starts, prefixes, options.budget, title, should_stop
    )

    def on_step(fraction: float) -> None:
        if should_stop is not None and should_stop():
            raise OptimiseCancelled()
        report(0.85 + 0.14 * fraction, "refining the layout by exchanges")

    layout, result, refinement = refine_layout(
        setup, options, runs[r_idx], n, starts[r_idx], (layout, result), options.budget, on_step
    )
    report(1.0, "done")
    return OptimiseResult(
        layout=layout,
        result=result,
        curve=curve,
        runs=tuple(runs),
        candidates=setup.candidates,
        optimisation_cells=setup.grid.n_cells,
        optimisation_spacing_m=setup.grid.spacing_m,
        candidate_spacing_m=setup.candidate_spacing_m,
        min_spacing_m=setup.min_spacing_m,
        seconds=time.perf_counter() - t_start,
        refinement=refinement,
    )
