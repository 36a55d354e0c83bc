"""Cells as areas (block kriging, server/core/blocks.py; docs/model.md "Numbers reported").

Sources: Journel and Huijbregts, Mining Geostatistics (1978): the variance of a block average
is the mean of the point covariance over all pairs of points of the block, approximated by
discretising the block into sub-points; its exact value for a square of side a is the double
integral of the covariance over the square's geometric covariogram,
sigma^2 (4 / a^4) int_0^a int_0^a rho(sqrt(u^2 + v^2)) (a - u)(a - v) du dv, here by
scipy.integrate.dblquad. Posterior block moments are checked against the dense posterior
covariance of the sub-points (tests/core/dense_reference.py) averaged over each cell's pairs.
"""

from __future__ import annotations

import copy
import importlib.util
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from core_helpers import one_unit_ground, tiny_dict
from dense_reference import Dense
from scipy.integrate import dblquad

from probewise.app.to_core import to_core
from probewise.core.blocks import SUBPOINTS_PER_SIDE, cell_blocks
from probewise.core.correlation import correlate
from probewise.core.evaluate import GridEvaluator
from probewise.core.model import Layout, PlannedProbe
from probewise.io.model_file import validate_model

TOL = 1e-9


def tiny_with_split_zone() -> dict:
    """The tiny model with its zone's west edge at x = 82 m, inside the 80-85 m column of
    cells, so some cells have sub-points both in and out of the zone."""
    model = tiny_dict()
    ring = model["zones"][0]["geometry"]["coordinates"][0]
    model["zones"][0]["geometry"]["coordinates"][0] = [[82 if x == 80 else x, y] for x, y in ring]
    return model


# cells: one straddling the zone edge, one in the zone, one beside an existing probe, a corner
CELLS = [(82.5, 62.5), (102.5, 57.5), (32.5, 27.5), (2.5, 117.5), (167.5, 42.5)]


def _cells_of(evaluator: GridEvaluator) -> np.ndarray:
    centres = evaluator.grid.xy_project
    return np.array([int(np.argmin(np.hypot(*(centres - c).T))) for c in CELLS])


def _planned(dense: Dense, layout: dict) -> list:
    out = []
    for p, _, observes in dense.plan(layout):
        tau = dense.method(p["method"])["precision_m"]
        out += [(p["x"], p["y"], k, tau[dense.names[k]]) for k in observes]
    return out


@pytest.mark.parametrize("existing", [False, True], ids=["prior", "existing probes"])
def test_cell_moments_equal_the_dense_sub_point_posterior_averaged_over_pairs(existing):
    model = tiny_with_split_zone()
    if not existing:
        model["existing"] = []
    evaluator = GridEvaluator(to_core(validate_model(model)))
    idx = _cells_of(evaluator)
    dense = Dense(model)
    g = model["grid_spacing_m"]
    mean, var = dense.cell_posterior(CELLS, g)
    np.testing.assert_allclose(evaluator.base_pred.mean_m[idx], mean, rtol=TOL, atol=TOL)
    np.testing.assert_allclose(evaluator.base_pred.var_m2[idx], var, rtol=1e-8, atol=TOL)
    # prior block moments: no readings at all
    mean0, var0 = Dense({**model, "existing": []}).cell_posterior(CELLS, g)
    np.testing.assert_allclose(evaluator.base_pred.prior_mean_m[idx], mean0, atol=TOL)
    np.testing.assert_allclose(evaluator.base_pred.prior_var_m2[idx], var0, rtol=1e-12)
    for lay in model["layouts"]:
        core_lay = next(x for x in evaluator.analysis.project.layouts if x.name == lay["name"])
        pred, _ = evaluator.layout_prediction(core_lay)
        mean1, var1 = dense.cell_posterior(CELLS, g, _planned(dense, lay))
        np.testing.assert_allclose(pred.mean_m[idx], mean1, rtol=TOL, atol=TOL)
        np.testing.assert_allclose(pred.var_m2[idx], var1, rtol=1e-8, atol=TOL)


