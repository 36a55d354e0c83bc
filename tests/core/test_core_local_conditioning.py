"""Local conditioning (probewise.core.local_conditioning) against the exact posterior.

Method: each tile of targets is conditioned exactly on the readings of its nearest existing
and planned spots (the screening effect of kriging; Stein, Annals of Statistics 2002;
nearest-neighbour conditioning sets as in Vecchia 1988 and Katzfuss and Guinness, Statistical
Science 2021). Error bound checked here: the local std is never below the exact one (a
Gaussian conditioned on a subset of the readings; law of total variance) and within 1% of it
at every cell of bench L with 500 existing CPTs (docs/model.md "Many readings").
"""

from __future__ import annotations

import importlib.util
import tracemalloc
from pathlib import Path

import numpy as np
import pytest

from probewise.app.to_core import to_core
from probewise.core import local_conditioning
from probewise.core.analysis import ProjectAnalysis
from probewise.core.blocks import cell_blocks, predict_cells
from probewise.core.grid import evaluation_grid
from probewise.core.local_conditioning import (
    EXACT_MAX_READINGS,
    ExactStateNeededError,
    LocalState,
    condition_scaled,
    take_observations,
    use_local,
)
from probewise.core.planning import plan_probes, planned_observations
from probewise.core.posterior import condition
from probewise.io.model_file import validate_model

BENCH = Path(__file__).resolve().parents[2] / "benchmarks" / "make_case.py"


def bench_case(size: str, existing_cpts: int, grid_m: float | None = None):
    spec = importlib.util.spec_from_file_location("make_case", BENCH)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    model = mod.add_existing_cpts(mod.make(size, 1), existing_cpts)
    if grid_m is not None:
        model["grid_spacing_m"] = grid_m
    return to_core(validate_model(model))


def exact_and_local(project, **local_options):
    """Cell posteriors of the baseline and of the first layout, exact and local."""
    analysis = ProjectAnalysis(project)
    grid = evaluation_grid(project.site, analysis.origin)
    blocks = cell_blocks(project.ground, grid.xy, grid.spacing_m, analysis.origin)
    exact = condition(project.ground, analysis.origin, analysis.existing)
    local = LocalState(project.ground, analysis.origin, analysis.existing, **local_options)
    plans = plan_probes(project.ground, project.methods, exact, project.layouts[0].probes)
    planned = planned_observations(plans, project.methods, analysis.origin)
    out = []
    for state in (exact, local):
        base = predict_cells(state, blocks)
        out.append((base, predict_cells(state.extend(planned), blocks, base=base)))
    return out


@pytest.fixture(scope="module")
def bench_l_500():
    # bench L with 500 more existing CPTs (4 readings each): 2,074 readings; cells of 10 m
    # instead of 5 m keep the exact reference under a few seconds
    return exact_and_local(bench_case("L", 500, grid_m=10.0))


def test_local_std_within_one_percent_of_exact_and_never_below(bench_l_500):
    (exact_base, exact_layout), (local_base, local_layout) = bench_l_500
    for exact, local in ((exact_base, local_base), (exact_layout, local_layout)):
        ratio = local.std_m / exact.std_m
        assert ratio.min() >= 1.0 - 1e-9  # conditioning on a subset never lowers the std
        assert ratio.max() <= 1.01  # the error bound docs/model.md states


def test_local_layout_reuses_tiles_and_only_lowers_the_std(bench_l_500):
    _, (local_base, local_layout) = bench_l_500
    assert len(local_base.tiles) > 1  # really tiled: not one tile of everything
    assert np.all(local_layout.var_m2 <= local_base.var_m2 + 1e-12)
    assert np.array_equal(local_layout.mean_m, local_base.mean_m)  # planned: no values


def test_local_with_every_spot_is_the_exact_posterior():
    # the limit of the approximation: a neighbourhood holding every spot is exact
    project = bench_case("S", 40)
    (exact_base, exact_layout), (local_base, local_layout) = exact_and_local(
        project, nearest_spots=10_000, tile_share=1e-4
    )
    assert len(local_base.tiles) > 1
    for exact, local in ((exact_base, local_base), (exact_layout, local_layout)):
        np.testing.assert_allclose(local.std_m, exact.std_m, rtol=1e-7, atol=1e-9)
        np.testing.assert_allclose(local.mean_m, exact.mean_m, rtol=1e-7, atol=1e-9)


def test_points_predicted_tile_by_tile_match_exact_with_every_spot():
    project = bench_case("S", 40)
    analysis = ProjectAnalysis(project)
    exact = condition(project.ground, analysis.origin, analysis.existing)
    local = LocalState(
        project.ground, analysis.origin, analysis.existing, nearest_spots=10_000, tile_share=1e-4
    )
    xy = np.random.default_rng(3).uniform(-90, 90, size=(50, 2))
    np.testing.assert_allclose(local.predict(xy).std_m, exact.predict(xy).std_m, rtol=1e-7)


def test_threshold_switches_to_local_and_reports_it():
    assert not use_local(EXACT_MAX_READINGS, 1)
    assert use_local(EXACT_MAX_READINGS + 1, 1)
    assert use_local(2_000, 40_000)  # a corridor: the whitened covariances would not fit
    project = bench_case("S", 0)
    analysis = ProjectAnalysis(project)
    state = condition_scaled(project.ground, analysis.origin, analysis.existing, 10_000_000)
    assert isinstance(state, LocalState)
    with pytest.raises(ExactStateNeededError, match="exact posterior"):
        _ = state.chol


