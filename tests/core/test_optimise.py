"""The greedy optimiser (server/core/optimise.py).

Checks, each against an independent computation:
- the fast greedy (cached cross-covariances, rank-k updates, pruned scoring kernel) picks the
  same candidates with the same gains as the brute-force greedy that re-solves the full
  Gaussian posterior for every candidate (server/core/optimise_reference.py; the greedy rule
  is that of Krause, Singh and Guestrin, JMLR 9, 2008, with gain per unit cost);
- the exact incremental state after a hand-made layout equals a fresh solve;
- the chosen layout never costs more than the budget (hypothesis over budgets);
- at the cost of each hand-made layout the optimised layout gains at least as much
  (docs/model.md "Optimiser"; slower cases in test_optimise_guarantee.py);
- progress is monotone and ends at 1; cancellation raises OptimiseCancelled;
- bad options raise OptimiseError naming the field.
"""

from __future__ import annotations

import math
import sys
import threading
from pathlib import Path

import numpy as np
import pytest
from core_helpers import tiny_dict
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from probewise.app.to_core import to_core
from probewise.core.analysis import ProjectAnalysis
from probewise.core.evaluate import GridEvaluator, evaluate_project
from probewise.core.geometry import points_in_polygon
from probewise.core.optimise import (
    GreedyProblem,
    OptimiseCancelled,
    OptimiseError,
    OptimiseOptions,
    build_candidates,
    build_targets,
    candidate_locations,
    greedy_run,
    method_mixes,
    optimisation_grid,
    optimise,
    prepare_optimisation,
    upper_envelope,
)
from probewise.core.optimise_reference import (
    cell_prior_variance,
    cell_subpoints,
    cell_variance,
    greedy_reference,
)
from probewise.io.model_file import validate_model

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "benchmarks"))
from make_case import make  # noqa: E402


def tiny_project():
    return to_core(validate_model(tiny_dict()))


def small_problem(model: dict, spacing_m: float, max_cells: int) -> GreedyProblem:
    project = to_core(validate_model(model))
    analysis = ProjectAnalysis(project)
    grid = optimisation_grid(project, analysis.origin, max_cells)
    xy = candidate_locations(project, analysis.origin, spacing_m)
    cand = build_candidates(analysis, xy, tuple(project.methods))
    return GreedyProblem(analysis, cand, build_targets(analysis, grid))


def assert_same_picks(fast, ref):
    assert len(fast) == len(ref) > 0
    assert [(p.location, p.method) for p in fast] == [(p.location, p.method) for p in ref]
    for a, b in zip(fast, ref, strict=True):
        assert a.gain_bits == pytest.approx(b.gain_bits, rel=1e-9)
        assert a.cost == b.cost


@pytest.fixture(scope="module")
def tiny_problem():
    return small_problem(tiny_dict(), 20.0, 1500)


def test_fast_greedy_equals_brute_force_on_the_tiny_model(tiny_problem):
    # Reference: brute-force greedy re-solving the full posterior per candidate.
    allowed = np.ones(len(tiny_problem.cand.method_ids), dtype=bool)
    fast = greedy_run(tiny_problem, tiny_problem.base_state.copy(), allowed, 1e9, 20.0, max_picks=4)
    ref = greedy_reference(tiny_problem, allowed, 1e9, 20.0, 4)
    assert_same_picks(fast, ref)


def test_fast_greedy_equals_brute_force_under_a_tight_budget(tiny_problem):
    # Same reference; the budget removes expensive candidates as it runs out.
    allowed = np.array([m in ("BH", "CPT") for m in tiny_problem.cand.method_ids])
    budget = 1500.0
    fast = greedy_run(tiny_problem, tiny_problem.base_state.copy(), allowed, budget, 20.0)
    ref = greedy_reference(tiny_problem, allowed, budget, 20.0, 50)
    assert_same_picks(fast, ref)
    assert sum(p.cost for p in fast) <= budget


