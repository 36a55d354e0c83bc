"""Schedule and posterior-grid writers (server/io/exports.py): CSV, GeoJSON and GeoPackage.

Round trips read the files back with the csv module and geopandas; WGS 84 coordinates are
checked against pyproj's Transformer.
"""

from __future__ import annotations

import csv
import io
import json

import geopandas
import numpy as np
import pyogrio
import pytest
from caution_check import assert_caution
from csv_helpers import caution_line, data_lines
from io_builders import gpkg_description, placed_model
from pyproj import Transformer

from probewise.io import exports

PLANNED = [
    {
        "id": "BH01",
        "method": "BH",
        "x": 530_050.0,
        "y": 180_060.0,
        "depth_m": 9.123,
        "observes": ["Made ground", "Alluvial clay", "River gravel"],
        "target": "River gravel",
    },
    {
        "id": "CPT01",
        "method": "CPT",
        "x": 530_020.0,
        "y": 180_060.0,
        "depth_m": 5.5,
        "observes": ["Made ground", "Alluvial clay"],
        "target": "Alluvial clay",
    },
]


@pytest.fixture
def rows(tiny_model):
    return exports.schedule_rows(PLANNED, placed_model(tiny_model))


def test_schedule_rows_cost_and_names(rows):
    # BH: per location 400 + per metre 95 x depth; mobilisation is not per probe
    assert rows[0]["cost"] == pytest.approx(400 + 95 * 9.123)
    assert rows[1]["cost"] == pytest.approx(150 + 18 * 5.5)
    assert rows[0]["method_name"] == "Cable percussive borehole"
    assert rows[1]["kind"] == "cpt"


def test_schedule_csv_round_trip(rows, tmp_path):
    path = tmp_path / "schedule.csv"
    exports.write_schedule_csv(rows, path)
    back = list(csv.DictReader(data_lines(path.read_text())))
    assert [r["id"] for r in back] == ["BH01", "CPT01"]
    assert list(back[0]) == list(exports.SCHEDULE_COLUMNS)
    assert float(back[0]["depth_m"]) == 9.12  # depths to the centimetre
    assert float(back[0]["x"]) == 530_050.0
    assert back[0]["observes"] == "Made ground; Alluvial clay; River gravel"
    buf = io.StringIO()
    exports.write_schedule_csv(rows, buf)
    assert buf.getvalue() == path.read_text()


def test_schedule_geojson_is_rfc7946_wgs84(rows, tmp_path):
    doc = exports.write_schedule_geojson(rows, "EPSG:27700")
    assert doc["type"] == "FeatureCollection" and len(doc["features"]) == 2
    assert "crs" not in doc and doc["project_crs"] == "EPSG:27700"
    assert_caution(doc["caution"])
    to_bng = Transformer.from_crs("EPSG:4326", "EPSG:27700", always_xy=True)
    for feat, row in zip(doc["features"], rows, strict=True):
        lon, lat = feat["geometry"]["coordinates"]
        x, y = to_bng.transform(lon, lat)
        assert (x, y) == pytest.approx((row["x"], row["y"]), abs=0.01)  # 8 decimals of a degree
        assert feat["properties"]["x"] == row["x"]
    path = tmp_path / "s.geojson"
    path.write_text(json.dumps(doc))
    frame = geopandas.read_file(path)
    assert frame.crs.to_epsg() == 4326 and list(frame["id"]) == ["BH01", "CPT01"]


def test_schedule_geojson_places_a_published_grid_point(tiny_model):
    """Ordnance Survey, "A guide to coordinate systems in Great Britain", worked example of the
    National Grid projection (from memory): Caister water tower, E 651409.903 m, N 313177.270 m,
    is at 52 39' 27.2531" N, 1 43' 4.5177" E on the OSGB36 datum (Airy 1830).

    The export gives WGS 84; taken back to OSGB36 latitude and longitude by pyproj's datum shift
    alone (no projection), the point must be the published one.
    """
    point = {**PLANNED[0], "x": 651_409.903, "y": 313_177.270}
    [row] = exports.schedule_rows([point], placed_model(tiny_model))
    [feature] = exports.write_schedule_geojson([row], "EPSG:27700")["features"]
    lon, lat = feature["geometry"]["coordinates"]
    to_osgb36 = Transformer.from_crs("EPSG:4326", "EPSG:4277", always_xy=True)
    lon36, lat36 = to_osgb36.transform(lon, lat)
    assert lat36 == pytest.approx(52 + 39 / 60 + 27.2531 / 3600, abs=1e-7)  # ~1 cm
    assert lon36 == pytest.approx(1 + 43 / 60 + 4.5177 / 3600, abs=1e-7)
    # and WGS 84 is not OSGB36: the datum shift here is tens of metres, not zero
    assert abs(lon - lon36) > 5e-4


def test_schedule_geojson_in_project_crs_with_crs_member(rows, tmp_path):
    doc = exports.write_schedule_geojson(rows, "EPSG:27700", rfc7946=False)
    assert doc["features"][0]["geometry"]["coordinates"] == [530_050.0, 180_060.0]
    path = tmp_path / "s.geojson"
    path.write_text(json.dumps(doc))
    assert geopandas.read_file(path).crs.to_epsg() == 27700


def test_schedule_geojson_local_grid_says_so(tiny_model):
    local = exports.schedule_rows([{**PLANNED[0], "x": 50.0, "y": 60.0}], tiny_model)
    doc = exports.write_schedule_geojson(local, None)
    assert doc["features"][0]["geometry"]["coordinates"] == [50.0, 60.0]
    assert "local site grid" in doc["coordinates_note"]


