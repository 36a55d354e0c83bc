"""The optimiser beyond exact conditioning (probewise.core.local_cross) against the exact start.

Method: the covariances the existing readings explain among candidates and target cells are
conditioned tile by tile on the nearest readings (the screening effect of kriging; Stein,
Annals of Statistics 2002; nearest-neighbour conditioning sets as in Vecchia 1988 and Katzfuss
and Guinness, Statistical Science 2021; docs/model.md "Many readings"). Error bound checked
here on bench L with 500 existing CPTs: target std within 1% of exact and never below it, and
the greedy search's first 10 picks identical to the exact search's.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_core_local_conditioning import bench_case

from probewise.core import local_conditioning
from probewise.core.greedy import greedy_run
from probewise.core.local_conditioning import LocalState
from probewise.core.local_cross import factor_symmetric
from probewise.core.optimise import OptimiseOptions, prepare_optimisation

OPTIONS = OptimiseOptions(
    budget=12_000.0, methods=("CPT",), candidate_spacing_m=40.0, refine_sweeps=0
)


def greedy_start_and_picks(project, local: bool, monkeypatch):
    """The greedy problem (start state) and the first picks of a CPT run."""
    if local:  # lift the thresholds down: the same readings conditioned locally
        monkeypatch.setattr(local_conditioning, "EXACT_MAX_READINGS", 0)
    setup = prepare_optimisation(project, OPTIONS)
    monkeypatch.undo()
    assert isinstance(setup.analysis.baseline, LocalState) is local
    problem = setup.problem
    state = problem.base_state.copy()
    left = OPTIONS.budget - setup.mobilisation["CPT"]
    allowed = np.array([m == "CPT" for m in problem.cand.method_ids])
    picks = greedy_run(problem, state, allowed, left, setup.min_spacing_m, max_picks=10)
    return problem, [(p.location, p.method) for p in picks]


@pytest.fixture(scope="module")
def exact_and_local():
    project = bench_case("L", 500)
    with pytest.MonkeyPatch.context() as mp:
        exact = greedy_start_and_picks(project, False, mp)
        local = greedy_start_and_picks(project, True, mp)
    return exact, local


def test_first_ten_greedy_picks_identical_to_exact(exact_and_local):
    (_, exact_picks), (_, local_picks) = exact_and_local
    assert len(exact_picks) == 10
    assert local_picks == exact_picks


def test_target_std_within_one_percent_of_exact_and_never_below(exact_and_local):
    (exact, _), (local, _) = exact_and_local
    real = exact.targets.slot_cell >= 0
    ratio = np.sqrt(local.base_state.V[real] / exact.base_state.V[real])
    assert ratio.min() >= 1.0 - 1e-9  # a subset of the readings never explains more
    assert ratio.max() <= 1.01


def test_candidate_covariances_close_to_exact(exact_and_local):
    """The candidates' own posterior covariance (P) and their covariance with the targets (M):
    within 1% of the prior scale of exact."""
    (exact, _), (local, _) = exact_and_local
    scale_p = np.abs(exact.base_state.P).max()
    assert np.abs(local.base_state.P - exact.base_state.P).max() <= 0.01 * scale_p
    scale_m = np.abs(exact.base_state.M).max()
    assert np.abs(local.base_state.M - exact.base_state.M).max() <= 0.01 * scale_m


def test_factor_of_a_covariance_reproduces_it():
    """F F^T equals the matrix for a positive semi-definite one (reference: the matrix);
    negative eigenvalues are dropped (reference: numpy.linalg.eigvalsh of the result)."""
    rng = np.random.default_rng(3)
    g = rng.normal(size=(12, 5))
    psd = g @ g.T
    f = factor_symmetric(psd)
    assert f.shape[1] == 5  # rank 5
    np.testing.assert_allclose(f @ f.T, psd, atol=1e-10)
    indefinite = psd - 3.0 * np.eye(12)
    f2 = factor_symmetric(indefinite)
    assert np.linalg.eigvalsh(f2 @ f2.T).min() >= -1e-9


def test_net_value_with_a_choice_element_runs_locally_as_exact_with_every_spot(monkeypatch):
    """The net-value search with a choice element beyond the thresholds: with every spot in
    reach (the tiny model's few probes) it picks what the exact search picks and values the
    layout the same (docs/model.md "Many readings")."""
    import json
    from pathlib import Path

    from probewise.app.to_core import to_core
    from probewise.core.optimise import optimise
    from probewise.io.model_file import validate_model

    root = Path(__file__).resolve().parents[2]
    model = json.loads((root / "tests" / "data" / "tiny-model.json").read_text())
    square = [[[110, 40], [190, 40], [190, 70], [110, 70], [110, 40]]]
    model["elements"] = [  # invented
        {
            "name": "Culvert bed",
            "geometry": {"type": "Polygon", "coordinates": square},
            "base_of": "Alluvial clay",
            "adverse": "deeper",
            "consequence": {"kind": "choice", "threshold_depth_m": 5.0,
                            "cheaper_cost": 20000, "robust_cost": 30000},
        }
    ]  # fmt: skip
    project = to_core(validate_model(model))
    options = OptimiseOptions(
        budget=float("inf"), objective="net-value", candidate_spacing_m=40.0,
        warm_start=False, refine_sweeps=0,
    )  # fmt: skip
    exact = optimise(project, options)
    monkeypatch.setattr(local_conditioning, "EXACT_MAX_READINGS", 0)
    local = optimise(project, options)
    assert isinstance(prepare_optimisation(project, options).analysis.baseline, LocalState)
    assert [(p.x, p.y, p.method) for p in local.layout.probes] == [
        (p.x, p.y, p.method) for p in exact.layout.probes
    ]
    assert local.layout.probes  # a layout that pays for itself