@pytest.mark.parametrize("mix", [("BH", "CPT"), ("DMT",)])
def test_fast_greedy_equals_brute_force_on_a_case_with_zones(mix):
    # Bench case S (invented): a zone, an area of interest, an exclusion and six existing
    # boreholes; two mixes of methods. Reference as above.
    problem = small_problem(make("S", 1), 25.0, 300)
    allowed = np.array([m in mix for m in problem.cand.method_ids])
    fast = greedy_run(problem, problem.base_state.copy(), allowed, 1e9, 25.0, max_picks=4)
    ref = greedy_reference(problem, allowed, 1e9, 25.0, 4)
    assert_same_picks(fast, ref)


def test_full_scoring_equals_the_pruned_search(tiny_problem):
    # The kernel's pruned search (envelope bound, exact scores only where the bound can win)
    # picks what scoring every candidate would pick, step after step.
    state = tiny_problem.base_state.copy()
    active = tiny_problem.cand.valid.copy()
    cost = tiny_problem.cand.cost
    for _ in range(5):
        gains = tiny_problem.score(state.copy(), active)
        ratio = np.where(active & (gains > 1e-9), gains / cost, -1.0)
        best = np.unravel_index(int(np.argmax(ratio)), ratio.shape)
        l, j, gain = tiny_problem.best_candidate(state, active)
        assert (l, j) == tuple(int(v) for v in best)
        assert gain == pytest.approx(gains[best], rel=1e-12)
        tiny_problem.apply_pick(state, l, j)
        active[l] = False


def test_state_after_a_hand_made_layout_equals_a_fresh_solve():
    # Exact low-rank update: the target variances after conditioning on a hand-made layout
    # equal a fresh Gaussian conditioning of the targets on existing + planned readings
    # (targets are cell averages: conditioned at the sub-points and averaged by the
    # brute-force reference, not by probewise.core.blocks).
    project = tiny_project()
    problem = small_problem(tiny_dict(), 20.0, 1500)
    state = problem.base_state.copy()
    layout = project.layouts[1]
    cost, gain = problem.apply_layout(state, layout)
    analysis = problem.analysis
    fresh, _ = analysis.layout_state(layout)
    t = problem.targets
    real = t.slot_cell >= 0
    q = t.blocks.per_side**2
    sub = cell_subpoints(t.cells, t.blocks.spacing_m, t.blocks.per_side)
    cell_var = cell_variance(cell_prior_variance(fresh, sub, q), fresh.predict(sub), q)
    var = cell_var[t.slot_cell[real], t.slot_bnd[real]]
    np.testing.assert_allclose(state.V[real], var, rtol=1e-8, atol=1e-12)
    assert cost == pytest.approx(evaluate_project(project, [layout]).layouts[0].cost)
    assert gain > 0


def test_method_mixes_respect_the_budget_and_size():
    mob = {"A": 1000.0, "B": 2000.0, "C": 5000.0}
    mixes = method_mixes(("A", "B", "C"), mob, 4000.0, 2)
    assert mixes == [("A",), ("B",), ("A", "B")]


def test_upper_envelope_keeps_only_rising_points():
    pts = [(3.0, 1.0), (1.0, 0.5), (2.0, 0.4), (4.0, 1.0), (5.0, 2.0)]
    assert upper_envelope(pts) == ((1.0, 0.5), (3.0, 1.0), (5.0, 2.0))


def test_optimised_layout_is_inside_the_site_and_spaced():
    project = tiny_project()
    out = optimise(project, OptimiseOptions(budget=9000.0, candidate_spacing_m=20.0))
    xy = np.array([(p.x, p.y) for p in out.layout.probes])
    assert points_in_polygon(xy, project.site.outline).all()
    for excl in project.site.exclusions:
        assert not points_in_polygon(xy, excl).any()
    d = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    assert d[~np.eye(len(xy), dtype=bool)].min() >= out.min_spacing_m - 1e-9
    assert len({p.id for p in out.layout.probes}) == len(out.layout.probes)
    costs = [c for c, _ in out.curve]
    gains = [g for _, g in out.curve]
    assert costs == sorted(costs) and gains == sorted(gains)
    assert max(costs) <= 9000.0


