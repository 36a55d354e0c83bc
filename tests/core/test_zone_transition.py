"""Zone transition widths: thickness mean and spread blend linearly across a zone's edge
(docs/model.md "Zone transitions"); values worked by hand beside each check."""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from probewise.core.field import unit_fields
from probewise.core.geometry import distance_to_edge_m
from probewise.core.model import Correlation, GroundModel, Polygon, ThicknessRange, Unit, Zone
from probewise.core.priors import thickness_moments

SQUARE = Polygon((np.array([[0, 0], [50, 0], [50, 100], [0, 100], [0, 0]], float),))
OUTER = ThicknessRange(1.0, 2.0, 3.0, "uniform")  # mean 2, std 1/sqrt(3)
INNER = ThicknessRange(4.0, 6.0, 8.0, "uniform")  # mean 6, std 2/sqrt(3)


def ground(transition_m: float) -> GroundModel:
    corr = Correlation("exponential", 50.0)
    return GroundModel(
        (Unit("Upper", OUTER, corr), Unit("Basal", None, None)),
        zones=(Zone("Channel", SQUARE, {0: INNER}, transition_m),),
    )


def test_blend_by_hand():
    # w = 20 m: t = 1/2 + d/w with d positive inside. x = 50 (edge): t = 0.5, mean 4;
    # x = 45: t = 0.75, mean 0.75 x 6 + 0.25 x 2 = 5; x = 55: t = 0.25, mean 3;
    # x = 39 and x = 61 lie beyond w/2 = 10 m: the zone's 6 and the default 2.
    xy = np.array([[50.0, 50.0], [45.0, 50.0], [55.0, 50.0], [39.0, 50.0], [61.0, 50.0]])
    f = unit_fields(ground(20.0), xy)
    np.testing.assert_allclose(f.mean_m[:, 0], [4.0, 5.0, 3.0, 6.0, 2.0], atol=1e-12)
    s_out, s_in = thickness_moments(OUTER)[1], thickness_moments(INNER)[1]
    assert f.std_m[1, 0] == pytest.approx(0.75 * s_in + 0.25 * s_out, abs=1e-12)
    # in the band the hard range is the wider of the two: 1 to 8 m
    assert (f.min_m[1, 0], f.max_m[1, 0]) == (1.0, 8.0)
    assert (f.min_m[3, 0], f.max_m[3, 0]) == (4.0, 8.0)


def test_no_transition_is_the_sharp_edge_and_blend_is_continuous():
    x = np.linspace(20, 80, 601)
    xy = np.column_stack([x, np.full_like(x, 50.0)])
    sharp = unit_fields(ground(0.0), xy).mean_m[:, 0]
    np.testing.assert_array_equal(sharp, np.where(x <= 50, 6.0, 2.0))
    smooth = unit_fields(ground(20.0), xy).mean_m[:, 0]
    assert np.abs(np.diff(smooth)).max() <= 4.0 / 20 * 0.1 + 1e-9  # slope 4 m per 20 m


def test_distance_to_edge_against_shapely():
    # shapely's distance from a point to the polygon's boundary is the reference.
    rng = np.random.default_rng(3)
    xy = rng.uniform(-30, 130, (300, 2))
    ring = np.array([[0, 0], [50, 0], [70, 60], [20, 100], [0, 0]], float)
    hole = np.array([[20, 20], [30, 20], [30, 30], [20, 20]], float)
    poly = Polygon((ring, hole))
    ref = shapely.Polygon(ring, [hole]).boundary
    want = shapely.distance(ref, shapely.points(xy))
    np.testing.assert_allclose(distance_to_edge_m(xy, poly), want, atol=1e-9)
