"""Site polygons in from GIS files (server/io/geo_io.py).

Files are written in the test by geopandas (GeoPackage, Shapefile), zipfile and json; areas
after reprojection are checked against pyproj's own Transformer applied to the same vertices.
"""

from __future__ import annotations

import json
import stat
import tempfile
import zipfile

import geopandas
import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from io_builders import BNG_OFFSET, placed_model
from pyproj import Transformer
from shapely.geometry import LineString, Polygon, box, mapping, shape

from probewise.errors import InputError
from probewise.io import geo_io
from probewise.io.geo_io import apply_polygons, check_project_crs, list_layers, read_polygons
from probewise.io.model_file import validate_model

# Frames written without a CRS on purpose (site-grid data) make pyogrio warn.
pytestmark = pytest.mark.filterwarnings("ignore:'crs' was not provided")

TO_BNG = Transformer.from_crs("EPSG:4326", "EPSG:27700", always_xy=True)
TO_WGS84 = Transformer.from_crs("EPSG:27700", "EPSG:4326", always_xy=True)


def lonlat_box_around(model: dict, margin_deg: float = 0.0005) -> Polygon:
    """A lon/lat rectangle enclosing the model's site (so its probes stay inside)."""
    x0, y0, x1, y1 = shape(model["site"]).bounds
    lons, lats = TO_WGS84.transform([x0, x1, x0, x1], [y0, y0, y1, y1])
    return box(
        min(lons) - margin_deg,
        min(lats) - margin_deg,
        max(lons) + margin_deg,
        max(lats) + margin_deg,
    )


def area_by_pyproj(poly_lonlat: Polygon) -> float:
    """Area (m2) of the polygon whose vertices pyproj's Transformer moved to EPSG:27700."""
    xs, ys = TO_BNG.transform(*zip(*poly_lonlat.exterior.coords, strict=True))
    return Polygon(list(zip(xs, ys, strict=True))).area


