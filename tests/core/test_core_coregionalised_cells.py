"""Cells and design-element averages with correlated unit thicknesses (server/core/blocks.py,
server/core/element_average.py; docs/model.md "Model structure").

Sources: Journel and Huijbregts, Mining Geostatistics (1978): the covariance of a block average
is the mean of the point covariance over the block's sub-points; Gaussian conditioning of a
linear functional (Rasmussen and Williams, Gaussian Processes for Machine Learning, 2006, eq.
2.19). The point covariance of the linear model of coregionalisation used as the reference
here (``probewise.core.covariance.boundary_covariance``) is itself checked against 200,000 draws
of the latent fields in tests/core/test_core_structure.py. The references below form dense
matrices over every sub-point and solve them directly: no block sums, no whitening.
"""

from __future__ import annotations

import numpy as np
import pytest
from core_helpers import tiny_dict

from probewise.app.to_core import core_polygon, to_core
from probewise.core.analysis import ProjectAnalysis
from probewise.core.blocks import SUBPOINTS_PER_SIDE, cell_blocks, subpoint_offsets_m
from probewise.core.covariance import boundary_covariance
from probewise.core.element_average import (
    average_cross_covariance,
    condition_average,
    element_average,
)
from probewise.core.evaluate import GridEvaluator
from probewise.core.field import prior_boundary_moments, unit_fields
from probewise.core.model import ChoiceConsequence, DesignElement
from probewise.core.optimise import OptimiseError, OptimiseOptions, optimise
from probewise.core.posterior import Observations
from probewise.core.value import element_cells
from probewise.io.model_file import validate_model

PAIRS = [
    {"units": ["Made ground", "Alluvial clay"], "rho": -0.6},
    {"units": ["Alluvial clay", "River gravel"], "rho": 0.3},
]
# one cell straddling the zone's west edge (moved to x = 82 m), one in the zone, one beside an
# existing probe, a corner
CELLS = [(82.5, 62.5), (102.5, 57.5), (32.5, 27.5), (2.5, 117.5)]


def correlated_model() -> dict:
    model = tiny_dict()
    ring = model["zones"][0]["geometry"]["coordinates"][0]
    model["zones"][0]["geometry"]["coordinates"][0] = [[82 if x == 80 else x, y] for x, y in ring]
    model["thickness_correlation"] = PAIRS
    return model


@pytest.fixture(scope="module")
def case():
    project = to_core(validate_model(correlated_model()))
    assert project.ground.thickness_correlation, "the pairs reached the core"
    return project, ProjectAnalysis(project), GridEvaluator(project)


def _readings(state) -> tuple[Observations, np.ndarray]:
    """All readings of a state (known first) and how many are known."""
    obs = state.observations
    joined = Observations.build(
        np.concatenate([o.xy for o in obs]),
        np.concatenate([o.boundary for o in obs]),
        np.concatenate([o.noise_std_m for o in obs]),
        np.concatenate([o.value_m for o in obs]),
    )
    return joined, obs[0].size


def _point_cov(ground, origin, xy_a, bnd_a, xy_b, bnd_b):
    fa, fb = unit_fields(ground, xy_a, origin), unit_fields(ground, xy_b, origin)
    return boundary_covariance(ground, xy_a, bnd_a, fa, xy_b, bnd_b, fb)


def _dense_average_posterior(ground, origin, sub_xy, k, readings, n_known):
    """Prior and posterior mean and variance of the mean of D_k over ``sub_xy``, dense."""
    n = len(sub_xy)
    bnd = np.full(n, k)
    prior_mean = prior_boundary_moments(unit_fields(ground, sub_xy, origin))[0][:, k].mean()
    prior_var = _point_cov(ground, origin, sub_xy, bnd, sub_xy, bnd).mean()
    if readings.size == 0:
        return prior_mean, prior_var, prior_mean, prior_var
    xy_o, b_o = readings.xy, readings.boundary
    K = _point_cov(ground, origin, xy_o, b_o, xy_o, b_o) + np.diag(readings.noise_std_m**2)
    c = _point_cov(ground, origin, xy_o, b_o, sub_xy, bnd).mean(axis=1)  # (m,)
    mu_o = prior_boundary_moments(unit_fields(ground, xy_o, origin))[0][np.arange(len(b_o)), b_o]
    resid = readings.value_m[:n_known] - mu_o[:n_known]
    mean = prior_mean + c[:n_known] @ np.linalg.solve(K[:n_known, :n_known], resid)
    var = prior_var - c @ np.linalg.solve(K, c)
    return prior_mean, prior_var, mean, var


