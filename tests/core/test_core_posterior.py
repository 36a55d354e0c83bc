"""Posterior, covariance, zones, bounds and coincident probes; invariants with hypothesis.

Sources: docs/model.md "Probability model" for the rules; Gaussian conditioning identities
(Rasmussen & Williams 2006, eq. 2.19-2.24) for the properties: the posterior variance lies
between 0 and the prior, never grows when a reading is added, and is 0 at an exact reading.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from core_helpers import one_unit_ground, tiny_dict
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from probewise.app.to_core import to_core
from probewise.core.analysis import ProjectAnalysis
from probewise.core.bounds import depth_bounds
from probewise.core.covariance import boundary_covariance, cross_covariance_all
from probewise.core.field import unit_fields
from probewise.core.model import (
    Correlation,
    DepthBound,
    GroundModel,
    Layout,
    PlannedProbe,
    Polygon,
    ThicknessRange,
    Unit,
    Zone,
)
from probewise.core.posterior import Observations, condition


def square(x0, y0, x1, y1) -> Polygon:
    return Polygon((np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]], float),))


# --- zones ----------------------------------------------------------------------------------
def test_zone_override_applies_inside_the_zone_only():
    """Tiny model: the Old channel zone (80 <= x <= 120) gives Alluvial clay PERT(3, 6, 9):
    mean (3 + 24 + 9)/6 = 6, variance (6-3)(9-6)/7 = 9/7 (docs/model.md PERT moments); elsewhere
    the default triangular(1, 3, 6): mean 10/3, variance (1+9+36-3-6-18)/18 = 19/18."""
    project = to_core(tiny_dict())
    fields = unit_fields(project.ground, np.array([[100.0, 60.0], [30.0, 60.0]]))
    assert fields.mean_m[0, 1] == pytest.approx(6.0)
    assert fields.std_m[0, 1] == pytest.approx(math.sqrt(9 / 7))
    assert fields.mean_m[1, 1] == pytest.approx(10 / 3)
    assert fields.std_m[1, 1] == pytest.approx(math.sqrt(19 / 18))
    # units the zone does not name keep their default
    assert fields.mean_m[0, 0] == fields.mean_m[1, 0]
    assert fields.min_m[0, 1] == 3.0 and fields.max_m[1, 1] == 6.0


def test_first_containing_zone_wins():
    default = ThicknessRange(1.0, 2.0, 3.0, "uniform")
    units = (
        Unit("A", default, Correlation("exponential", 50.0)),
        Unit("B", default, Correlation("exponential", 50.0)),
        Unit("C", None, None),
    )
    first = Zone("first", square(0, 0, 10, 10), {0: ThicknessRange(5.0, 6.0, 7.0, "uniform")})
    second = Zone(
        "second",
        square(5, 5, 20, 20),
        {0: ThicknessRange(8.0, 9.0, 10.0, "uniform"), 1: ThicknessRange(4, 4, 6, "uniform")},
    )
    ground = GroundModel(units, (first, second))
    f = unit_fields(ground, np.array([[7.0, 7.0], [15.0, 15.0], [50.0, 50.0]]))
    np.testing.assert_allclose(f.mean_m[:, 0], [6.0, 9.0, 2.0])
    # the first zone wins at (7, 7) although the second also overrides unit B there
    np.testing.assert_allclose(f.mean_m[:, 1], [2.0, 5.0, 2.0])
    np.testing.assert_array_equal(f.zone, [0, 1, -1])


def test_zone_changes_the_posterior_spread():
    analysis = ProjectAnalysis(to_core(tiny_dict()))
    post = analysis.at_points(np.array([[100.0, 110.0], [20.0, 110.0]]))
    assert post.prior_std_m[0, 1] > post.prior_std_m[1, 1]


# --- bounds -----------------------------------------------------------------------------------
def test_bounds_sum_unit_extremes_and_intersect_user_bounds_in_their_polygon():
    project = to_core(tiny_dict())
    bound = DepthBound(1, 4.0, 6.5, square(0, 0, 50, 120))
    ground = GroundModel(
        project.ground.units,
        project.ground.zones,
        project.ground.boundaries_of_interest,
        (*project.ground.bounds, bound),
    )
    xy = np.array([[20.0, 60.0], [100.0, 60.0], [170.0, 60.0]])
    lo, hi = depth_bounds(ground, xy)
    # Made ground: [0.3, 2.0] intersected with the everywhere bound [0.5, 1.8]
    np.testing.assert_allclose(lo[:, 0], 0.5)
    np.testing.assert_allclose(hi[:, 0], 1.8)
    # Alluvial clay base: 0.3+1.0 .. 2.0+6.0 outside the zone; zone 0.3+3 .. 2+9; polygon bound
    np.testing.assert_allclose(lo[:, 1], [4.0, 3.3, 1.3])
    np.testing.assert_allclose(hi[:, 1], [6.5, 11.0, 8.0])
    # River gravel base adds 0.5 .. 4.0
    np.testing.assert_allclose(lo[:, 2], [1.8, 3.8, 1.8])
    np.testing.assert_allclose(hi[:, 2], [12.0, 15.0, 12.0])


def test_disjoint_user_bound_is_kept():
    ground = one_unit_ground("exponential", 50.0, 4.0, 0.5)
    ground = GroundModel(ground.units, bounds=(DepthBound(0, 9.0, 10.0),))
    lo, hi = depth_bounds(ground, np.zeros((1, 2)))
    assert (lo[0, 0], hi[0, 0]) == (9.0, 10.0)


def test_quantiles_stay_inside_the_bounds():
    analysis = ProjectAnalysis(to_core(tiny_dict()))
    post = analysis.at_points(np.random.default_rng(0).uniform(0, 200, (50, 2)))
    assert np.all(post.p05_m >= post.lo_m - 1e-12) and np.all(post.p95_m <= post.hi_m + 1e-12)
    assert np.all(post.p05_m <= post.p95_m)


# --- coincident and duplicate probes --------------------------------------------------------
def test_coincident_exact_readings_do_not_fail():
    ground = one_unit_ground("gaussian", 40.0, 3.0, 1.0)
    xy = np.array([[10.0, 10.0], [10.0, 10.0], [10.0, 10.0], [30.0, 5.0]])
    obs = Observations.build(xy, [0, 0, 0, 0], [0.0, 0.0, 0.0, 0.0], [2.5, 2.5, 2.5, 3.5])
    state = condition(ground, (0.0, 0.0), obs)
    pred = state.predict(np.array([[10.0, 10.0], [20.0, 20.0]]))
    assert np.all(np.isfinite(pred.mean_m)) and np.all(pred.var_m2 >= 0)
    assert pred.mean_m[0, 0] == pytest.approx(2.5, abs=1e-6)
    assert pred.var_m2[0, 0] == pytest.approx(0.0, abs=1e-8)


def test_duplicate_planned_probe_equals_one_reading_of_half_the_variance():
    """Two independent readings with noise tau at one spot carry the information of one
    reading with variance tau^2 / 2 (Gaussian conditioning)."""
    ground = one_unit_ground("exponential", 60.0, 3.0, 1.0)
    base = condition(ground, (0.0, 0.0), Observations.empty())
    tau = 0.3
    twice = base.extend(Observations.build([[5.0, 5.0], [5.0, 5.0]], [0, 0], [tau, tau]))
    once = base.extend(Observations.build([[5.0, 5.0]], [0], [tau / math.sqrt(2.0)]))
    pts = np.array([[5.0, 5.0], [40.0, 0.0], [-20.0, 30.0]])
    np.testing.assert_allclose(twice.predict(pts).var_m2, once.predict(pts).var_m2, atol=1e-12)


def test_planned_probe_on_an_existing_one_and_duplicate_layout_probes():
    project = to_core(tiny_dict())
    analysis = ProjectAnalysis(project)
    probes = (
        PlannedProbe("A", "BH", 30.0, 30.0),  # on HBH1
        PlannedProbe("B", "BH", 30.0, 30.0),
        PlannedProbe("C", "CPT", 30.0, 30.0),
    )
    post = analysis.at_points(np.array([[30.0, 30.0], [100.0, 60.0]]), Layout("dup", probes))
    assert np.all(np.isfinite(post.std_m)) and np.all(post.std_m >= 0)
    base = analysis.at_points(np.array([[30.0, 30.0], [100.0, 60.0]]))
    assert np.all(post.std_m <= base.std_m + 1e-12)


# --- the block update equals a fresh factorisation ---------------------------------------------
def test_extend_equals_conditioning_on_everything_at_once():
    project = to_core(tiny_dict())
    analysis = ProjectAnalysis(project)
    state, _ = analysis.layout_state(project.layouts[1])
    pts = np.random.default_rng(3).uniform(-100, 100, (40, 2))
    base_pred = analysis.baseline.predict(pts)
    fast = state.predict(pts, base=base_pred)
    fresh = state.predict(pts)
    np.testing.assert_allclose(fast.var_m2, fresh.var_m2, atol=1e-12)
    np.testing.assert_allclose(fast.mean_m, fresh.mean_m, atol=1e-12)
    np.testing.assert_array_equal(fast.mean_m, base_pred.mean_m)  # planned: mean unchanged


def test_cross_covariance_all_matches_boundary_covariance():
    project = to_core(tiny_dict())
    g = project.ground
    rng = np.random.default_rng(5)
    xo = np.vstack([rng.uniform(0, 200, (5, 2)), [[10.0, 10.0], [10.0, 10.0]]])
    bo = np.array([0, 1, 2, 2, 0, 1, 2])
    xp = rng.uniform(0, 200, (11, 2))
    fo, fp = unit_fields(g, xo), unit_fields(g, xp)
    fast = cross_covariance_all(g, xo, bo, fo, xp, fp)
    for k in range(g.n_boundaries):
        ref = boundary_covariance(g, xo, bo, fo, xp, np.full(len(xp), k), fp)
        np.testing.assert_allclose(fast[:, k, :], ref, atol=1e-14)


# --- hypothesis properties ------------------------------------------------------------------
shapes = st.sampled_from(["pert", "triangular", "uniform"])
models = st.sampled_from(["exponential", "gaussian", "spherical"])


@st.composite
def grounds(draw):
    n_thick = draw(st.integers(1, 3))
    units = []
    for i in range(n_thick):
        a = draw(st.floats(0.0, 5.0))
        width = draw(st.floats(0.1, 10.0))
        b = a + width * draw(st.floats(0.0, 1.0))
        rng = ThicknessRange(a, b, a + width, draw(shapes))
        corr = Correlation(draw(models), draw(st.floats(5.0, 300.0)))
        units.append(Unit(f"U{i}", rng, corr))
    units.append(Unit("Basal", None, None))
    zones = ()
    if draw(st.booleans()):
        zones = (Zone("z", square(0, 0, 50, 100), {0: ThicknessRange(1.0, 4.0, 9.0, "pert")}),)
    return GroundModel(tuple(units), zones)


coords = st.floats(0.0, 100.0, allow_nan=False)


@st.composite
def readings(draw, ground, min_size=0, max_size=8, exact=None):
    n = draw(st.integers(min_size, max_size))
    xy = [(draw(coords), draw(coords)) for _ in range(n)]
    if n and draw(st.booleans()):
        xy[-1] = xy[0]  # a coincident probe
    bnd = [draw(st.integers(0, ground.n_boundaries - 1)) for _ in range(n)]
    if exact is None:
        tau = [draw(st.sampled_from([0.0, 0.01, 0.2, 1.0])) for _ in range(n)]
    else:
        tau = [0.0 if exact else 0.2] * n
    val = [draw(st.floats(0.0, 20.0)) for _ in range(n)]
    return Observations.build(np.array(xy, float).reshape(-1, 2), bnd, tau, val)


SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@SETTINGS
@given(st.data())
def test_variance_between_zero_and_prior_and_never_raised_by_a_probe(data):
    ground = data.draw(grounds())
    known = data.draw(readings(ground))
    extra = data.draw(readings(ground, min_size=1, max_size=4))
    pts = np.array(data.draw(st.lists(st.tuples(coords, coords), min_size=1, max_size=6)))
    state = condition(ground, (0.0, 0.0), known)
    before = state.predict(pts)
    after = state.extend(extra).predict(pts, base=before)
    tol = 1e-9 * max(1.0, float(before.prior_var_m2.max()))
    assert np.all(before.var_m2 >= 0) and np.all(after.var_m2 >= 0)
    assert np.all(before.var_m2 <= before.prior_var_m2 + tol)
    assert np.all(after.var_m2 <= before.var_m2 + tol)


@SETTINGS
@given(st.data())
def test_exact_readings_leave_no_variance_at_their_spot(data):
    ground = data.draw(grounds())
    obs = data.draw(readings(ground, min_size=1, max_size=5, exact=True))
    state = condition(ground, (0.0, 0.0), Observations.empty()).extend(obs)
    pred = state.predict(obs.xy)
    got = pred.var_m2[np.arange(obs.size), obs.boundary]
    assert np.all(got <= 1e-6 * max(1.0, float(pred.prior_var_m2.max())))


@SETTINGS
@given(st.data())
def test_joint_covariance_is_symmetric_positive_semidefinite(data):
    ground = data.draw(grounds())
    n = data.draw(st.integers(1, 12))
    xy = np.array([(data.draw(coords), data.draw(coords)) for _ in range(n)])
    bnd = np.array([data.draw(st.integers(0, ground.n_boundaries - 1)) for _ in range(n)])
    f = unit_fields(ground, xy)
    k = boundary_covariance(ground, xy, bnd, f, xy, bnd, f)
    np.testing.assert_allclose(k, k.T, atol=1e-12)
    eig = np.linalg.eigvalsh(0.5 * (k + k.T))
    assert eig.min() >= -1e-9 * max(1.0, float(np.abs(eig).max()))