@pytest.mark.slow
def test_five_thousand_probes_evaluate_in_bounded_memory():
    from probewise.core.evaluate import evaluate_project

    # 5,000 existing probes, the most a model file takes; cells of 20 m keep the test short
    # (the readings, not the cells, are what would need a dense matrix)
    project = bench_case("L", 4_970, grid_m=20.0)
    readings = sum(len(p.observed) for p in project.existing)
    assert readings > 19_900
    tracemalloc.start()
    evaluation = evaluate_project(project)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert evaluation.conditioning.method == "local"
    # a dense matrix of all readings alone is readings^2 x 8 bytes = 3.2 GB; the ceiling is
    # 1 GiB for everything the evaluation allocates
    assert peak < 2**30
    assert peak < readings**2 * 8 / 3


def test_optimiser_runs_beyond_exact_readings_but_refuses_a_hand_made_start():
    from probewise.core.optimise import (
        OptimiseError,
        OptimiseOptions,
        optimise,
        prepare_optimisation,
    )

    project = bench_case("S", 1_001)  # 4,004 CPT readings and the boreholes': over 4,000
    options = OptimiseOptions(budget=20_000, refine_sweeps=3)
    result = optimise(project, options)
    assert result.layout.probes  # the local start is checked in test_core_local_cross.py
    assert result.refinement.moves == 0  # the refinement is skipped beyond exact conditioning
    problem = prepare_optimisation(project, options).problem
    with pytest.raises(OptimiseError, match="thin the existing probes") as caught:
        problem.apply_layout(problem.base_state.copy(), project.layouts[0])
    assert caught.value.field == "existing"


def test_evaluation_reports_local_conditioning_in_json_and_table():
    from probewise.app.contract import evaluation_json
    from probewise.commands.evaluate import evaluation_text
    from probewise.core.evaluate import evaluate_project

    project = bench_case("S", 1_001, grid_m=20.0)
    evaluation = evaluate_project(project)
    doc = evaluation_json(evaluation)["conditioning"]
    assert doc["method"] == "local"
    assert doc["readings"] == sum(len(p.observed) for p in project.existing)
    assert doc["nearest_spots"] > 0
    assert "Conditioning: local on" in evaluation_text(evaluation, "GBP")


def test_one_sweep_for_several_layouts_equals_each_layout_on_its_own():
    """Evaluate conditions each tile once for the baseline and every layout: the same numbers
    as extending the state by each layout in turn."""
    project = bench_case("S", 300)
    analysis = ProjectAnalysis(project)
    grid = evaluation_grid(project.site, analysis.origin)
    blocks = cell_blocks(project.ground, grid.xy, grid.spacing_m, analysis.origin)
    local = LocalState(project.ground, analysis.origin, analysis.existing, nearest_spots=60)
    plans = plan_probes(project.ground, project.methods, local, project.layouts[0].probes)
    whole = planned_observations(plans, project.methods, analysis.origin)
    planned = [whole, take_observations(whole, np.arange(whole.size // 2))]  # two layouts
    base, swept = local.predict_cells_alternatives(blocks, tuple(planned))
    assert len(base.tiles) > 1 and len(swept) == 2
    alone_base = predict_cells(local, blocks)
    np.testing.assert_allclose(base.var_m2, alone_base.var_m2, rtol=1e-12)
    for obs, pred in zip(planned, swept, strict=True):
        alone = predict_cells(local.extend(obs), blocks, base=alone_base)
        np.testing.assert_allclose(pred.var_m2, alone.var_m2, rtol=1e-10, atol=1e-14)
        np.testing.assert_allclose(pred.mean_m, alone.mean_m, rtol=1e-12)
        assert np.all(pred.var_m2 <= base.var_m2 + 1e-12)


def test_readings_beyond_three_ranges_are_left_out_without_measurable_change(monkeypatch):
    """Along a corridor the nearest spots reach kilometres away; beyond three times the longest
    practical range (correlation about 1e-4 for the exponential, docs/model.md) they are left
    out: the std moves by less than 0.01%."""
    project = bench_case("C", 0, grid_m=50.0)  # 5 km x 200 m, 400 boreholes
    analysis = ProjectAnalysis(project)
    grid = evaluation_grid(project.site, analysis.origin)
    blocks = cell_blocks(project.ground, grid.xy, grid.spacing_m, analysis.origin)
    near = LocalState(project.ground, analysis.origin, analysis.existing)
    assert near.reach_m == 3.0 * 200.0  # the longest range of bench C is 200 m
    monkeypatch.setattr(local_conditioning, "REACH_RANGES", np.inf)
    every = LocalState(project.ground, analysis.origin, analysis.existing)
    lo, hi = grid.xy.min(axis=0), grid.xy.min(axis=0) + near.tile_m
    assert near.nearest(near.existing, lo, hi).size < every.nearest(every.existing, lo, hi).size
    ratio = predict_cells(near, blocks).std_m / predict_cells(every, blocks).std_m
    assert ratio.min() >= 1.0 - 1e-9
    assert ratio.max() <= 1.0001