def _cell_index(evaluator, centre) -> int:
    return int(np.argmin(np.hypot(*(evaluator.grid.xy_project - centre).T)))


@pytest.mark.parametrize("layout", [None, "Two boreholes and six CPTs"])
def test_cell_moments_equal_the_dense_average_of_the_coregionalised_point_covariance(case, layout):
    project, analysis, evaluator = case
    origin = analysis.origin
    if layout is None:
        state, pred = analysis.baseline, evaluator.base_pred
    else:
        chosen = next(lay for lay in project.layouts if lay.name == layout)
        state, _ = analysis.layout_state(chosen)
        pred, _ = evaluator.layout_prediction(chosen)
    readings, n_known = _readings(state)
    offsets = subpoint_offsets_m(evaluator.grid.spacing_m, SUBPOINTS_PER_SIDE)
    for centre in CELLS:
        c = _cell_index(evaluator, centre)
        sub = evaluator.grid.xy[c] + offsets  # local coordinates, like the readings
        for k in range(project.ground.n_boundaries):
            m0, v0, m1, v1 = _dense_average_posterior(
                project.ground, origin, sub, k, readings, n_known
            )
            assert pred.prior_mean_m[c, k] == pytest.approx(m0, rel=1e-12)
            assert pred.prior_var_m2[c, k] == pytest.approx(v0, rel=1e-10)
            assert pred.mean_m[c, k] == pytest.approx(m1, rel=1e-9, abs=1e-9)
            assert pred.var_m2[c, k] == pytest.approx(v1, rel=1e-7, abs=1e-9)


def test_correlation_changes_the_cell_variance(case):
    """The pairs matter: dropping them changes the prior variance of deeper boundaries (the
    check above would pass vacuously if the loadings were ignored on both sides)."""
    project, analysis, _ = case
    plain = to_core(validate_model(tiny_dict())).ground
    xy = np.array([[30.0, 30.0]])
    with_pairs = cell_blocks(project.ground, xy, 5.0, analysis.origin).prior_var_m2[0]
    without = cell_blocks(plain, xy, 5.0, analysis.origin).prior_var_m2[0]
    assert with_pairs[0] == pytest.approx(without[0], rel=1e-12)  # the top unit alone
    assert abs(with_pairs[1] - without[1]) > 0.05 * without[1]  # rho = -0.6 thins D_1


def test_element_average_with_correlated_thicknesses_against_dense(case):
    project, analysis, evaluator = case
    geometry = {
        "type": "Polygon",
        "coordinates": [[[75, 50], [90, 50], [90, 65], [75, 65], [75, 50]]],
    }
    element = DesignElement(
        "e", core_polygon(geometry), 2, "deeper", 0.95, ChoiceConsequence(4.0, 1.0, 2.0)
    )
    cells = element_cells(evaluator.grid, element)
    for k in (1, 2):
        avg = element_average(project.ground, evaluator.grid, cells, k)
        known = analysis.baseline.observations[0]
        known_cov = average_cross_covariance(
            project.ground, avg, known, analysis.baseline.fields[0]
        )
        mean, var = condition_average(analysis.baseline, avg, known_cov)
        readings, n_known = _readings(analysis.baseline)
        m0, v0, m1, v1 = _dense_average_posterior(
            project.ground, analysis.origin, avg.sub_xy, k, readings, n_known
        )
        assert avg.prior_mean_m == pytest.approx(m0, rel=1e-12)
        assert avg.prior_var_m2 == pytest.approx(v0, rel=1e-9)
        assert mean == pytest.approx(m1, rel=1e-9)
        assert var == pytest.approx(v1, rel=1e-7)


def test_the_optimiser_refuses_correlated_thicknesses_naming_the_field(case):
    project, _, _ = case
    with pytest.raises(OptimiseError) as caught:
        optimise(project, OptimiseOptions(budget=5000.0))
    assert caught.value.field == "thickness_correlation"
    assert "correlated" in str(caught.value)
