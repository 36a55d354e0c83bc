"""Levels and site history: ground level, reference levels, settlement and the fill-base
bound (docs/model.md "Levels and site history"). Sources are named beside each check."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad
from scipy.interpolate import LinearNDInterpolator

from probewise.core.bounds import BoundsConflictError, bounds_report, depth_bounds
from probewise.core.history import (
    NO_BOUND,
    OUTSIDE,
    consolidation_settlement_m,
    former_surface,
    reference_level_m,
)
from probewise.core.levels import ground_level_at
from probewise.core.model import (
    Correlation,
    DepthBound,
    FormerEnvironment,
    GroundLevel,
    GroundModel,
    HistoryRule,
    Polygon,
    Settlement,
    ThicknessRange,
    Unit,
)


def square(x0, y0, x1, y1) -> Polygon:
    return Polygon((np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]], float),))


CORR = Correlation("exponential", 50.0)
SETTLE = Settlement(
    compressible_unit=1,
    cc_min=0.2,
    cc_max=0.4,
    e0=1.5,
    unit_weight_kn_m3=16.81,  # g' = 7.0 kN/m3
    fill_unit_weight_kn_m3=20.0,
    surcharge_kpa=0.0,
)


def ground(
    settlement: Settlement | None = None,
    bounds: tuple[DepthBound, ...] = (),
    fill_range=(0.5, 3.0, 8.0),
    outside=None,
    level_m=5.0,
) -> GroundModel:
    """Fill over a soft clay (1.0-1.5 m) over sand; GL constant; salt marsh on x < 50."""
    rule = HistoryRule(
        "Reclamation",
        0,
        (FormerEnvironment("Salt marsh", square(0, 0, 50, 100), 1.5, 2.5),),
        outside,
        settlement,
    )
    return GroundModel(
        (
            Unit("Fill", ThicknessRange(*fill_range), CORR),
            Unit("Estuarine clay", ThicknessRange(1.0, 1.2, 1.5), CORR),
            Unit("Sand", ThicknessRange(1.0, 2.0, 3.0), CORR),
            Unit("Rock", None, None),
        ),
        bounds=bounds,
        ground_level=GroundLevel("mOD", level_m=level_m),
        history=(rule,),
    )


# ---------------------------------------------------------------- Terzaghi, one layer


def test_single_layer_after_das_worked_example():
    # Setup after Das, Principles of Geotechnical Engineering (7th ed., 2010), ch. 11 worked
    # example of a normally consolidated clay under sand (figures from memory, not checked
    # against the book): 2.5 m dry sand 16.5 kN/m3, 2 m sand below the water table
    # 18.81 kN/m3, 4.5 m clay 19.24 kN/m3, e0 = 0.9, Cc = 0.009 (LL - 10) = 0.36 (LL = 50),
    # dq = 87 kPa at mid-clay. By hand: s'0 = 2.5 x 16.5 + 2 x 9.0 + 2.25 x 9.43 = 80.4675 kPa;
    # S = 0.36 x 4.5 / 1.9 x log10(167.4675 / 80.4675) = 0.2714 m.
    top = 2.5 * 16.5 + 2.0 * (18.81 - 9.81)
    s = consolidation_settlement_m(0.36, 0.9, 19.24 - 9.81, [87.0], [4.5], 4.5, top)
    assert s[0] == pytest.approx(0.2714, abs=5e-4)


def test_single_layer_published_example_values():
    # Inputs of "Compressibility and consolidation, Example Problem 1", arizval.app
    # geotechnical engineering notes: H = 4 m, e0 = 0.90, Cc = 0.30, s'0 = 120 kPa,
    # dq = 60 kPa. By hand: S = 0.30 x 4 / 1.9 x log10(180 / 120) = 0.6316 x 0.17609 = 0.1112 m.
    # One sublayer with g' = 10 kN/m3 puts s'0 = 100 + 10 x 2 = 120 kPa at mid-layer.
    s = consolidation_settlement_m(0.30, 0.90, 10.0, [60.0], [4.0], 4.0, 100.0)
    assert s[0] == pytest.approx(0.1112, abs=1e-4)


def test_no_load_or_no_layer_no_settlement():
    s = consolidation_settlement_m(0.3, 1.0, 7.0, [0.0, -5.0, 50.0], [3.0, 3.0, 0.0])
    assert np.array_equal(s, [0.0, 0.0, 0.0])


def test_sublayer_count_is_ceil_of_half_metres():
    # H = 1.0 m is exactly 2 sublayers (not 3): the sum worked by hand with h = 0.5 m.
    s = consolidation_settlement_m(0.2, 1.5, 7.0, [50.0], [1.0])
    hand = 0.2 / 2.5 * 0.5 * (math.log10(51.75 / 1.75) + math.log10(55.25 / 5.25))
    assert s[0] == pytest.approx(hand, rel=1e-12)


def test_sublayer_sum_converges_to_integral():
    # Closed form: S = Cc/(1+e0) int_0^H log10((g'z + dq)/(g'z)) dz (scipy.integrate.quad);
    # the midpoint sum over sublayers converges to it as the sublayers shrink.
    cc, e0, g, dq, h_total = 0.35, 1.8, 6.5, 45.0, 6.0
    exact = (
        cc
        / (1 + e0)
        * quad(lambda z: math.log10((g * z + dq) / (g * z)), 0.0, h_total, limit=200)[0]
    )
    errors = [
        abs(consolidation_settlement_m(cc, e0, g, [dq], [h_total], sub)[0] - exact)
        for sub in (2.0, 0.5, 0.1, 0.02)
    ]
    assert all(a > b for a, b in zip(errors, errors[1:], strict=False))
    assert errors[-1] / exact < 2e-3


# ---------------------------------------------------------------- ground level


def test_ground_level_reproduces_a_plane_and_hand_barycentric():
    # A linear interpolant on any triangulation reproduces a plane exactly (textbook property
    # of piecewise-linear interpolation); inside one triangle the value is the barycentric
    # mean, worked by hand: (0,0)=1, (10,0)=3, (0,10)=5 -> (2,3) = 1 + 2 x 0.2 + 4 x 0.3 = 2.6.
    tri = GroundLevel("mOD", points=np.array([[0, 0, 1.0], [10, 0, 3.0], [0, 10, 5.0]]))
    assert ground_level_at(tri, np.array([[2.0, 3.0]]))[0] == pytest.approx(2.6, abs=1e-12)
    rng = np.random.default_rng(1)
    pts = rng.uniform(0, 100, (30, 2)) + [650_000.0, 5_700_000.0]  # UTM-like coordinates
    plane = 3.0 + 0.02 * (pts[:, 0] - 650_000) - 0.01 * (pts[:, 1] - 5_700_000)
    gl = GroundLevel("mOD", points=np.column_stack([pts, plane]))
    q = pts[:5] * 0.5 + pts[5:10] * 0.5  # midpoints: inside the hull
    want = 3.0 + 0.02 * (q[:, 0] - 650_000) - 0.01 * (q[:, 1] - 5_700_000)
    origin = (650_050.0, 5_700_050.0)
    got = ground_level_at(gl, q - origin, origin)
    np.testing.assert_allclose(got, want, atol=1e-9)


def test_ground_level_against_scipy_and_nearest_outside():
    # Inside the hull: scipy.interpolate.LinearNDInterpolator (Delaunay, linear) on the raw
    # points; outside: the nearest surveyed point, found here by brute force.
    rng = np.random.default_rng(7)
    pts = rng.uniform(0, 100, (40, 2))
    level = rng.normal(2.0, 0.7, 40)
    gl = GroundLevel("mOD", points=np.column_stack([pts, level]))
    q = rng.uniform(-40, 140, (400, 2))
    got = ground_level_at(gl, q)
    ref = LinearNDInterpolator(pts, level)(q)
    inside = np.isfinite(ref)
    assert inside.sum() > 50 and (~inside).sum() > 50
    np.testing.assert_allclose(got[inside], ref[inside], atol=1e-9)
    d2 = ((q[~inside, None, :] - pts[None, :, :]) ** 2).sum(axis=2)
    np.testing.assert_array_equal(got[~inside], level[d2.argmin(axis=1)])


# ---------------------------------------------------------------- reference levels


def test_reference_level_arithmetic_by_hand():
    # Tide levels in chart datum; chart datum 2.2 m below the project datum: MHWS 2.9 m CD
    # -> 2.9 - 2.2 = 0.7 m; MLWS -1.8 + (-2.2) = -4.0 m; a literal number stays as it is.
    table = {"MHWS": 2.9, "MLWS": -1.8}
    assert reference_level_m("MHWS", table, -2.2) == pytest.approx(0.7, abs=1e-12)
    assert reference_level_m("MLWS", table, -2.2) == pytest.approx(-4.0, abs=1e-12)
    assert reference_level_m(1.25, table, -2.2) == 1.25
    with pytest.raises(KeyError):
        reference_level_m("HAT", table, 0.0)


# ---------------------------------------------------------------- the bound


def test_former_surface_first_environment_then_outside():
    rule = HistoryRule(
        "r",
        0,
        (
            FormerEnvironment("Channel", square(0, 0, 10, 10), -3.0, -1.0),
            FormerEnvironment("Marsh", square(0, 0, 50, 50), 1.0, 2.0),
        ),
        outside=(2.0, 4.0),
    )
    lo, hi, env = former_surface(rule, np.array([[5.0, 5.0], [30.0, 30.0], [80.0, 80.0]]))
    assert env.tolist() == [0, 1, OUTSIDE]
    assert lo.tolist() == [-3.0, 1.0, 2.0] and hi.tolist() == [-1.0, 2.0, 4.0]
    none = HistoryRule("r", 0, rule.environments, outside=None)
    assert former_surface(none, np.array([[80.0, 80.0]]))[2][0] == NO_BOUND


def test_bound_by_hand_without_settlement():
    # GL 5.0, salt marsh 1.5-2.5: depth in [5 - 2.5, 5 - 1.5] = [2.5, 3.5] m; the fill's own
    # range (0.5-8 m) is wider, so the history sets both ends. Outside the marsh: no bound.
    lo, hi = depth_bounds(ground(), np.array([[20.0, 50.0], [80.0, 50.0]]))
    assert (lo[0, 0], hi[0, 0]) == pytest.approx((2.5, 3.5), abs=1e-12)
    assert (lo[1, 0], hi[1, 0]) == pytest.approx((0.5, 8.0), abs=1e-12)


def test_bound_by_hand_with_settlement():
    # g' = 16.81 - 9.81 = 7.0; h = 0.5 m sublayers, mid-layer stresses 1.75, 5.25, 8.75 kPa.
    # S_min: Cc 0.2, H = 1.0 (2 sublayers), F = 2.5, dq = 20 x 2.5 = 50 kPa:
    #   0.2/2.5 x 0.5 x (log10(51.75/1.75) + log10(55.25/5.25)) = 0.09972 m.
    # S_max: Cc 0.4, H = 1.5 (3 sublayers), F = 1.5, dq = 20 x 3.5 = 70 kPa:
    #   0.4/2.5 x 0.5 x (log10(71.75/1.75) + log10(75.25/5.25) + log10(78.75/8.75)) = 0.29787 m.
    # Depth bound [5 - 2.5 + 0.09972, 5 - 1.5 + 0.29787] = [2.59972, 3.79787] m.
    report = bounds_report(ground(SETTLE), np.array([[20.0, 50.0]]))
    band = report.bands[0]
    assert band.settlement_min_m[0] == pytest.approx(0.0997218, abs=1e-6)
    assert band.settlement_max_m[0] == pytest.approx(0.2978699, abs=1e-6)
    assert report.lo[0, 0] == pytest.approx(2.5997218, abs=1e-6)
    assert report.hi[0, 0] == pytest.approx(3.7978699, abs=1e-6)
    assert report.lo_source[0, 0] == report.hi_source[0, 0] == 0  # history rule 0, no bounds


def test_history_bounds_only_its_boundary():
    xy = np.array([[20.0, 50.0]])
    with_rule = depth_bounds(ground(SETTLE), xy)
    g = ground(SETTLE)
    without = depth_bounds(GroundModel(g.units, ground_level=g.ground_level), xy)
    for a, b in zip(with_rule, without, strict=True):
        np.testing.assert_array_equal(a[:, 1:], b[:, 1:])


def test_conflict_names_both_bounds():
    # A user bound 0.5-1.0 m on the fill base against the history's 2.5-3.5 m.
    user = (DepthBound(0, 0.5, 1.0),)
    with pytest.raises(BoundsConflictError) as err:
        depth_bounds(ground(bounds=user), np.array([[20.0, 50.0]]))
    assert err.value.field == "history[0]"
    assert "bounds[0]" in err.value.problem and "(20.0, 50.0)" in err.value.problem
    # ... and against the fill's own thickness range (at most 2 m).
    with pytest.raises(BoundsConflictError, match="unit thickness ranges"):
        depth_bounds(ground(fill_range=(0.2, 1.0, 2.0)), np.array([[20.0, 50.0]]))
    # Outside the marsh (no bound there) nothing conflicts.
    depth_bounds(ground(bounds=user), np.array([[80.0, 50.0]]))


@settings(max_examples=150, deadline=None)
@given(
    gl=st.floats(-2.0, 8.0),
    f_lo=st.floats(-4.0, 6.0),
    f_span=st.floats(0.0, 3.0),
    b_lo=st.floats(0.0, 6.0),
    b_span=st.floats(0.1, 6.0),
    settle=st.booleans(),
    x=st.floats(0.0, 100.0),
)
def test_adding_a_history_rule_never_widens(gl, f_lo, f_span, b_lo, b_span, settle, x):
    # Property (intersection can only narrow): every bound with the rule lies inside the
    # bound without it, or the rule is reported as a conflict.
    user = (DepthBound(0, b_lo, b_lo + b_span),)
    g = ground(SETTLE if settle else None, bounds=user, level_m=gl)
    rule = g.history[0]
    env = FormerEnvironment("Marsh", rule.environments[0].polygon, f_lo, f_lo + f_span)
    g = GroundModel(
        g.units,
        bounds=user,
        ground_level=g.ground_level,
        history=(HistoryRule("Reclamation", 0, (env,), None, rule.settlement),),
    )
    plain = GroundModel(g.units, bounds=user, ground_level=g.ground_level)
    xy = np.array([[x, 50.0]])
    lo0, hi0 = depth_bounds(plain, xy)
    try:
        lo1, hi1 = depth_bounds(g, xy)
    except BoundsConflictError as exc:
        assert exc.field == "history[0]"
        return
    assert np.all(lo1 >= lo0) and np.all(hi1 <= hi0) and np.all(lo1 <= hi1)
