"""`probewise import-probes`, `import-gis` and `export` through the CLI entry point.

Bad files and arguments must exit 2 with one line on stderr and write nothing.
"""

from __future__ import annotations

import json
import zipfile

import geopandas
import pytest
from caution_check import assert_caution
from csv_helpers import caution_line, data_lines
from io_builders import TINY_EXPECTED, TINY_MAPPING, ags4_text, gpkg_description, placed_model
from pyproj import Transformer
from shapely.geometry import Polygon, box, shape

from probewise.cli import main
from probewise.io.model_file import load_model_file


@pytest.fixture
def model_path(tiny_model, tmp_path):
    path = tmp_path / "model.json"
    path.write_text(json.dumps(tiny_model))
    return path


@pytest.fixture
def placed_path(tiny_model, tmp_path):
    path = tmp_path / "placed.json"
    path.write_text(json.dumps(placed_model(tiny_model)))
    return path


def one_line_error(capsys) -> str:
    err = capsys.readouterr().err
    assert err.count("\n") == 1, err
    return err.strip()


def mapping_args() -> list[str]:
    out = []
    for code, unit in TINY_MAPPING.items():
        out += ["--mapping", f"{code}={unit}"]
    return out + ["--method-for", "CP=BH", "--method-for", "TP=BH"]


# ------------------------------------------------------------------------------ import-probes


def test_import_probes_csv(model_path, tmp_path, capsys):
    data = tmp_path / "old.csv"
    data.write_text("id,method,x,y,final_depth_m,base:Made ground\nOLD1,BH,40,90,3,0.9\n")
    out = tmp_path / "out.json"
    assert main(["import-probes", str(model_path), str(data), "-o", str(out)]) == 0
    model = load_model_file(out)
    assert [p["id"] for p in model["existing"]] == ["HBH1", "HBH2", "OLD1"]
    assert "imported 1 probe" in capsys.readouterr().out


def test_import_probes_csv_preview_writes_nothing(model_path, tmp_path, capsys):
    data = tmp_path / "old.csv"
    data.write_text("id,method,x,y,final_depth_m,base:Made ground,note\nOLD1,BH,40,90,3,0.9,x\n")
    out = tmp_path / "out.json"
    assert main(["import-probes", str(model_path), str(data), "--preview", "-o", str(out)]) == 0
    text = capsys.readouterr().out
    assert "wide layout, 1 data row" in text and "ignored" in text and "OLD1" in text
    assert not out.exists()


def test_import_probes_bad_cell_exits_2_and_writes_nothing(model_path, tmp_path, capsys):
    data = tmp_path / "old.csv"
    data.write_text("id,method,x,y,final_depth_m\nOLD1,BH,40,90,abc\n")
    out = tmp_path / "out.json"
    assert main(["import-probes", str(model_path), str(data), "-o", str(out)]) == 2
    captured = capsys.readouterr()
    assert "old.csv row 2, column final_depth_m: 'abc' is not a number" in captured.out
    assert captured.err.strip().startswith("old.csv: 1 row(s) or location(s) break")
    assert not out.exists()


def test_import_probes_outside_site_needs_consent(model_path, tmp_path, capsys):
    data = tmp_path / "old.csv"
    data.write_text("id,method,x,y,final_depth_m\nIN1,BH,40,90,3\nFAR1,BH,900,900,3\n")
    out = tmp_path / "out.json"
    assert main(["import-probes", str(model_path), str(data), "-o", str(out)]) == 2
    assert "outside the site: FAR1" in one_line_error(capsys)
    assert not out.exists()
    args = ["import-probes", str(model_path), str(data), "--leave-outside", "-o", str(out)]
    assert main(args) == 0
    assert "left out, outside the site: FAR1" in capsys.readouterr().out
    assert [p["id"] for p in load_model_file(out)["existing"]][-1] == "IN1"


def test_import_probes_ags4_needs_mapping(model_path, tmp_path, capsys):
    data = tmp_path / "gi.ags"
    data.write_text(ags4_text(), newline="")
    out = tmp_path / "out.json"
    assert main(["import-probes", str(model_path), str(data), "-o", str(out)]) == 2
    captured = capsys.readouterr()
    assert "code" in captured.out and "MDST" in captured.out and "?" in captured.out
    assert captured.err.startswith("--mapping: no unit for geology code(s)")
    assert not out.exists()