def test_schedule_gpkg_has_crs_and_every_probe(rows, tmp_path):
    path = tmp_path / "schedule.gpkg"
    assert exports.write_schedule_gpkg(rows, "EPSG:27700", path) == []
    assert_caution(gpkg_description(path, "schedule"))
    assert [tuple(x) for x in pyogrio.list_layers(path)] == [("schedule", "Point")]
    frame = geopandas.read_file(path, layer="schedule")
    assert frame.crs.to_epsg() == 27700
    assert list(frame["id"]) == ["BH01", "CPT01"]
    assert list(frame.geometry.x) == [530_050.0, 530_020.0]
    assert frame["observes"][1] == "Made ground; Alluvial clay"
    # writing again replaces the file rather than adding a second copy of the layer
    exports.write_schedule_gpkg(rows[:1], "EPSG:27700", path)
    assert len(geopandas.read_file(path)) == 1


def test_schedule_gpkg_without_crs_notes_it(tiny_model, tmp_path):
    local = exports.schedule_rows([{**PLANNED[0], "x": 50.0, "y": 60.0}], tiny_model)
    path = tmp_path / "s.gpkg"
    notes = exports.write_schedule_gpkg(local, None, path)
    assert notes and "no CRS" in notes[0]
    assert geopandas.read_file(path).crs is None
    with pytest.raises(exports.InputError, match="no probes"):
        exports.write_schedule_gpkg([], None, tmp_path / "e.gpkg")


def grid_fields(n: int, b: int) -> dict:
    rng = np.random.default_rng(7)
    mean = rng.uniform(1, 6, (n, b))
    std = rng.uniform(0.1, 1.0, (n, b))
    return {
        "mean_m": mean,
        "std_m": std,
        "p05_m": mean - 1.645 * std,
        "p50_m": mean,
        "p95_m": mean + 1.645 * std,
    }


def test_posterior_grid_csv_long_rows(tmp_path):
    xy = np.array([[530_002.5, 180_002.5], [530_007.5, 180_002.5], [530_002.5, 180_007.5]])
    names = ["Made ground", "Alluvial clay"]
    fields = grid_fields(3, 2)
    path = tmp_path / "grid.csv"
    exports.write_posterior_grid_csv(xy, names, fields, path)
    back = list(csv.DictReader(data_lines(path.read_text())))
    assert len(back) == 6
    assert list(back[0]) == [
        "x",
        "y",
        "boundary",
        "mean_m",
        "std_m",
        "p05_m",
        "p50_m",
        "p95_m",
        "width90_m",
    ]
    clay = [r for r in back if r["boundary"] == "Alluvial clay"]
    assert [float(r["x"]) for r in clay] == list(xy[:, 0])
    want = fields["p95_m"][:, 1] - fields["p05_m"][:, 1]
    assert [float(r["width90_m"]) for r in clay] == pytest.approx(want, abs=1e-4)


def test_posterior_grid_gpkg_layer_per_boundary(tmp_path):
    xy = np.array([[1.0, 2.0], [3.0, 4.0]])
    names = ["Made ground", "Alluvial clay", "Made-ground"]
    fields = grid_fields(2, 3)
    path = tmp_path / "grid.gpkg"
    exports.write_posterior_grid_gpkg(xy, names, fields, "EPSG:27700", path)
    assert_caution(gpkg_description(path, "base_of_Made_ground"))
    layers = [str(x[0]) for x in pyogrio.list_layers(path)]
    assert layers == ["base_of_Made_ground", "base_of_Alluvial_clay", "base_of_Made_ground_2"]
    frame = geopandas.read_file(path, layer="base_of_Alluvial_clay")
    assert frame.crs.to_epsg() == 27700
    assert list(frame["p50_m"]) == pytest.approx(fields["p50_m"][:, 1], abs=1e-4)
    assert set(frame.columns) >= {"boundary", "mean_m", "std_m", "p05_m", "p95_m", "width90_m"}


def test_posterior_grid_shape_checked():
    with pytest.raises(exports.InputError, match="shape"):
        exports.write_posterior_grid_csv(
            np.zeros((2, 2)), ["a"], {"std_m": np.zeros((3, 1))}, io.StringIO()
        )
    with pytest.raises(exports.InputError, match="unknown field"):
        exports.write_posterior_grid_csv(
            np.zeros((2, 2)), ["a"], {"var": np.zeros((2, 1))}, io.StringIO()
        )


def test_csv_files_carry_the_caution_and_sensible_precision(rows, tmp_path):
    buf = io.StringIO()
    exports.write_schedule_csv(rows, buf)
    caution_line(buf.getvalue())
    grid = io.StringIO()
    xy = np.array([[530_002.123456, 180_002.987654]])
    exports.write_posterior_grid_csv(xy, ["Made ground"], grid_fields(1, 1), grid)
    caution_line(grid.getvalue())
    [row] = list(csv.DictReader(data_lines(grid.getvalue())))
    assert (row["x"], row["y"]) == ("530002.12", "180002.99")  # coordinates to the centimetre


def test_geojson_numbers_are_rounded_to_the_centimetre(rows):
    doc = exports.write_schedule_geojson(rows, None)
    props = doc["features"][0]["properties"]
    assert props["depth_m"] == 9.12 and props["x"] == round(rows[0]["x"], 2)
    assert doc["features"][0]["geometry"]["coordinates"] == [
        round(rows[0]["x"], 2),
        round(rows[0]["y"], 2),
    ]
    for key in ("x", "y", "depth_m", "cost"):
        text = repr(props[key])
        assert len(text.split(".")[-1]) <= 2, (key, text)