def test_the_zone_edge_cell_mixes_both_priors():
    """A cell half in the zone has a prior mean between the zone's and the default's."""
    model = tiny_with_split_zone()
    evaluator = GridEvaluator(to_core(validate_model(model)))
    edge, inside = _cells_of(evaluator)[:2]
    outside = int(np.argmin(np.hypot(*(evaluator.grid.xy_project - (77.5, 62.5)).T)))
    prior = evaluator.base_pred.prior_mean_m[:, 1]
    assert prior[outside] < prior[edge] < prior[inside]


def _textbook_block_variance(model: str, range_m: float, std: float, side_m: float) -> float:
    """sigma^2 / a^4 x the integral of rho over the square's covariogram (dblquad)."""

    def f(v, u):
        return float(correlate(model, np.hypot(u, v), range_m)) * (side_m - u) * (side_m - v)

    integral, _ = dblquad(f, 0.0, side_m, 0.0, side_m, epsabs=1e-12, epsrel=1e-12)
    return std**2 * 4.0 * integral / side_m**4


@pytest.mark.parametrize(
    "model,range_m", [("exponential", 30.0), ("spherical", 25.0), ("gaussian", 20.0)]
)
def test_block_variance_converges_to_the_integral_over_the_cell(model, range_m):
    std, side = 1.3, 10.0
    ground = one_unit_ground(model, range_m, 4.0, std)
    ref = _textbook_block_variance(model, range_m, std, side)
    var = {
        k: cell_blocks(ground, np.zeros((1, 2)), side, (0.0, 0.0), k).prior_var_m2[0, 0]
        for k in (4, 8, 16, 64)
    }
    # finer discretisations differ less and less (midpoint rule: about 4x per halving)
    assert abs(var[16] - var[8]) < abs(var[8] - var[4]) / 3
    errors = [abs(var[k] - ref) for k in (4, 8, 16, 64)]
    assert errors == sorted(errors, reverse=True)
    assert var[64] == pytest.approx(ref, rel=1e-4)
    # a block average varies less than a point
    assert ref < var[4] < std**2


def test_no_sub_point_at_the_cell_centre():
    """k = 4: the sub-points are the centres of 16 equal squares, none at the cell centre."""
    assert SUBPOINTS_PER_SIDE % 2 == 0
    blocks = cell_blocks(one_unit_ground("exponential", 30.0, 4.0, 1.0), [[0.0, 0.0]], 8.0, (0, 0))
    np.testing.assert_allclose(
        np.unique(blocks.sub_xy[:, 0]), [-3.0, -1.0, 1.0, 3.0]
    )  # 8 m / 4 = 2 m squares
    assert np.min(np.hypot(*blocks.sub_xy.T)) > 1.0


def _bench_m() -> dict:
    path = Path(__file__).resolve().parents[2] / "benchmarks" / "make_case.py"
    spec = importlib.util.spec_from_file_location("make_case", path)
    make_case = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(make_case)
    return make_case.make("M", 1)


# Ten CPTs where the optimiser put them on bench M (budget 20,000), each moved onto the
# nearest cell centre: the spot where a cell scored at its centre counts as known.
OPTIMISED_10 = [
    (90.0, 90.0), (270.0, 90.0), (30.0, 90.0), (330.0, 90.0), (210.0, 110.0),
    (150.0, 90.0), (70.0, 130.0), (290.0, 130.0), (390.0, 90.0), (90.0, 210.0),
]  # fmt: skip


