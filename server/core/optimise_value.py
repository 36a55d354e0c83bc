"""The optimiser with the net-value objective: how much investigation is worth buying.

docs/optimiser.md "Net value". One greedy run per mix of methods (mobilisation paid up front,
as for the information gain) and one from each hand-made layout, each on expected saving per
unit cost (``probewise.core.netvalue``) until the next probe no longer pays for itself (or
nothing more fits the budget, when one is given). Every prefix of every run is a candidate
answer with net value = expected saving - investigation cost (mobilisation included), and so
is adding nothing (net value 0). The best few on the optimisation grid are valued again on
the full evaluation grid exactly as ``probewise value`` values a layout
(``probewise.core.value``), and the one of highest net value there is returned. There is no
exchange refinement for this objective.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable

import numpy as np

from probewise.core.model import Layout, Project
from probewise.core.netvalue import ValuePick, ValueRun, value_greedy_run
from probewise.core.optimise import (
    OptimiseSetup,
    greedy_jobs,
    layout_from_picks,
    prepare_optimisation,
)
from probewise.core.optimise_requirements import requirement_picks, unmet_text
from probewise.core.optimise_types import (
    FINALISTS,
    OptimiseCancelled,
    OptimiseError,
    OptimiseOptions,
    OptimiseResult,
    ProgressFn,
    RequirementsUnmetError,
    ValuePoint,
)
from probewise.core.value import EmptyElementError, ValueEvaluator

MAX_VALUE_PICKS = 2000  # a run that still pays after this many probes stops here


def run_value_jobs(setup: OptimiseSetup, budget: float, jobs, report, should_stop):
    """Every net-value greedy run of ``jobs``: ``(runs, start layout of each)``."""
    analysis, problem, mob = setup.analysis, setup.problem, setup.mobilisation
    cand = problem.cand
    cost_now = problem.exact_cost(problem.base_state.V[: problem.n_scored])
    runs: list[ValueRun] = []
    starts: dict[int, Layout | None] = {}
    unmet: list[tuple[str, ...]] = []  # what runs that could not meet the requirements miss
    for n_job, (mix, start) in enumerate(jobs):
        if should_stop is not None and should_stop():
            raise OptimiseCancelled()
        state = problem.base_state.copy()
        # a layout with a probe pays the project's fixed items (reporting: core.programme)
        start_cost, start_saving = setup.fixed_cost, 0.0
        taken = None
        if start is not None:
            if problem.layout_cost(start) > budget:
                continue
            start_cost = problem.apply_layout(state, start)[0]
            state.flush()
            start_saving = cost_now - problem.exact_cost(state.V[: problem.n_scored])
            taken = analysis.to_local(np.array([(p.x, p.y) for p in start.probes]))
            left = budget - start_cost
        else:
            left = budget - setup.fixed_cost - sum(mob[m] for m in mix)
        allowed = np.array([m in mix for m in cand.method_ids])
        label = f"from {start.name!r}" if start is not None else "+".join(mix)
        tracker = setup.tracker.copy() if setup.tracker is not None else None
        forced: list[ValuePick] = []
        if tracker is not None:
            if start is not None:
                tracker.add_plans(analysis, analysis.plan(start))
            forced, left, taken = _forced_picks(
                problem, state, tracker, allowed, left, setup, taken
            )
            if not tracker.meets():  # the budget cannot bring this run up to the counts
                unmet.append(unmet_text(analysis, tracker))
                continue

        def on_pick(n, n_job=n_job, label=label):
            if should_stop is not None and should_stop():
                raise OptimiseCancelled()
            report(0.05 + 0.75 * (n_job + min(n, 50) / 51) / len(jobs), f"{label}: {n} picks")

        picks = value_greedy_run(
            problem,
            state,
            allowed,
            left,
            setup.min_spacing_m,
            taken,
            MAX_VALUE_PICKS,
            on_pick,
            tracker,
        )
        picks = tuple(forced) + picks
        starts[len(runs)] = start
        runs.append(
            ValueRun(
                mix, start.name if start else None, start_cost, start_saving, picks, len(forced)
            )
        )
        report(0.05 + 0.75 * (n_job + 1) / len(jobs), f"{label}: done, {len(picks)} picks")
    if setup.tracker is not None and not runs:
        raise RequirementsUnmetError(budget, min(unmet, key=len) if unmet else ("no run",))
    return runs, starts


def _forced_picks(problem, state, tracker, allowed, left, setup, taken):
    """The picks that bring a run up to the requirements' counts
    (``probewise.core.optimise_requirements.requirement_picks``), each with the expected saving
    it adds: ``(picks, money left, taken locations)``."""
    taken = np.zeros((0, 2)) if taken is None else taken
    state.flush()
    before = problem.exact_cost(state.V[: problem.n_scored])
    got, left, taken = requirement_picks(
        problem, state, tracker, allowed, left, setup.min_spacing_m, taken
    )
    state.flush()
    after = problem.exact_cost(state.V[: problem.n_scored])
    # their joint saving sits on the last of them: the prefixes before it are not layouts
    savings = [0.0] * len(got)
    if got:
        savings[-1] = before - after
    picks = [ValuePick(p.location, p.method, p.cost, s) for p, s in zip(got, savings, strict=True)]
    return picks, left, taken


def _finalists(runs, cand, mob, budget, nothing_meets=True):
    """``(net value, -cost, run index, n picks)`` of the prefixes to value on the full grid:
    the best few, the best of each warm start, and adding nothing (run index -1)."""
    prefixes = [(0.0, -0.0, -1, 0)] if nothing_meets else []
    for r_idx, run in enumerate(runs):
        for n, cost, saving in run.prefixes(cand, mob):
            if n < run.n_forced:  # short of the requirements' counts: not a layout
                continue
            if cost <= budget + 1e-9 and (n > 0 or run.start is not None):
                prefixes.append((saving - cost, -cost, r_idx, n))
    chosen = sorted(prefixes, reverse=True)[:FINALISTS]
    for r_idx, run in enumerate(runs):
        mine = [p for p in prefixes if p[2] == r_idx]
        if run.start is not None and mine:
            chosen.append(max(mine))
    return list(dict.fromkeys(chosen)), prefixes


def value_curve(run: ValueRun, cand, mob, n_chosen: int | None) -> tuple[ValuePoint, ...]:
    """The saving-cost curve of a run, prefix by prefix; ``n_chosen`` marks the optimum."""
    return tuple(
        ValuePoint(float(cost), float(saving), n, n == n_chosen)
        for n, cost, saving in run.prefixes(cand, mob)
        if n >= run.n_forced
    )


def optimise_net_value(
    project: Project,
    options: OptimiseOptions,
    progress: ProgressFn | None = None,
    should_stop: Callable[[], bool] | None = None,
    name: str | None = None,
    setup: OptimiseSetup | None = None,
) -> OptimiseResult:
    """Propose the layout of highest net value (expected saving less investigation cost).

    As ``probewise.core.optimise.optimise`` with ``options.objective == "net-value"``;
    ``options.budget`` may be ``inf`` (no cap). The layout may have no probes when no
    prefix has a positive net value on the full grid.

    Raises
    ------
    OptimiseError
        ``elements`` when the model has none (or one holds no cell), or as ``optimise``.
    OptimiseCancelled
    """
    t_start = time.perf_counter()
    done = [0.0]

    def report(fraction: float, message: str) -> None:
        done[0] = max(done[0], min(fraction, 1.0))
        if progress is not None:
            progress(done[0], message)

    budget = options.budget
    if not (budget > 0) or math.isnan(budget):
        raise OptimiseError("the budget must be a positive number (or none)", "budget")
    if not project.elements:
        raise OptimiseError(
            "the model has no design elements: the net value needs at least one", "elements"
        )
    if setup is None:
        setup = prepare_optimisation(project, options, report)
    jobs = greedy_jobs(project, options, setup)
    runs, starts = run_value_jobs(setup, budget, jobs, report, should_stop)
    cand, mob = setup.candidates, setup.mobilisation
    # adding nothing is a layout only when the existing probes already meet the requirements
    nothing_meets = setup.tracker is None or setup.tracker.meets()
    finalists, prefixes = _finalists(runs, cand, mob, budget, nothing_meets)
    report(0.82, "valuing the best layouts on the full grid")
    evaluator, analysis = setup.evaluator, setup.analysis
    try:
        values = ValueEvaluator(
            project,
            evaluator.grid,
            evaluator.baseline.grid.mean_m,
            evaluator.baseline.grid.std_m,
            analysis.baseline,
        )
    except EmptyElementError as exc:
        raise OptimiseError(
            f"element {exc.name!r} holds no evaluation cell centre", "elements"
        ) from None
    title = name or "Optimised for net value"
    best = None
    for _, _, r_idx, n in finalists:
        if should_stop is not None and should_stop():
            raise OptimiseCancelled()
        start = starts[r_idx] if r_idx >= 0 else None
        picks = [(p.location, p.method) for p in runs[r_idx].picks[:n]] if r_idx >= 0 else []
        layout = layout_from_picks(cand, picks, start, title)
        result = evaluator.evaluate_layout(layout)
        state = analysis.layout_state(layout)[0] if values.needs_state else None
        value = values.layout_value(title, result.cost, result.grid.std_m, state)
        key = (value.net_value, -result.cost)
        if result.cost <= budget + 1e-6 and (best is None or key > best[0]):
            best = (key, layout, result, value, r_idx, n)
    _, layout, result, value, r_idx, n = best
    if r_idx < 0:  # adding nothing: show the run of the best prefix on the search grid
        r_idx = max(prefixes[1:], default=(0, 0, -1, 0))[2]
        n = 0 if r_idx >= 0 and runs[r_idx].start is None else None
    curve = value_curve(runs[r_idx], cand, mob, n) if r_idx >= 0 else ()
    report(1.0, "done")
    return OptimiseResult(
        layout=layout,
        result=result,
        curve=(),
        runs=tuple(runs),
        candidates=cand,
        optimisation_cells=setup.grid.n_cells,
        optimisation_spacing_m=setup.grid.spacing_m,
        candidate_spacing_m=setup.candidate_spacing_m,
        min_spacing_m=setup.min_spacing_m,
        seconds=time.perf_counter() - t_start,
        objective="net-value",
        value=value,
        value_curve=curve,
    )
