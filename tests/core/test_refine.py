"""The exchange refinement after the greedy optimiser (server/core/refine.py).

Checks, each against an independent computation:
- on bench cases S and M at 5, 10 and 20 CPTs, the refined layout gains at least as much as
  the greedy layout and, within 0.5 %, as much as the best layout of a spatial simulated
  annealing run (van Groenigen and Stein, 1998; server/core/anneal_reference.py, which scores
  with the evaluation path of server/core/evaluate.py and none of the optimiser's state) at
  the same budget;
- every refined layout re-scored from scratch by ``evaluate_project`` gives the gain the
  optimiser reports (1e-9 relative);
- the state after probes are added and removed equals a fresh block solve of the remaining
  probes (``GreedyProblem.apply_layout``, the Cholesky solve of all readings at once);
- budget, spacing and site are respected (hypothesis over budgets);
- runs started from a hand-made layout (warm starts) still matter: a layout of shallow
  boreholes (a depth given by hand, cheaper than the planned depth) gains more than the
  optimiser finds from scratch, and the optimiser with warm starts matches it.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from core_helpers import tiny_dict
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from probewise.app.to_core import to_core
from probewise.core.anneal_reference import LayoutScorer, anneal_layout
from probewise.core.evaluate import GridEvaluator, evaluate_project
from probewise.core.geometry import points_in_polygon
from probewise.core.model import Layout, PlannedProbe
from probewise.core.optimise import (
    OptimiseError,
    OptimiseOptions,
    layout_from_picks,
    optimise,
    prepare_optimisation,
)
from probewise.core.refine import RefineState, refinement_problem
from probewise.io.model_file import validate_model

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "benchmarks"))
from make_case import make  # noqa: E402

# Moves tried by the annealing reference per case: enough for it to beat the greedy layout
# alone on these cases (so the comparison can fail), few enough to keep the test short.
ANNEAL_ITERATIONS = {"S": 600, "M": 300}


def budget_for(setup, n_probes: int) -> float:
    """A budget that buys about ``n_probes`` CPTs: mobilisation + n x the median CPT cost."""
    cand = setup.candidates
    j = cand.method_ids.index("CPT")
    typical = float(np.median(cand.cost[cand.valid[:, j], j]))
    return setup.mobilisation["CPT"] + n_probes * typical


@pytest.fixture(scope="module", params=["S", "M"])
def bench(request):
    project = to_core(validate_model(make(request.param, 1)))
    options = OptimiseOptions(budget=1e9, methods=("CPT",))
    setup = prepare_optimisation(project, options)
    return request.param, project, setup, LayoutScorer(project)


@pytest.mark.slow
@pytest.mark.parametrize("n_probes", [5, 10, 20])
def test_refined_layout_beats_greedy_and_annealing_at_equal_budget(bench, n_probes):
    size, project, setup, scorer = bench
    budget = budget_for(setup, n_probes)
    greedy = optimise(
        project, OptimiseOptions(budget=budget, methods=("CPT",), refine_sweeps=0), setup=setup
    )
    options = OptimiseOptions(budget=budget, methods=("CPT",))
    refined = optimise(project, options, setup=setup)
    gain = refined.result.information_gain_bits
    assert refined.result.cost <= budget + 1e-6
    assert gain >= greedy.result.information_gain_bits - 1e-12
    r = refined.refinement
    assert r.greedy_gain_bits == pytest.approx(greedy.result.information_gain_bits, rel=1e-12)
    assert r.refined_gain_bits == gain
    annealed = anneal_layout(
        project,
        "CPT",
        n_probes,
        budget,
        setup.min_spacing_m,
        ANNEAL_ITERATIONS[size],
        seed=1,
        scorer=scorer,
    )
    assert annealed.cost <= budget + 1e-6
    assert gain >= 0.995 * annealed.gain_bits, (size, n_probes, gain, annealed.gain_bits)
    # exactness: a fresh evaluation of the refined layout gives the reported gain
    again = evaluate_project(project, [refined.layout]).layouts[0]
    assert again.information_gain_bits == pytest.approx(gain, rel=1e-9)
    assert again.cost == pytest.approx(refined.result.cost, rel=1e-12)


def tiny_project():
    return to_core(validate_model(tiny_dict()))


def test_adding_and_removing_probes_equals_a_fresh_solve():
    # Removing readings is conditioning with their noise negated (module docstring); the
    # state after adding a, b, c and removing b must equal the block Cholesky solve of a
    # and c from the existing probes alone (GreedyProblem.apply_layout).
    project = tiny_project()
    setup = prepare_optimisation(project, OptimiseOptions(budget=1e5, candidate_spacing_m=20.0))
    valid = setup.candidates.valid
    picks = [(l, j) for l, j in [(3, 0), (20, 1), (41, 2), (30, 1)] if valid[l, j]]
    assert len(picks) == 4
    problem, picks = refinement_problem(setup, picks, 3000)
    cand = problem.cand
    state = RefineState(problem, problem.base_state.copy())

    def readings(l, j):
        obs = np.flatnonzero(problem.observes[l, j])
        return l, obs, cand.noise_var[l, j, obs]

    for p in picks:
        state.add(*readings(*p))
    before = (state.M.copy(), state.V.copy(), state.P.copy())
    trial = state.remove_trial(*readings(*picks[1]))
    state.undo(trial)  # a trial taken back leaves the state as it was
    for a, b in zip(before, (state.M, state.V, state.P), strict=True):
        np.testing.assert_allclose(b, a, rtol=1e-9, atol=1e-12)
    state.commit(state.remove_trial(*readings(*picks[1])))
    state.commit(state.remove_trial(*readings(*picks[3])))
    kept = [picks[0], picks[2]]
    fresh = problem.base_state.copy()
    problem.apply_layout(fresh, layout_from_picks(cand, kept, None, "kept"))
    fresh.flush()
    np.testing.assert_allclose(state.V, fresh.V, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(state.P, fresh.P, rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(state.M, fresh.M, rtol=1e-9, atol=1e-10)
    # Q from the block solve's whitened readings (prior - F F^T)
    np.testing.assert_allclose(state.Q, RefineState(problem, fresh).Q, rtol=1e-9, atol=1e-10)


@settings(
    max_examples=4,
    deadline=None,
    derandomize=True,
    suppress_health_check=[HealthCheck.function_scoped_fixture],
)
@given(budget=st.floats(min_value=1600.0, max_value=12000.0))
def test_refined_layout_respects_budget_spacing_and_site(budget):
    # two methods, so that exchanges may change a probe's method and its mobilisation
    project = tiny_project()
    options = OptimiseOptions(budget=budget, methods=("BH", "CPT"), candidate_spacing_m=20.0)
    try:
        out = optimise(project, options)
    except OptimiseError:
        return  # nothing fits: allowed, never a layout over budget
    again = evaluate_project(project, [out.layout]).layouts[0]
    assert again.cost <= budget + 1e-6
    assert again.information_gain_bits == pytest.approx(out.result.information_gain_bits, rel=1e-9)
    assert out.refinement.refined_gain_bits >= out.refinement.greedy_gain_bits
    xy = np.array([(p.x, p.y) for p in out.layout.probes])
    assert points_in_polygon(xy, project.site.outline).all()
    for excl in project.site.exclusions:
        assert not points_in_polygon(xy, excl).any()
    d = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    d[np.diag_indices_from(d)] = np.inf
    assert d.min() >= out.min_spacing_m - 1e-9


def shallow_borehole_model() -> tuple[dict, Layout]:
    """The tiny model with one boundary of interest (base of the clay) and boreholes paid by
    the metre with a long embedment, so that a borehole stopped by hand just below the clay
    costs far less than the depth the optimiser plans. Invented."""
    model = tiny_dict()
    model["boundaries_of_interest"] = [model["boundaries_of_interest"][0]]
    bh = next(m for m in model["methods"] if m["id"] == "BH")
    bh["cost"] = {"mobilisation": 2500, "per_location": 0, "per_metre": 200}
    bh["embedment_m"] = 8.0
    spots = [(x, y) for x in (25, 75, 125, 175) for y in (20, 60, 100) if (x, y) != (175, 100)]
    probes = tuple(
        PlannedProbe(f"S{k + 1:02d}", "BH", float(x), float(y), 12.0)
        for k, (x, y) in enumerate(spots)
    )
    model["layouts"] = [
        {
            "name": "Shallow boreholes",
            "probes": [
                {"id": p.id, "method": "BH", "x": p.x, "y": p.y, "depth_m": 12.0} for p in probes
            ],
        }
    ]
    return model, Layout("Shallow boreholes", probes)


def test_warm_start_from_a_hand_made_layout_is_kept():
    model, hand_layout = shallow_borehole_model()
    project = to_core(validate_model(model))
    evaluator = GridEvaluator(project)
    hand = evaluator.evaluate_layout(hand_layout)
    assert all(1 in p.observes for p in hand.plans), "each shallow borehole reads the clay"
    options = OptimiseOptions(budget=hand.cost, methods=("BH",))
    setup = prepare_optimisation(project, options)
    cold = optimise(
        project,
        OptimiseOptions(budget=hand.cost, methods=("BH",), warm_start=False),
        setup=setup,
    )
    # the premise: from scratch (greedy and refinement) the optimiser gains less
    assert cold.result.information_gain_bits < hand.information_gain_bits
    warm = optimise(project, options, setup=setup)
    assert warm.result.cost <= hand.cost + 1e-6
    assert warm.result.information_gain_bits >= hand.information_gain_bits - 1e-9


def test_probes_added_in_one_block_equal_a_fresh_solve():
    # The refinement's start conditions on every greedy pick at once (RefineState.add_many);
    # that must equal the block Cholesky solve of GreedyProblem.apply_layout, Q included.
    project = tiny_project()
    setup = prepare_optimisation(project, OptimiseOptions(budget=1e5, candidate_spacing_m=20.0))
    valid = setup.candidates.valid
    picks = [(l, j) for l, j in [(3, 0), (20, 1), (41, 2)] if valid[l, j]]
    assert len(picks) == 3
    problem, picks = refinement_problem(setup, picks, 3000)
    cand = problem.cand
    state = RefineState(problem, problem.base_state.copy())
    readings = []
    for l, j in picks:
        obs = np.flatnonzero(problem.observes[l, j])
        readings.append((l, obs, cand.noise_var[l, j, obs]))
    state.add_many(readings)
    fresh = problem.base_state.copy()
    problem.apply_layout(fresh, layout_from_picks(cand, picks, None, "all"))
    fresh.flush()
    np.testing.assert_allclose(state.V, fresh.V, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(state.P, fresh.P, rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(state.M, fresh.M, rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(state.Q, RefineState(problem, fresh).Q, rtol=1e-9, atol=1e-10)


def test_memory_budget_of_q_thins_the_refinement_candidates():
    # Q is (L B, L B) float64 (module docstring of server/core/refine.py): within
    # refine_bytes the local grid is made coarser, and below the greedy grid only the
    # locations nearest the picks stay, the picks among them.
    project = tiny_project()
    setup = prepare_optimisation(project, OptimiseOptions(budget=1e5, candidate_spacing_m=20.0))
    B = setup.analysis.ground.n_boundaries
    greedy_xy = setup.candidates.xy
    picks = [(l, 0) for l in (3, 20, 41)]
    full, _ = refinement_problem(setup, picks, 3000)
    n_greedy, n_full = len(greedy_xy), len(full.cand.local)
    assert n_full > n_greedy + 3 * 8, "the premise: more local points than a 3 x 3 grid a pick"
    half = n_greedy + (n_full - n_greedy) // 2
    for most in (half, n_greedy - 10, 5):
        refine_bytes = (most * B) ** 2 * 8
        problem, moved = refinement_problem(setup, picks, 3000, refine_bytes)
        state = RefineState(problem, problem.base_state.copy())
        assert state.Q.nbytes <= refine_bytes
        assert len(problem.cand.local) <= most
        # the picks are the same probes in the thinned candidates
        np.testing.assert_array_equal(
            problem.cand.xy[[l for l, _ in moved]], greedy_xy[[3, 20, 41]]
        )
        if most == half:  # a coarser local grid, not none
            assert len(problem.cand.local) > n_greedy
    # the nearest greedy locations are the ones kept
    problem, _ = refinement_problem(setup, picks, 3000, (5 * B) ** 2 * 8)
    d = np.min(
        np.hypot(*(greedy_xy[:, None, :] - greedy_xy[[3, 20, 41]][None]).transpose(2, 0, 1)), 1
    )
    kept = np.min(
        np.hypot(*(problem.cand.xy[:, None, :] - greedy_xy[[3, 20, 41]][None]).transpose(2, 0, 1)),
        1,
    )
    assert kept.max() <= np.sort(d)[4] + 1e-9


def test_optimiser_with_a_small_refinement_memory_still_never_loses():
    project = tiny_project()
    options = OptimiseOptions(budget=8000.0, candidate_spacing_m=20.0)
    setup = prepare_optimisation(project, options)
    B = setup.analysis.ground.n_boundaries
    small = OptimiseOptions(budget=8000.0, candidate_spacing_m=20.0, refine_bytes=(30 * B) ** 2 * 8)
    out = optimise(project, small, setup=setup)
    assert out.refinement.candidate_locations <= 30
    assert out.refinement.refined_gain_bits >= out.refinement.greedy_gain_bits
    again = evaluate_project(project, [out.layout]).layouts[0]
    assert again.cost <= 8000.0 + 1e-6
    assert again.information_gain_bits == pytest.approx(out.result.information_gain_bits, rel=1e-9)