def write_geojson(path, features: list[dict], crs: str | None = None) -> None:
    doc = {"type": "FeatureCollection", "features": features}
    if crs:
        code = crs.split(":")[1]
        doc["crs"] = {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{code}"}}
    path.write_text(json.dumps(doc))


def feature(geom, **props) -> dict:
    return {"type": "Feature", "geometry": mapping(geom), "properties": props}


# ------------------------------------------------------------------------------ acceptance


def test_geographic_gpkg_outline_has_pyproj_area_in_project_crs(tiny_model, tmp_path):
    """Acceptance: a GeoPackage outline in EPSG:4326 imported into an EPSG:27700 project
    has the area of the same vertices transformed by pyproj.Transformer (to 1e-6 relative)."""
    model = placed_model(tiny_model)
    outline = lonlat_box_around(model)
    path = tmp_path / "site.gpkg"
    geopandas.GeoDataFrame({"name": ["Plot"]}, geometry=[outline], crs="EPSG:4326").to_file(
        path, layer="outline"
    )
    geopandas.GeoDataFrame({"name": ["Other"]}, geometry=[outline], crs="EPSG:4326").to_file(
        path, layer="other"
    )
    assert sorted(list_layers(path)) == ["other", "outline"]
    features = read_polygons(path, layer="outline", target_crs=model["crs"])
    assert features[0]["name"] == "Plot"
    updated = apply_polygons(model, "site", features)
    got = shape(updated["site"]).area
    assert got == pytest.approx(area_by_pyproj(outline), rel=1e-6)
    assert updated["crs"] == "EPSG:27700"
    validate_model(updated)
    assert model["site"] != updated["site"]  # a new dict; the input model is untouched


def test_gpkg_layer_must_be_chosen_when_several(tiny_model, tmp_path):
    path = tmp_path / "two.gpkg"
    for layer in ("a", "b"):
        geopandas.GeoDataFrame(geometry=[box(0, 0, 10, 10)]).to_file(path, layer=layer)
    with pytest.raises(InputError, match=r"has 2 layers \(a, b\); choose one"):
        read_polygons(path, target_crs=None)
    with pytest.raises(InputError) as err:
        read_polygons(path, layer="c", target_crs=None)
    assert err.value.field == "two.gpkg layer c"


@settings(
    max_examples=15, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    lon=st.floats(-2.5, 1.0),
    lat=st.floats(50.5, 54.0),
    w=st.floats(0.0005, 0.02),
    h=st.floats(0.0005, 0.02),
)
def test_reprojected_area_matches_pyproj_anywhere(tmp_path_factory, lon, lat, w, h):
    """Invariant over rectangles across England: area equals the pyproj-transformed area."""
    rect = box(lon, lat, lon + w, lat + h)
    path = tmp_path_factory.mktemp("g") / "r.geojson"
    write_geojson(path, [feature(rect, name="r")])
    got = read_polygons(path, target_crs="EPSG:27700")[0]["geometry"]
    assert shape(got).area == pytest.approx(area_by_pyproj(rect), rel=1e-6)


# ------------------------------------------------------------------------------ GeoJSON and CRS


def test_geojson_without_crs_is_wgs84(tiny_model, tmp_path):
    model = placed_model(tiny_model)
    outline = lonlat_box_around(model)
    path = tmp_path / "site.geojson"
    write_geojson(path, [feature(outline)])
    got = read_polygons(path, target_crs="EPSG:27700")
    assert got[0]["name"] == "site 1"  # no name column: layer name and feature number
    ring = got[0]["geometry"]["coordinates"][0]
    xs, ys = TO_BNG.transform(*zip(*outline.exterior.coords, strict=True))
    np.testing.assert_allclose(ring, np.column_stack([xs, ys]), rtol=0, atol=1e-6)
    # into a project on a local grid, degrees cannot be used
    with pytest.raises(InputError, match="geographic CRS.*set the project CRS"):
        read_polygons(path, target_crs=None)


def test_projected_data_into_local_grid_project_only_when_confirmed(tiny_model, tmp_path):
    path = tmp_path / "x.geojson"
    write_geojson(path, [feature(box(10, 10, 50, 50), name="Tank")], crs="EPSG:27700")
    with pytest.raises(
        InputError, match="project has no CRS.*confirm the coordinates are site-grid metres"
    ):
        read_polygons(path, target_crs=None)
    got = read_polygons(path, target_crs=None, assume_local=True)
    assert shape(got[0]["geometry"]).equals(box(10, 10, 50, 50))


def test_projected_to_other_projected_crs(tiny_model, tmp_path):
    # EPSG:27700 data into a UTM zone 30N project: compared with pyproj's direct transform
    path = tmp_path / "x.geojson"
    rect = box(530_000, 180_000, 530_200, 180_120)
    write_geojson(path, [feature(rect)], crs="EPSG:27700")
    got = shape(read_polygons(path, target_crs="EPSG:32630")[0]["geometry"])
    t = Transformer.from_crs("EPSG:27700", "EPSG:32630", always_xy=True)
    xs, ys = t.transform(*zip(*rect.exterior.coords, strict=True))
    assert got.area == pytest.approx(Polygon(list(zip(xs, ys, strict=True))).area, rel=1e-9)


def test_no_crs_file_needs_source_crs(tmp_path):
    path = tmp_path / "nocrs.gpkg"
    geopandas.GeoDataFrame(geometry=[box(530_000, 180_000, 530_100, 180_100)]).to_file(path)
    with pytest.raises(InputError, match="has no CRS; name the CRS of its coordinates"):
        read_polygons(path, target_crs="EPSG:27700")
    got = read_polygons(path, target_crs="EPSG:27700", source_crs_override="EPSG:27700")
    assert shape(got[0]["geometry"]).area == pytest.approx(10_000)
    # a project on a local grid takes data without a CRS as they are
    assert read_polygons(path, target_crs=None)[0]["geometry"] == got[0]["geometry"]


@pytest.mark.parametrize(
    ("crs", "words"),
    [
        ("EPSG:4326", "geographic"),
        ("EPSG:3857", "Web Mercator"),
        ("EPSG:2263", "not metres"),  # a US state plane in feet
        ("not a crs", "not a CRS"),
    ],
)
def test_unusable_project_crs_refused(tmp_path, crs, words):
    path = tmp_path / "x.geojson"
    write_geojson(path, [feature(box(0, 0, 0.01, 0.01))])
    with pytest.raises(InputError, match=words):
        read_polygons(path, target_crs=crs)
    with pytest.raises(InputError, match=words):
        check_project_crs(crs)


def test_check_project_crs_normalises():
    assert check_project_crs("epsg:27700") == "EPSG:27700"
    assert check_project_crs("+proj=utm +zone=30 +datum=WGS84 +units=m") == "EPSG:32630"


# ------------------------------------------------------------------------------ bad geometries


def test_self_intersecting_polygon_named_with_feature_and_repaired(tmp_path):
    bowtie = Polygon([(0, 0), (10, 10), (10, 0), (0, 10), (0, 0)])
    path = tmp_path / "zones.geojson"
    write_geojson(
        path, [feature(box(0, 0, 5, 5), name="ok"), feature(bowtie, name="bow")], crs="EPSG:27700"
    )
    with pytest.raises(InputError) as err:
        read_polygons(path, target_crs="EPSG:27700")
    assert err.value.field == "zones.geojson feature 2"
    assert "Self-intersection" in err.value.problem and "make_valid" in err.value.problem
    got = read_polygons(path, target_crs="EPSG:27700", repair=True)
    fixed = shape(got[1]["geometry"])
    assert fixed.is_valid and fixed.area == pytest.approx(50.0)  # two triangles of 25 m2
    assert fixed.equals(shapely.make_valid(bowtie))


def test_not_a_polygon_and_empty_refused(tmp_path):
    path = tmp_path / "mixed.geojson"
    write_geojson(path, [feature(box(0, 0, 1, 1)), feature(LineString([(0, 0), (5, 5)]))])
    with pytest.raises(InputError) as err:
        read_polygons(path, target_crs="EPSG:27700")
    assert err.value.field == "mixed.geojson feature 2"
    assert err.value.problem == "is a LineString, not a polygon"
    empty = tmp_path / "empty.geojson"
    write_geojson(empty, [])
    with pytest.raises(InputError, match="no features|no layer"):
        read_polygons(empty, target_crs="EPSG:27700")
    with pytest.raises(InputError, match="is empty"):
        read_polygons(b"", filename="up.geojson", target_crs=None)
    with pytest.raises(InputError, match="cannot be read as GeoJSON"):
        read_polygons(b"{not json", filename="up.geojson", target_crs=None)
    with pytest.raises(InputError, match="unknown file type"):
        read_polygons(b"abc", filename="site.dwg", target_crs=None)


def test_null_geometry_reported(tmp_path):
    path = tmp_path / "nullgeom.geojson"
    path.write_text(
        json.dumps(
            {
                "type": "FeatureCollection",
                "features": [{"type": "Feature", "geometry": None, "properties": {"name": "x"}}],
            }
        )
    )
    with pytest.raises(InputError, match="has no geometry") as err:
        read_polygons(path, target_crs="EPSG:27700")
    assert err.value.field == "nullgeom.geojson feature 1"


# ------------------------------------------------------------------------------ zipped Shapefile


def shapefile_zip(tmp_path, frame, name="exclusions") -> bytes:
    folder = tmp_path / "shp"
    folder.mkdir(exist_ok=True)
    frame.to_file(folder / f"{name}.shp")
    zpath = tmp_path / f"{name}.zip"
    with zipfile.ZipFile(zpath, "w", zipfile.ZIP_DEFLATED) as zf:
        for p in folder.iterdir():
            zf.write(p, arcname=f"{name}/{p.name}")
    return zpath.read_bytes()


def test_zipped_shapefile_round_trip_with_names(tiny_model, tmp_path):
    model = placed_model(tiny_model)
    dx, dy = BNG_OFFSET
    sheds = [box(dx + 20, dy + 90, dx + 40, dy + 110), box(dx + 60, dy + 5, dx + 70, dy + 15)]
    frame = geopandas.GeoDataFrame(
        {"LABEL": ["Shed A", "Shed B"]}, geometry=sheds, crs="EPSG:27700"
    )
    data = shapefile_zip(tmp_path, frame)
    assert list_layers(data, filename="exclusions.zip") == ["exclusions"]
    got = read_polygons(
        data, filename="exclusions.zip", target_crs="EPSG:27700", name_column="label"
    )
    assert [f["name"] for f in got] == ["Shed A", "Shed B"]
    for f, want in zip(got, sheds, strict=True):
        assert shape(f["geometry"]).equals(want)
    updated = apply_polygons(model, "exclusions", got, mode="append")
    names = [e["name"] for e in updated["exclusions"]]
    assert names == ["Live gas main easement", "Shed A", "Shed B"]
    validate_model(updated)


def test_zip_over_the_size_cap_refused(tmp_path):
    zpath = tmp_path / "bomb.zip"
    with zipfile.ZipFile(zpath, "w", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("site.shp", b"\0" * (geo_io.MAX_ZIP_BYTES + 1))
    assert zpath.stat().st_size < 1_000_000  # small on disk, large unpacked
    with pytest.raises(InputError, match="over the 50 MB limit"):
        read_polygons(zpath, target_crs=None)


def test_zip_with_too_many_files_refused(tmp_path):
    zpath = tmp_path / "many.zip"
    with zipfile.ZipFile(zpath, "w") as zf:
        for i in range(geo_io.MAX_ZIP_FILES + 1):
            zf.writestr(f"f{i}.txt", b"x")
    with pytest.raises(InputError, match="over the limit of 200"):
        read_polygons(zpath, target_crs=None)


@pytest.mark.parametrize(
    ("member", "words"),
    [
        ("../escape.shp", "escaping the folder"),
        ("a/../../escape.shp", "escaping the folder"),
        ("/etc/escape.shp", "absolute path"),
        ("C:/escape.shp", "absolute path"),
        ("..\\escape.shp", "escaping the folder"),
    ],
)
def test_zip_member_escaping_folder_refused(tmp_path, member, words):
    zpath = tmp_path / "evil.zip"
    with zipfile.ZipFile(zpath, "w") as zf:
        zf.writestr("ok.shp", b"")
        zf.writestr(member, b"bad")
    with pytest.raises(InputError, match=words) as err:
        read_polygons(zpath, target_crs=None)
    assert err.value.field == f"evil.zip member {member}"
    assert not (tmp_path / "escape.shp").exists()
    assert not (tmp_path.parent / "escape.shp").exists()


def test_zip_symlink_refused(tmp_path):
    zpath = tmp_path / "link.zip"
    with zipfile.ZipFile(zpath, "w") as zf:
        info = zipfile.ZipInfo("site.shp")
        info.external_attr = (stat.S_IFLNK | 0o777) << 16
        zf.writestr(info, "/etc/passwd")
    with pytest.raises(InputError, match="symbolic link"):
        read_polygons(zpath, target_crs=None)


def test_zip_without_shapefile_and_bad_zip(tmp_path):
    zpath = tmp_path / "none.zip"
    with zipfile.ZipFile(zpath, "w") as zf:
        zf.writestr("readme.txt", b"nothing here")
    with pytest.raises(InputError, match=r"holds no \.shp file"):
        read_polygons(zpath, target_crs=None)
    with pytest.raises(InputError, match="not a readable zip"):
        read_polygons(b"PK not really", filename="x.zip", target_crs=None)


# ------------------------------------------------------------------------------ attributes


def test_weight_column_for_areas_of_interest(tiny_model, tmp_path):
    path = tmp_path / "aoi.gpkg"
    frame = geopandas.GeoDataFrame(
        {"title": ["Culvert", "Pad"], "w": [3.0, 1.5]},
        geometry=[box(0, 50, 200, 70), box(20, 20, 60, 40)],
    )
    frame.to_file(path)
    got = read_polygons(path, target_crs=None, name_column="title", weight_column="w")
    assert [(f["name"], f["weight"]) for f in got] == [("Culvert", 3.0), ("Pad", 1.5)]
    updated = apply_polygons(tiny_model, "areas", got, mode="replace")
    assert [a["weight"] for a in updated["areas_of_interest"]] == [3.0, 1.5]
    validate_model(updated)
    with pytest.raises(InputError) as err:
        read_polygons(path, target_crs=None, weight_column="nope")
    assert err.value.field == "aoi.gpkg column nope" and "title, w" in err.value.problem


@pytest.mark.parametrize(
    ("value", "words"),
    [("high", "'high' is not a number"), ("0", "not a weight > 0"), ("", "empty")],
)
def test_bad_weight_named_by_feature_and_column(tmp_path, value, words):
    path = tmp_path / "aoi.geojson"
    write_geojson(
        path, [feature(box(0, 0, 5, 5), w="2"), feature(box(5, 5, 9, 9), w=value)], crs="EPSG:27700"
    )
    with pytest.raises(InputError, match=words) as err:
        read_polygons(path, target_crs=None, assume_local=True, weight_column="w")
    assert err.value.field == "aoi.geojson feature 2, column w"


def test_zones_from_multipolygon_split_and_named(tiny_model, tmp_path):
    multi = shapely.MultiPolygon([box(0, 0, 40, 40), box(60, 0, 80, 40)])
    path = tmp_path / "zones.geojson"
    write_geojson(path, [feature(multi, name="Old channel")], crs="EPSG:27700")
    got = read_polygons(path, target_crs=None, assume_local=True)
    updated = apply_polygons(tiny_model, "zones", got, mode="append")
    names = [z["name"] for z in updated["zones"]]
    # the existing zone is kept; the new parts are named apart from it and from each other
    assert names == ["Old channel", "Old channel (part 1)", "Old channel (part 2)"]
    assert updated["zones"][1]["units"] == {}
    validate_model(updated)
    again = apply_polygons(updated, "zones", got, mode="append")
    assert [z["name"] for z in again["zones"]][3:] == [
        "Old channel (part 1) (2)",
        "Old channel (part 2) (2)",
    ]


def test_site_union_of_features_and_bad_role(tiny_model):
    feats = [
        {"name": "a", "geometry": mapping(box(0, 0, 120, 120))},
        {"name": "b", "geometry": mapping(box(100, 0, 200, 120))},
    ]
    updated = apply_polygons(tiny_model, "site", feats)
    assert shape(updated["site"]).equals(box(0, 0, 200, 120))
    with pytest.raises(InputError, match="not one of site"):
        apply_polygons(tiny_model, "roads", feats)
    with pytest.raises(InputError, match="no polygons"):
        apply_polygons(tiny_model, "site", [])


def test_site_that_leaves_probes_outside_is_refused(tiny_model):
    small = [{"name": "a", "geometry": mapping(box(0, 0, 50, 50))}]
    with pytest.raises(InputError, match="outside the site"):
        apply_polygons(tiny_model, "site", small)


def test_unreadable_upload_message_names_the_users_file_only():
    """The reader's message must not show the private temporary folder or file name."""
    with pytest.raises(InputError) as err:
        read_polygons(b"{not json", filename="plan.geojson", target_crs=None, assume_local=True)
    text = str(err.value)
    assert text.startswith("plan.geojson: cannot be read as GeoJSON")
    assert "upload." not in text and tempfile.gettempdir() not in text
