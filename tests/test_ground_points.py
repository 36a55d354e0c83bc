"""Ground-level points in from CSV and GIS point files, through the readers and
`probewise import-gis --role ground-level`: hand values back, bad input named, nothing written."""

from __future__ import annotations

import json
import zipfile

import geopandas
import numpy as np
import pytest
from io_builders import placed_model
from pyproj import Transformer
from shapely.geometry import Point

from probewise.app.levels import ground_levels
from probewise.app.project import core_project
from probewise.cli import main
from probewise.errors import InputError
from probewise.io.ground_points import read_points_csv, read_points_gis
from probewise.io.model_file import load_model_file

# Hand values: four corners of the tiny site with levels on the plane GL = 2 + 0.02 x + 0.01 y.
HAND = [(0.0, 0.0, 2.0), (200.0, 0.0, 6.0), (0.0, 120.0, 3.2), (200.0, 120.0, 7.2)]


def csv_text(header: str = "x,y,level", sep: str = ",", rows=HAND) -> str:
    lines = [header] + [sep.join(f"{v:g}" for v in row) for row in rows]
    return "\n".join(lines) + "\n"


def as_tuples(points: list[dict]) -> list[tuple]:
    return [(p["x"], p["y"], p["level_m"]) for p in points]


@pytest.mark.parametrize(
    "header",
    ["x,y,level", "Easting,Northing,Level (mOD)", "E,N,GL", "X,Y,Z", "east,north,Reduced level"],
)
def test_csv_headers_read_back_the_hand_values(header):
    assert as_tuples(read_points_csv(csv_text(header), "gl.csv")) == HAND


def test_csv_semicolon_and_decimal_comma():
    text = "x;y;level_m\n0;0;2,0\n200;0;6,0\n0;120;3,2\n"
    assert as_tuples(read_points_csv(text, "gl.csv")) == HAND[:3]


@pytest.mark.parametrize(
    ("text", "field", "words"),
    [
        ("x,y,level\n0,0,1\n10,0,2\n", "gl.csv", "at least 3 points"),
        ("x,y,level\n0,0,1\n10,10,2\n20,20,3\n", "gl.csv", "one line"),
        ("x,y,level\n0,0,1\n10,0,high\n0,10,3\n", "gl.csv row 3, column level", "number"),
        ("x,y,level\n0,0,1\n10,0,2\n0,10,\n", "gl.csv row 4, column level", "empty"),
        (
            "x,y,level\n0,0,1\n10,0,2\n0,0,3\n",
            "gl.csv row 4",
            "repeats the position of gl.csv row 2",
        ),  # noqa: E501
        ("x,y,height\n0,0,1\n10,0,2\n0,10,3\n", "gl.csv header", "no level column"),
    ],
)
def test_csv_bad_input_names_the_field(text, field, words):
    with pytest.raises(InputError) as caught:
        read_points_csv(text, "gl.csv")
    assert caught.value.field == field and words in caught.value.problem


def test_geojson_points_reprojected_into_the_project_crs(tmp_path):
    # Points given in WGS 84; the reference is pyproj's own transformation to EPSG:27700.
    lonlat = [(-1.50, 52.40), (-1.49, 52.40), (-1.50, 52.41)]
    doc = {
        "type": "FeatureCollection",
        "features": [
            {
                "type": "Feature",
                "geometry": {"type": "Point", "coordinates": [lon, lat]},
                "properties": {"name": f"S{i}", "Level": 10.0 + i},
            }
            for i, (lon, lat) in enumerate(lonlat)
        ],
    }
    path = tmp_path / "survey.geojson"
    path.write_text(json.dumps(doc))
    points = read_points_gis(path, target_crs="EPSG:27700")
    to_bng = Transformer.from_crs("EPSG:4326", "EPSG:27700", always_xy=True)
    for p, (lon, lat), level in zip(points, lonlat, (10.0, 11.0, 12.0), strict=True):
        x, y = to_bng.transform(lon, lat)
        assert (p["x"], p["y"]) == pytest.approx((x, y), abs=1e-6)
        assert p["level_m"] == level


def gpkg_of(tmp_path, rows, column="rl", crs=None):
    frame = geopandas.GeoDataFrame(
        {column: [r[2] for r in rows]}, geometry=[Point(r[0], r[1]) for r in rows], crs=crs
    )
    path = tmp_path / "survey.gpkg"
    frame.to_file(path, layer="levels", driver="GPKG")
    return path


def test_gpkg_and_shapefile_zip_round_trip(tmp_path):
    path = gpkg_of(tmp_path, HAND, crs="EPSG:27700")
    assert as_tuples(read_points_gis(path, target_crs="EPSG:27700")) == HAND
    frame = geopandas.read_file(path)
    frame.to_file(tmp_path / "levels.shp")
    archive = tmp_path / "levels.zip"
    with zipfile.ZipFile(archive, "w") as z:
        for part in tmp_path.glob("levels.*"):
            if part.suffix != ".zip":
                z.write(part, part.name)
    assert as_tuples(read_points_gis(archive, target_crs="EPSG:27700")) == HAND


def test_gis_bad_input(tmp_path):
    path = gpkg_of(tmp_path, [(0, 0, 1.0), (10, 0, 2.0), (10, 0, 3.0)], crs="EPSG:27700")
    with pytest.raises(InputError, match="repeats the position"):
        read_points_gis(path, target_crs="EPSG:27700")
    with pytest.raises(InputError) as caught:
        read_points_gis(path, target_crs="EPSG:27700", level_column="height")
    assert caught.value.field == "survey.gpkg column height"


def test_cli_import_ground_level_then_the_surface_at_a_point(tiny_model, tmp_path, capsys):
    model_path = tmp_path / "model.json"
    model_path.write_text(json.dumps(tiny_model))
    data = tmp_path / "gl.csv"
    data.write_text(csv_text("Easting,Northing,Level"))
    out = tmp_path / "out.json"
    code = main(
        ["import-gis", str(model_path), str(data), "--role", "ground-level", "--datum", "mOD",
         "-o", str(out)]
    )  # fmt: skip
    assert code == 0, capsys.readouterr().err
    model = load_model_file(out)
    assert model["ground_level"]["datum"] == "mOD"
    assert as_tuples(model["ground_level"]["points"]) == HAND
    # by hand: at (50, 60) the plane gives 2 + 1.0 + 0.6 = 3.6 m
    gl = ground_levels(core_project(model), np.array([[50.0, 60.0]]))
    assert gl[0] == pytest.approx(3.6, abs=1e-9)


def test_cli_bad_points_exit_2_and_write_nothing(tiny_model, tmp_path, capsys):
    model_path = tmp_path / "model.json"
    model_path.write_text(json.dumps(placed_model(tiny_model)))
    data = tmp_path / "gl.csv"
    data.write_text("x,y,level\n0,0,1\n10,10,2\n20,20,3\n")
    out = tmp_path / "out.json"
    args = ["import-gis", str(model_path), str(data), "--role", "ground-level", "-o", str(out)]
    code = main(args)
    assert code == 2 and not out.exists()
    assert "gl.csv: all points lie on one line" in capsys.readouterr().err
