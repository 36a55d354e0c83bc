"""The optimiser's requirements hook (docs/optimiser.md "Requirements").

Whatever the objective, a run meets the requirements the same way:

1. its mix of methods holds every method with a least number of probes;
2. it starts with the picks that bring the layout up to the least counts
   (:func:`requirement_picks`): probes of each required method, then, while a test
   requirement is short, the best candidate (on the run's own rule) among those that deliver
   that test;
3. every later pick keeps each calibration rule (the tracker's mask in
   ``probewise.core.greedy.greedy_run``), and each pick records whether the layout then meets
   every requirement (``Pick.meets``);
4. only prefixes that meet them are layouts (``GreedyRun.prefixes(..., feasible=True)``),
   the finalists are checked again on their evaluated plans, and the exchange refinement only
   tries replacements after which they still hold.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from probewise.core.greedy import GreedyProblem, GreedyState, greedy_run
from probewise.core.optimise_types import Pick, RequirementsUnmetError
from probewise.core.requirements import (
    RequirementTracker,
    build_tracker,
    describe_unmet,
    requirement_status,
)


def candidate_tracker(analysis, cand) -> RequirementTracker | None:
    """The requirements against the optimiser's candidates (None without requirements)."""
    return build_tracker(analysis, cand.method_ids, cand.xy, cand.depth_m)


def with_required_methods(
    mixes: Sequence[tuple[str, ...]], analysis, allowed_ids: Sequence[str]
) -> list[tuple[str, ...]]:
    """Every mix with the methods that need a least number of probes added (allowed ones),
    repeats dropped."""
    req = analysis.project.requirements
    if req is None:
        return list(mixes)
    needed = [m for m, n in req.min_probes if n > 0 and m in allowed_ids]
    out = []
    for mix in mixes:
        full = tuple(m for m in allowed_ids if m in mix or m in needed)
        out.append(full)
    return list(dict.fromkeys(out))


def requirement_picks(
    problem: GreedyProblem,
    state: GreedyState,
    tracker: RequirementTracker,
    allowed: np.ndarray,
    budget_left: float,
    min_spacing_m: float,
    taken_xy: np.ndarray,
) -> tuple[list[Pick], float, np.ndarray]:
    """The picks that bring a run up to the least counts; updates ``state`` and ``tracker``.

    Methods that calibrate others come first (their probes let calibrated ones be placed).
    Returns the picks, the money left and the taken locations (local, ``(n, 2)``).
    """
    cand = problem.cand
    ids = np.array(cand.method_ids)
    req = tracker.req
    calibrators = {c.method for c in req.calibration}
    order = sorted(req.min_probes, key=lambda mn: mn[0] not in calibrators)
    picks: list[Pick] = []

    def run(only_methods: np.ndarray, max_picks: int, only=None) -> bool:
        nonlocal budget_left, taken_xy
        got = greedy_run(
            problem,
            state,
            only_methods,
            budget_left,
            min_spacing_m,
            taken_xy,
            max_picks=max_picks,
            tracker=tracker,
            only=only,
        )
        picks.extend(got)
        budget_left -= sum(p.cost for p in got)
        if got:
            taken_xy = np.vstack([taken_xy, cand.local[[p.location for p in got]]])
        return bool(got)

    for mid, n in order:
        short = n - tracker.n_method.get(mid, 0)
        if short > 0:
            run(allowed & (ids == mid), short)
    for r, need in enumerate(req.tests):
        while tracker.tests[r] < need.count:
            if not run(allowed, 1, tracker.counts[:, :, r] > 0):
                break
    return picks, budget_left, taken_xy


def unmet_text(analysis, tracker: RequirementTracker) -> tuple[str, ...]:
    """What a tracker's layout misses, in words."""
    return tuple(describe_unmet(analysis.project, k, i, tracker) for k, i in tracker.unmet())


def check_finalist(analysis, result) -> tuple[str, ...]:
    """What an evaluated layout misses (empty when it meets every requirement)."""
    status = requirement_status(analysis, result.plans)
    return () if status is None else status.unmet


def no_feasible_prefix(budget: float, runs) -> RequirementsUnmetError:
    """The error when no run reached a layout that meets every requirement: the unmet
    requirements of the run that came closest."""
    tried = [r.unmet for r in runs if r.unmet]
    closest = min(tried, key=len) if tried else ("no candidate can meet them",)
    return RequirementsUnmetError(budget, closest)
