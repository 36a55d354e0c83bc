"""The site drawing's geometry (server/web/site_map.py) and the overview's summary sums."""

from __future__ import annotations

import math
import re

import pytest

from probewise.web.site_map import (
    Projection,
    build_site_map,
    nice_length_at_most,
    nice_step,
    polygon_rings,
    tick_values,
)
from probewise.web.summary import boundary_rows, depth_limits, layout_rows, resolution_rows


def square(x0: float, y0: float, size: float) -> list[list[float]]:
    return [[x0, y0], [x0 + size, y0], [x0 + size, y0 + size], [x0, y0 + size], [x0, y0]]


@pytest.mark.parametrize(
    ("span", "count", "step"),
    [(100, 5, 20), (120, 5, 50), (1, 5, 0.2), (7300, 5, 2000), (0.03, 3, 0.01)],
)
def test_nice_step_is_a_1_2_5_step(span, count, step):
    # 1-2-5 axis steps: common practice, no source.
    assert nice_step(span, count) == pytest.approx(step)


@pytest.mark.parametrize(("length", "nice"), [(57, 50), (100, 100), (0.7, 0.5), (2300, 2000)])
def test_nice_length_at_most(length, nice):
    assert nice_length_at_most(length) == pytest.approx(nice)


def test_tick_values_cover_the_range_on_multiples_of_the_step():
    assert tick_values(-3.0, 41.0, 10.0) == pytest.approx([0, 10, 20, 30, 40])


def test_polygon_rings_of_polygon_with_hole_and_multipolygon():
    outer, hole = square(0, 0, 10), square(2, 2, 3)
    assert len(polygon_rings({"type": "Polygon", "coordinates": [outer, hole]})) == 2
    multi = {"type": "MultiPolygon", "coordinates": [[outer], [square(20, 0, 5)]]}
    assert len(polygon_rings(multi)) == 2
    assert polygon_rings({"type": "Point", "coordinates": [0, 0]}) == []
    assert polygon_rings(None) == []


def test_projection_keeps_proportions_and_puts_north_up():
    projection = Projection((0.0, 0.0, 200.0, 100.0))
    # one scale on both axes: a 10 m square stays square on screen
    width = projection.x(10) - projection.x(0)
    height = projection.y(0) - projection.y(10)
    assert width == pytest.approx(height)
    assert projection.y(100) < projection.y(0)  # larger northing is higher on screen
    assert projection.frame_w / projection.frame_h == pytest.approx(
        (projection.max_x - projection.min_x) / (projection.max_y - projection.min_y)
    )


def test_path_of_a_rectangle_has_its_corners(tiny_model):
    projection = Projection((0.0, 0.0, 200.0, 120.0))
    path = projection.path(polygon_rings(tiny_model["site"]))
    numbers = [float(v) for v in re.findall(r"-?\d+\.?\d*", path)]
    xs, ys = numbers[0::2], numbers[1::2]
    assert min(xs) == pytest.approx(projection.x(0), abs=0.05)
    assert max(xs) == pytest.approx(projection.x(200), abs=0.05)
    assert min(ys) == pytest.approx(projection.y(120), abs=0.05)
    assert path.startswith("M") and path.endswith("Z")


def test_site_map_of_the_tiny_model(tiny_model):
    site_map = build_site_map(tiny_model)
    assert site_map.site is not None
    assert [z.tag for z in site_map.zones] == ["Z1"]
    assert [(a.tag, a.note) for a in site_map.areas] == [("A1", "weight 3")]
    assert [e.name for e in site_map.exclusions] == ["Live gas main easement"]
    assert [p.id for p in site_map.probes] == ["HBH1", "HBH2"]
    assert site_map.probe_kinds == ["borehole"]
    assert site_map.x_caption.startswith("x (m)")  # crs null: local site grid
    # the scale bar is drawn at the map's scale
    projection = Projection((0.0, 0.0, 200.0, 120.0))
    bar_m = float(site_map.scale_bar.label.split()[0])
    assert site_map.scale_bar.length_px == pytest.approx(bar_m * projection.scale, abs=0.1)
    # every probe lies inside the frame
    for probe in site_map.probes:
        assert site_map.frame_x <= probe.x <= site_map.frame_x + site_map.frame_w
        assert site_map.frame_y <= probe.y <= site_map.frame_y + site_map.frame_h


def test_site_map_with_a_crs_labels_eastings_and_northings(demo_model):
    site_map = build_site_map(demo_model)
    if demo_model.get("crs"):
        assert demo_model["crs"] in site_map.x_caption
        assert site_map.north_label == "N"
    assert all(math.isfinite(t.at_px) for t in site_map.x_ticks + site_map.y_ticks)
    assert len(site_map.probes) == len(demo_model.get("existing", []))


def test_labels_are_spread_apart():
    outer = {"type": "Polygon", "coordinates": [square(0, 0, 100)]}
    model = {
        "site": outer,
        "areas_of_interest": [
            {"name": "Same place one", "geometry": outer, "weight": 2},
            {"name": "Same place two", "geometry": outer, "weight": 3},
        ],
    }
    one, two = build_site_map(model).areas
    assert abs(one.label_y - two.label_y) >= 13 or abs(one.label_x - two.label_x) >= 26


def test_depth_limits_are_sums_of_minima_and_maxima(tiny_model):
    # docs/model.md "Hard bounds": D_k lies in [sum of minima, sum of maxima] of units 1..k.
    # Tiny model: Made ground 0.3-2.0, Alluvial clay 1.0-6.0, River gravel 0.5-4.0.
    limits = depth_limits(tiny_model)
    assert limits["Made ground"] == pytest.approx((0.3, 2.0))
    assert limits["Alluvial clay"] == pytest.approx((1.3, 8.0))
    assert limits["River gravel"] == pytest.approx((1.8, 12.0))
    assert "Mudstone" not in limits  # the basal unit has no base
    rows = {r.base_of: r for r in boundary_rows(tiny_model)}
    assert rows["Alluvial clay"].depth_max_m == pytest.approx(8.0)


def test_layout_and_resolution_rows(tiny_model):
    rows = layout_rows(tiny_model)
    assert [(r.name, r.n_probes) for r in rows] == [
        ("Four boreholes", 4),
        ("Two boreholes and six CPTs", 8),
    ]
    assert rows[1].mix == "BH \u00d72, CPT \u00d76"
    cpt = next(r for r in resolution_rows(tiny_model) if r.method_id == "CPT")
    assert cpt.precisions_m == [0.2, 0.1, None]
    assert cpt.cannot_penetrate == ["River gravel"]