def test_import_probes_ags4_with_mapping(model_path, tmp_path, capsys):
    """Acceptance (CLI): 5 AGS4 locations import as 5 probes with the mapped depths."""
    data = tmp_path / "gi.ags"
    data.write_text(ags4_text(), newline="")
    out = tmp_path / "out.json"
    args = ["import-probes", str(model_path), str(data), *mapping_args(), "-o", str(out)]
    assert main(args) == 0
    model = load_model_file(out)
    new = {p["id"]: p["observed"] for p in model["existing"][2:]}
    assert new == TINY_EXPECTED
    assert "imported 5 probe(s)" in capsys.readouterr().out


def test_import_probes_ags4_mapping_file_and_replace(model_path, tmp_path):
    data = tmp_path / "gi.ags"
    data.write_text(ags4_text(), newline="")
    mapping = tmp_path / "map.json"
    mapping.write_text(json.dumps(TINY_MAPPING))
    out = tmp_path / "out.json"
    args = [
        "import-probes",
        str(model_path),
        str(data),
        "--mapping-file",
        str(mapping),
        "--default-method",
        "BH",
        "--replace",
        "-o",
        str(out),
    ]
    assert main(args) == 0
    assert len(load_model_file(out)["existing"]) == 5


def test_import_probes_ags4_missing_geol(model_path, tmp_path, capsys):
    data = tmp_path / "gi.ags"
    data.write_text(ags4_text(with_geol=False), newline="")
    out = tmp_path / "out.json"
    assert main(["import-probes", str(model_path), str(data), "-o", str(out)]) == 2
    assert one_line_error(capsys).startswith("gi.ags: has no GEOL group")
    assert not out.exists()


def test_import_probes_bad_arguments(model_path, tmp_path, capsys):
    out = tmp_path / "out.json"
    assert main(["import-probes", str(model_path), str(tmp_path / "no.csv"), "-o", str(out)]) == 2
    assert "file not found" in one_line_error(capsys)
    assert main(["import-probes", str(model_path), str(tmp_path / "x.doc"), "-o", str(out)]) == 2
    assert one_line_error(capsys).startswith("--format: cannot tell")
    data = tmp_path / "gi.ags"
    data.write_text(ags4_text(), newline="")
    assert (
        main(["import-probes", str(model_path), str(data), "--mapping", "MG", "-o", str(out)]) == 2
    )
    assert one_line_error(capsys).startswith("--mapping: expected KEY=VALUE")


# ------------------------------------------------------------------------------ import-gis


def test_import_gis_geographic_outline(placed_path, tmp_path, capsys):
    model = load_model_file(placed_path)
    x0, y0, x1, y1 = shape(model["site"]).bounds
    to_wgs = Transformer.from_crs("EPSG:27700", "EPSG:4326", always_xy=True)
    lons, lats = to_wgs.transform([x0, x1], [y0, y1])
    outline = box(lons[0] - 0.0005, lats[0] - 0.0005, lons[1] + 0.0005, lats[1] + 0.0005)
    gpkg = tmp_path / "site.gpkg"
    geopandas.GeoDataFrame(geometry=[outline], crs="EPSG:4326").to_file(gpkg, layer="outline")
    assert main(["import-gis", str(placed_path), str(gpkg), "--list-layers"]) == 0
    assert capsys.readouterr().out.split() == ["outline"]
    out = tmp_path / "out.json"
    assert main(["import-gis", str(placed_path), str(gpkg), "--role", "site", "-o", str(out)]) == 0
    to_bng = Transformer.from_crs("EPSG:4326", "EPSG:27700", always_xy=True)
    xs, ys = to_bng.transform(*zip(*outline.exterior.coords, strict=True))
    want = Polygon(list(zip(xs, ys, strict=True))).area
    assert shape(load_model_file(out)["site"]).area == pytest.approx(want, rel=1e-6)


