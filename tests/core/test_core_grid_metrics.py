"""Geometry, evaluation grid and the reported numbers (docs/model.md "Numbers reported")."""

from __future__ import annotations

import numpy as np
import pytest
from core_helpers import tiny_dict

from probewise.app.to_core import core_polygon, to_core
from probewise.core.evaluate import evaluate_project, information_gain_bits, pareto_flags
from probewise.core.geometry import points_in_polygon, polygon_area_m2
from probewise.core.grid import EmptyGridError, evaluation_grid
from probewise.core.model import Layout, PlannedProbe, Polygon, Site

SHAPE_WITH_HOLE = {
    "type": "MultiPolygon",
    "coordinates": [
        [
            [[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]],
            [[3, 3], [7, 3], [7, 7], [3, 7], [3, 3]],
        ],
        [[[20, 0], [30, 5], [20, 10], [20, 0]]],
    ],
}


def test_points_in_polygon_matches_shapely_covers():
    """Source: shapely (GEOS) ``covers``: inside or on the boundary; holes and multipolygons."""
    import shapely
    from shapely.geometry import shape

    geom = shape(SHAPE_WITH_HOLE)
    rng = np.random.default_rng(2)
    xy = np.vstack(
        [
            rng.uniform(-2, 32, (2000, 2)),
            [[0, 5], [10, 10], [3, 5], [5, 3], [20, 5], [30, 5], [25, 2.5], [5, 5], [15, 5]],
        ]
    )
    got = points_in_polygon(xy, core_polygon(SHAPE_WITH_HOLE))
    ref = shapely.covers(geom, shapely.points(xy))
    np.testing.assert_array_equal(got, ref)
    # shifted origin: the same answer for points given relative to it
    origin = (512000.0, 6190000.0)
    moved = Polygon(tuple(r + np.array(origin) for r in core_polygon(SHAPE_WITH_HOLE).rings))
    np.testing.assert_array_equal(points_in_polygon(xy, moved, origin), ref)


def test_polygon_area_with_hole():
    """Shoelace: 100 - 16 + triangle 10 x 10 / 2 = 134 m2."""
    assert polygon_area_m2(core_polygon(SHAPE_WITH_HOLE)) == pytest.approx(134.0)


def test_grid_of_tiny_model():
    """200 x 120 m site at 5 m: 40 x 24 = 960 centres; exclusions are not removed; the
    Culvert line (50 <= y <= 70, weight 3) holds the 4 rows of centres 52.5..67.5."""
    project = to_core(tiny_dict())
    grid = evaluation_grid(project.site, project.origin)
    assert grid.n_cells == 960 and grid.cell_area_m2 == 25.0
    absolute = grid.xy + np.array(project.origin)
    assert absolute[:, 0].min() == 2.5 and absolute[:, 1].max() == 117.5
    assert int((grid.weight == 3).sum()) == 160 and int((grid.weight == 1).sum()) == 800
    excl = project.site.exclusions[0]
    assert points_in_polygon(grid.xy, excl, project.origin).sum() == 60  # kept: 10 x 6 cells


def test_grid_weight_is_the_heaviest_area_else_one():
    from probewise.core.model import AreaOfInterest

    outline = Polygon((np.array([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], float),))
    light = AreaOfInterest(
        "light", Polygon((np.array([[0, 0], [6, 0], [6, 10], [0, 0]], float),)), 0.5
    )
    heavy = AreaOfInterest(
        "heavy", Polygon((np.array([[4, 0], [10, 0], [10, 10], [4, 0]], float),)), 4
    )
    grid = evaluation_grid(Site(outline, 2.0, (light, heavy)), (5.0, 5.0))
    xy = grid.xy + 5.0
    w = dict(zip(map(tuple, xy), grid.weight, strict=True))
    assert w[(1.0, 1.0)] == 0.5 and w[(5.0, 1.0)] == 4.0 and w[(1.0, 9.0)] == 1.0


def test_grid_too_coarse_is_an_error():
    outline = Polygon((np.array([[0, 0], [3, 0], [0, 3], [0, 0]], float),))
    with pytest.raises(EmptyGridError):
        evaluation_grid(Site(outline, 10.0), (1.5, 1.5))


def test_cost_metres_and_duration_by_hand():
    """Mobilisation once per method used + per location + per metre x depth (docs/model.md)."""
    model = tiny_dict()
    model["layouts"] = [
        {
            "name": "hand",
            "probes": [
                {"id": "B1", "method": "BH", "x": 50, "y": 60, "depth_m": 10.0},
                {"id": "B2", "method": "BH", "x": 150, "y": 60, "depth_m": 8.0},
                {"id": "C1", "method": "CPT", "x": 100, "y": 60, "depth_m": 6.0},
            ],
        }
    ]
    (res,) = evaluate_project(to_core(model)).layouts
    assert res.cost == pytest.approx(2500 + 2 * 400 + 95 * 18 + 1500 + 150 + 18 * 6)
    assert res.metres == pytest.approx(24.0)
    # one rig each, side by side: the longest line is the calendar; rig-days add up
    assert res.duration_days == pytest.approx(max(18 / 12, 6 / 120))
    assert res.rig_days == pytest.approx(18 / 12 + 6 / 120)
    assert res.gain_per_cost == pytest.approx(res.information_gain_bits / res.cost)
    assert res.by_method["BH"].count == 2 and res.by_method["CPT"].metres == 6.0


def test_empty_layout_gains_nothing_and_costs_nothing():
    project = to_core(tiny_dict())
    ev = evaluate_project(project, [Layout("nothing", ())])
    (res,) = ev.layouts
    assert res.cost == 0.0 and res.information_gain_bits == 0.0 and res.gain_per_cost is None
    assert res.boundaries == ev.baseline.boundaries


def test_information_gain_formula():
    """Weight x weighted mean of 0.5 log2(var_base / var): halving the variance everywhere of
    the boundaries of interest (weights 2 and 1) gains 0.5 x (2 + 1) = 1.5 bits."""
    project = to_core(tiny_dict())
    grid = evaluation_grid(project.site, project.origin)
    base = np.full((grid.n_cells, 3), 2.0)
    assert information_gain_bits(project.ground, grid, base, base / 2) == pytest.approx(1.5)


def test_pareto_flags():
    # (cost, gain): B dominates A; C and D tie with each other; E costs more for less
    costs = [100, 90, 50, 50, 120]
    gains = [1.0, 1.2, 0.7, 0.7, 1.1]
    assert pareto_flags(costs, gains) == [False, True, True, True, False]


def test_more_probes_never_less_gain():
    project = to_core(tiny_dict())
    probes = project.layouts[0].probes
    ev = evaluate_project(project, [Layout("two", probes[:2]), Layout("four", probes)])
    two, four = ev.layouts
    assert four.information_gain_bits >= two.information_gain_bits
    for k in range(3):
        assert np.all(four.grid.std_m[:, k] <= two.grid.std_m[:, k] + 1e-12)


def test_planned_probes_leave_the_mean_alone():
    project = to_core(tiny_dict())
    ev = evaluate_project(project)
    for res in ev.layouts:
        np.testing.assert_array_equal(res.grid.mean_m, ev.baseline.grid.mean_m)


def test_probe_ids_in_plans():
    project = to_core(tiny_dict())
    probe = PlannedProbe("Z9", "DMT", 10.0, 10.0)
    (res,) = evaluate_project(project, [Layout("z", (probe,))]).layouts
    assert res.plans[0].probe.id == "Z9" and res.plans[0].observes == (0, 1)