def test_gain_hardly_changes_when_probes_move_a_quarter_of_a_cell():
    """Bench M at 10 m cells (quarter = 2.5 m): scored at cell centres the gain fell by
    7-10% when these probes left the centres; as areas it changes by less than 3%."""
    model = _bench_m()
    model["grid_spacing_m"] = 10
    evaluator = GridEvaluator(to_core(validate_model(model)))
    centres = evaluator.grid.xy_project
    on_centre = [
        centres[int(np.argmin(np.hypot(*(centres - p).T)))] for p in np.array(OPTIMISED_10)
    ]
    base = Layout("ten", tuple(PlannedProbe(f"C{i}", "CPT", *p) for i, p in enumerate(on_centre)))
    gain = evaluator.evaluate_layout(base).information_gain_bits
    q = evaluator.grid.spacing_m / 4
    for dx, dy in ((q, 0.0), (0.0, q), (q, q), (-q, -q)):
        moved = Layout("moved", tuple(replace(p, x=p.x + dx, y=p.y + dy) for p in base.probes))
        other = evaluator.evaluate_layout(moved).information_gain_bits
        assert abs(other / gain - 1) < 0.03, (dx, dy, gain, other)


def test_cell_blocks_do_not_depend_on_the_chunk_size(monkeypatch):
    """Averaging over the sub-points chunk by chunk gives the same covariances."""
    import probewise.core.blocks as blocks_module

    model = copy.deepcopy(tiny_dict())
    project = to_core(validate_model(model))
    whole = GridEvaluator(project).base_pred
    monkeypatch.setattr(blocks_module, "CHUNK_ENTRIES", 37)
    chunked = GridEvaluator(project).base_pred
    np.testing.assert_allclose(chunked.var_m2, whole.var_m2, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(chunked.mean_m, whole.mean_m, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("model", ["exponential", "gaussian", "spherical"])
def test_in_place_correlations_equal_the_correlation_models(model):
    """The hot loop's in-place correlations equal probewise.core.correlation.correlate (itself
    checked against scikit-learn and gstools in test_core_reference_libraries.py)."""
    from probewise.core.blocks import _correlate_into

    h = np.linspace(0.0, 100.0, 2001).reshape(1, -1)
    out = np.empty_like(h)
    _correlate_into(out, model, h, h * h, 37.0)
    np.testing.assert_allclose(out, correlate(model, h, 37.0), rtol=0, atol=1e-15)


def test_posterior_grid_export_gives_cell_averages():
    """`probewise export --what posterior` writes the cell averages (dense reference), not
    the depths at the cell centres."""
    from probewise.commands.export import posterior_grid

    model = validate_model(tiny_with_split_zone())
    dense = Dense(model)
    g = model["grid_spacing_m"]
    for name in (None, model["layouts"][0]["name"]):
        xy, _, fields = posterior_grid(model, name)
        idx = np.array([int(np.argmin(np.hypot(*(xy - c).T))) for c in CELLS])
        np.testing.assert_allclose(xy[idx], CELLS)
        planned = _planned(dense, model["layouts"][0]) if name else ()
        mean, var = dense.cell_posterior(CELLS, g, planned)
        np.testing.assert_allclose(fields["mean_m"][idx], mean, rtol=TOL, atol=TOL)
        np.testing.assert_allclose(fields["std_m"][idx], np.sqrt(var), rtol=1e-8, atol=1e-8)


@pytest.mark.parametrize("nugget", [0.2, 0.6])
def test_a_nugget_enters_a_cell_only_through_its_sub_points_with_themselves(nugget):
    # rho = (1 - eta) rho_0 + eta [h = 0] (docs/model.md, nugget): over the q x q pairs of a
    # cell only the q pairs of a sub-point with itself carry the nugget, so
    # var = (1 - eta) var_0 + eta s^2 / q, worked by hand
    std, side = 1.3, 10.0
    plain = one_unit_ground("exponential", 30.0, 4.0, std)
    unit = plain.units[0]
    with_nugget = replace(
        plain,
        units=(replace(unit, correlation=replace(unit.correlation, nugget=nugget)),)
        + plain.units[1:],
    )
    q = SUBPOINTS_PER_SIDE**2
    var_0 = cell_blocks(plain, np.zeros((1, 2)), side, (0.0, 0.0)).prior_var_m2[0, 0]
    var_n = cell_blocks(with_nugget, np.zeros((1, 2)), side, (0.0, 0.0)).prior_var_m2[0, 0]
    assert var_n == pytest.approx((1 - nugget) * var_0 + nugget * std**2 / q, rel=1e-12)