def test_import_gis_geographic_into_local_grid_refused(model_path, tmp_path, capsys):
    path = tmp_path / "site.geojson"
    path.write_text(
        json.dumps(
            {
                "type": "FeatureCollection",
                "features": [
                    {
                        "type": "Feature",
                        "properties": {},
                        "geometry": box(-1.0, 52.0, -0.99, 52.01).__geo_interface__,
                    }
                ],
            }
        )
    )
    out = tmp_path / "out.json"
    assert main(["import-gis", str(model_path), str(path), "--role", "site", "-o", str(out)]) == 2
    assert "geographic CRS" in one_line_error(capsys)
    assert not out.exists()


def test_import_gis_zipped_exclusions_and_bad_zip(placed_path, tmp_path, capsys):
    folder = tmp_path / "shp"
    folder.mkdir()
    x0, y0 = 530_000, 180_000
    frame = geopandas.GeoDataFrame(
        {"name": ["Pylon base"]},
        geometry=[box(x0 + 10, y0 + 10, x0 + 20, y0 + 20)],
        crs="EPSG:27700",
    )
    frame.to_file(folder / "excl.shp")
    zpath = tmp_path / "excl.zip"
    with zipfile.ZipFile(zpath, "w") as zf:
        for p in folder.iterdir():
            zf.write(p, arcname=p.name)
    out = tmp_path / "out.json"
    args = ["import-gis", str(placed_path), str(zpath), "--role", "exclusions", "-o", str(out)]
    assert main(args) == 0
    names = [e["name"] for e in load_model_file(out)["exclusions"]]
    assert names == ["Live gas main easement", "Pylon base"]
    capsys.readouterr()
    evil = tmp_path / "evil.zip"
    with zipfile.ZipFile(evil, "w") as zf:
        zf.writestr("../../x.shp", b"")
    out2 = tmp_path / "out2.json"
    args = ["import-gis", str(placed_path), str(evil), "--role", "exclusions", "-o", str(out2)]
    assert main(args) == 2
    assert "escaping the folder" in one_line_error(capsys)
    assert not out2.exists()


def test_import_gis_needs_role_and_output(placed_path, tmp_path, capsys):
    assert main(["import-gis", str(placed_path), str(tmp_path / "a.gpkg"), "-o", "x.json"]) == 2
    assert one_line_error(capsys).startswith("--role:")
    assert main(["import-gis", str(placed_path), str(tmp_path / "a.gpkg"), "--role", "site"]) == 2
    assert one_line_error(capsys).startswith("-o:")


# ------------------------------------------------------------------------------ export


def test_export_schedule_gpkg_opens_with_crs_and_every_probe(placed_path, tmp_path, capsys):
    """Acceptance: the schedule GeoPackage opens in geopandas with the project CRS and every
    probe of the layout."""
    model = load_model_file(placed_path)
    layout = model["layouts"][1]
    out = tmp_path / "schedule.gpkg"
    args = [
        "export",
        str(placed_path),
        "--what",
        "schedule",
        "--layout",
        layout["name"],
        "-o",
        str(out),
    ]
    assert main(args) == 0
    assert_caution(capsys.readouterr().out)
    assert_caution(gpkg_description(out, "schedule"))  # the file carries it too
    frame = geopandas.read_file(out, layer="schedule")
    assert frame.crs.to_epsg() == 27700
    assert list(frame["id"]) == [p["id"] for p in layout["probes"]]
    assert list(zip(frame.geometry.x, frame.geometry.y, strict=True)) == [
        (p["x"], p["y"]) for p in layout["probes"]
    ]
    assert (frame["depth_m"] > 0).all()
    assert frame["observes"].str.contains("Made ground").all()


def test_export_schedule_csv_and_geojson(placed_path, tmp_path):
    name = "Four boreholes"
    csv_out = tmp_path / "s.csv"
    assert (
        main(
            ["export", str(placed_path), "--what", "schedule", "--layout", name, "-o", str(csv_out)]
        )
        == 0
    )
    caution_line(csv_out.read_text())
    assert data_lines(csv_out.read_text())[0].startswith("id,method,method_name")
    gj = tmp_path / "s.geojson"
    assert (
        main(["export", str(placed_path), "--what", "schedule", "--layout", name, "-o", str(gj)])
        == 0
    )
    frame = geopandas.read_file(gj)
    assert frame.crs.to_epsg() == 4326 and len(frame) == 4