@settings(
    max_examples=6,
    deadline=None,
    derandomize=True,
    suppress_health_check=[HealthCheck.function_scoped_fixture],
)
@given(budget=st.floats(min_value=1800.0, max_value=30000.0))
def test_budget_is_never_exceeded(budget):
    # Invariant (docs/model.md "Optimiser"): the layout costs at most the budget; the cost is
    # recomputed by evaluate on the full grid, mobilisation included.
    project = tiny_project()
    try:
        out = optimise(project, OptimiseOptions(budget=budget, candidate_spacing_m=20.0))
    except OptimiseError:
        return  # nothing fits: allowed, never a layout over budget
    assert out.result.cost <= budget + 1e-6
    again = evaluate_project(project, [out.layout]).layouts[0]
    assert again.cost == pytest.approx(out.result.cost, rel=1e-12)
    assert again.cost <= budget + 1e-6
    assert all(c <= budget + 1e-6 for c, _ in out.curve)


def test_optimised_beats_every_hand_made_layout_of_the_tiny_model():
    # docs/model.md "Optimiser" acceptance: at the cost of every hand-made layout the optimised
    # layout gains at least as much information (both evaluated on the full grid).
    project = tiny_project()
    evaluator = GridEvaluator(project)
    for layout in project.layouts:
        hand = evaluator.evaluate_layout(layout)
        out = optimise(project, OptimiseOptions(budget=hand.cost))
        assert out.result.cost <= hand.cost + 1e-6
        assert out.result.information_gain_bits >= hand.information_gain_bits - 1e-9


def test_prepared_setup_gives_the_same_answer():
    project = tiny_project()
    options = OptimiseOptions(budget=6000.0, candidate_spacing_m=20.0)
    setup = prepare_optimisation(project, options)
    a = optimise(project, options, setup=setup)
    b = optimise(project, options)
    assert [(p.method, p.x, p.y) for p in a.layout.probes] == [
        (p.method, p.x, p.y) for p in b.layout.probes
    ]
    assert a.result.information_gain_bits == pytest.approx(b.result.information_gain_bits)


def test_optimisers_in_two_threads_run_side_by_side():
    """The web may optimise two projects at once: the compiled search's thread pool must not
    be entered twice (it would abort the process), and both answers stay exact."""
    project = tiny_project()
    options = OptimiseOptions(budget=6000.0, candidate_spacing_m=20.0)
    alone = optimise(project, options)
    answers: list = [None, None]

    def run(k: int) -> None:
        answers[k] = optimise(project, options)

    threads = [threading.Thread(target=run, args=(k,)) for k in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    for out in answers:
        assert [(p.method, p.x, p.y) for p in out.layout.probes] == [
            (p.method, p.x, p.y) for p in alone.layout.probes
        ]


def test_progress_is_monotone_and_ends_at_one():
    seen = []
    optimise(
        tiny_project(),
        OptimiseOptions(budget=6000.0, candidate_spacing_m=20.0),
        progress=lambda f, m: seen.append((f, m)),
    )
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions)
    assert fractions[-1] == 1.0
    assert all(0.0 <= f <= 1.0 and isinstance(m, str) for f, m in seen)


def test_should_stop_cancels():
    calls = []

    def stop():
        calls.append(1)
        return len(calls) > 3

    with pytest.raises(OptimiseCancelled):
        optimise(tiny_project(), OptimiseOptions(budget=20000.0), should_stop=stop)


@pytest.mark.parametrize(
    ("options", "field"),
    [
        (OptimiseOptions(budget=0.0), "budget"),
        (OptimiseOptions(budget=math.inf), "budget"),
        (OptimiseOptions(budget=100.0), "budget"),  # below every mobilisation
        (OptimiseOptions(budget=9000.0, methods=("XX",)), "methods"),
        (OptimiseOptions(budget=9000.0, candidate_spacing_m=-5.0), "candidate_spacing_m"),
        (OptimiseOptions(budget=9000.0, min_spacing_m=0.0), "min_spacing_m"),
        (OptimiseOptions(budget=9000.0, candidate_spacing_m=5000.0), "candidate_spacing_m"),
    ],
)
def test_bad_options_name_the_field(options, field):
    with pytest.raises(OptimiseError) as err:
        optimise(tiny_project(), options)
    assert err.value.field == field
    assert str(err.value)


def test_methods_option_limits_the_layout():
    out = optimise(tiny_project(), OptimiseOptions(budget=12000.0, methods=("BH",)))
    assert {p.method for p in out.layout.probes} == {"BH"}