def test_export_posterior_grid(placed_path, tmp_path, capsys):
    csv_out = tmp_path / "grid.csv"
    assert main(["export", str(placed_path), "--what", "posterior", "-o", str(csv_out)]) == 0
    assert_caution(capsys.readouterr().out)
    caution_line(csv_out.read_text())
    lines = data_lines(csv_out.read_text())
    assert lines[0] == "x,y,boundary,mean_m,std_m,p05_m,p50_m,p95_m,width90_m"
    gpkg = tmp_path / "grid.gpkg"
    assert (
        main(
            [
                "export",
                str(placed_path),
                "--what",
                "posterior",
                "--layout",
                "Four boreholes",
                "-o",
                str(gpkg),
            ]
        )
        == 0
    )
    assert_caution(gpkg_description(gpkg, "base_of_Alluvial_clay"))
    frame = geopandas.read_file(gpkg, layer="base_of_Alluvial_clay")
    assert frame.crs.to_epsg() == 27700
    assert len(frame) * 3 == len(lines) - 1  # one CSV row per cell and boundary
    assert ((frame["p05_m"] <= frame["p50_m"]) & (frame["p50_m"] <= frame["p95_m"])).all()


def test_export_model_round_trip(model_path, tmp_path):
    out = tmp_path / "copy.json"
    assert main(["export", str(model_path), "--what", "model", "-o", str(out)]) == 0
    assert load_model_file(out) == load_model_file(model_path)


def test_export_bad_arguments(model_path, tmp_path, capsys):
    out = tmp_path / "x.geojson"
    assert main(["export", str(model_path), "--what", "posterior", "-o", str(out)]) == 2
    assert one_line_error(capsys) == "--format: posterior exports as csv, gpkg, not geojson"
    assert (
        main(
            [
                "export",
                str(model_path),
                "--what",
                "schedule",
                "--layout",
                "Nope",
                "-o",
                str(tmp_path / "s.csv"),
            ]
        )
        == 2
    )
    assert one_line_error(capsys).startswith("--layout: no layout named 'Nope'")
    assert (
        main(["export", str(model_path), "--what", "schedule", "-o", str(tmp_path / "s.csv")]) == 2
    )
    assert one_line_error(capsys).startswith("--layout:")
    assert not (tmp_path / "s.csv").exists() and not out.exists()


def test_import_gis_set_crs_on_a_site_grid_project(tiny_model, tmp_path, capsys):
    bare = {
        **tiny_model,
        "existing": [],
        "layouts": [],
        "zones": [],
        "areas_of_interest": [],
        "exclusions": [],
        "bounds": [],
    }
    model_path = tmp_path / "bare.json"
    model_path.write_text(json.dumps(bare))
    outline = box(-0.13, 51.50, -0.125, 51.503)  # invented plot in lon/lat
    path = tmp_path / "site.geojson"
    path.write_text(
        json.dumps(
            {
                "type": "FeatureCollection",
                "features": [
                    {"type": "Feature", "properties": {}, "geometry": outline.__geo_interface__}
                ],
            }
        )
    )
    out = tmp_path / "out.json"
    args = [
        "import-gis",
        str(model_path),
        str(path),
        "--role",
        "site",
        "--set-crs",
        "epsg:27700",
        "-o",
        str(out),
    ]
    assert main(args) == 0
    assert "project CRS set to EPSG:27700" in capsys.readouterr().out
    model = load_model_file(out)
    assert model["crs"] == "EPSG:27700"
    to_bng = Transformer.from_crs("EPSG:4326", "EPSG:27700", always_xy=True)
    xs, ys = to_bng.transform(*zip(*outline.exterior.coords, strict=True))
    want = Polygon(list(zip(xs, ys, strict=True))).area
    assert shape(model["site"]).area == pytest.approx(want, rel=1e-6)
