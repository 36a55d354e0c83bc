"""`probewise schedule`: the printable schedule, its JSON, the probe list as CSV, GeoJSON and
GeoPackage, and bad input (exit 2, one line naming the field); plus ``probewise.app.schedule``
itself against the core's numbers."""

from __future__ import annotations

import csv
import json
import subprocess
from datetime import date
from pathlib import Path

import geopandas
import pytest
from caution_check import assert_caution
from cli_helpers import run_cli
from csv_helpers import data_lines
from io_builders import gpkg_description
from pyproj import Transformer

from probewise.app.schedule import build_schedule
from probewise.app.to_core import to_core
from probewise.core.evaluate import GridEvaluator, evaluate_project, with_pareto

ROOT = Path(__file__).resolve().parents[1]
TINY = ROOT / "tests" / "data" / "tiny-model.json"
DEMO = ROOT / "seed_data" / "demo-project.json"
LEAN = "Lean: CPTu only"
JSON_KEYS = {
    "project",
    "layout",
    "currency",
    "crs",
    "date",
    "probes",
    "by_method",
    "totals",
    "main_boundary",
    "programme",
    "instructions",
    "justification",
    "caution",
}
PROBE_KEYS = {"id", "method", "x", "y", "depth_m", "observes"}  # as evaluate --json
TOTAL_KEYS = {"probes", "metres", "cost", "duration_days", "mobilisation"}


def cli(*args: str) -> subprocess.CompletedProcess:
    return run_cli("schedule", *args, timeout=180)


def model_of(path: Path) -> dict:
    return json.loads(path.read_text())


def layout_doc(model: dict, name: str) -> dict:
    return next(lay for lay in model["layouts"] if lay["name"] == name)


def best_value(model: dict) -> str:
    """The default option as the web page picks it: Pareto-efficient, most gain per cost."""
    evaluation = evaluate_project(to_core(model))
    return max((r for r in evaluation.layouts if r.pareto), key=lambda r: r.gain_per_cost).name


def one_line_error(run: subprocess.CompletedProcess, field: str) -> str:
    assert run.returncode == 2, run.stdout + run.stderr
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1, run.stderr
    assert lines[0].startswith(f"{field}: ")
    assert "Traceback" not in run.stderr and run.stdout == ""
    return lines[0]


@pytest.fixture(scope="module")
def tiny_json() -> dict:
    run = cli(str(TINY), "--format", "json")
    assert run.returncode == 0, run.stderr
    return json.loads(run.stdout)


# ---------------------------------------------------------------- text


def test_text_of_the_tiny_model_lists_every_probe_and_the_caution():
    run = cli(str(TINY))
    assert run.returncode == 0, run.stderr
    model = model_of(TINY)
    chosen = best_value(model)
    text = run.stdout
    assert model["name"] in text and chosen in text
    assert date.today().isoformat() in text
    for probe in layout_doc(model, chosen)["probes"]:
        assert probe["id"] in text
    assert_caution(text)  # wrapped onto lines
    for heading in ("PROBES", "COST AND DURATION BY METHOD", "TOTALS", "WHY THIS OPTION"):
        assert heading in text
    assert "local site grid" in text


def test_text_of_a_named_demo_layout():
    run = cli(str(DEMO), "--layout", LEAN)
    assert run.returncode == 0, run.stderr
    flat = " ".join(run.stdout.split())
    for probe in layout_doc(model_of(DEMO), LEAN)["probes"]:
        assert probe["id"] in run.stdout
    assert f"Layout: {LEAN}" in flat
    assert "EPSG:27700" in flat
    assert "Pareto-efficient" in flat and "bits" in flat
    assert_caution(flat)


def test_text_written_to_a_file(tmp_path):
    out = tmp_path / "schedule.txt"
    run = cli(str(TINY), "-o", str(out))
    assert run.returncode == 0, run.stderr
    assert str(out) in run.stdout
    assert "SCOPING SCHEDULE" in out.read_text()


# ---------------------------------------------------------------- json


def test_json_has_the_fields(tiny_json):
    doc = tiny_json
    model = model_of(TINY)
    assert set(doc) == JSON_KEYS
    assert doc["project"] == model["name"] and doc["currency"] == "GBP" and doc["crs"] is None
    assert doc["layout"] == best_value(model)
    assert_caution(doc["caution"])
    assert doc["justification"] and all(isinstance(s, str) and s for s in doc["justification"])
    assert doc["main_boundary"] == "Alluvial clay"  # the heaviest boundary of interest
    ids = [p["id"] for p in layout_doc(model, doc["layout"])["probes"]]
    assert [p["id"] for p in doc["probes"]] == ids
    for probe in doc["probes"]:
        assert set(probe) >= PROBE_KEYS
        assert isinstance(probe["refuses"], bool)
    assert set(doc["totals"]) >= TOTAL_KEYS


def test_json_numbers_match_the_core(tiny_json):
    doc = tiny_json
    model = model_of(TINY)
    result = next(r for r in evaluate_project(to_core(model)).layouts if r.name == doc["layout"])
    totals = doc["totals"]
    assert totals["cost"] == pytest.approx(result.cost, rel=1e-12)
    assert totals["metres"] == pytest.approx(result.metres, rel=1e-12)
    assert totals["duration_days"] == pytest.approx(result.duration_days, rel=1e-12)
    assert totals["probes"] == len(result.plans)
    assert [p["depth_m"] for p in doc["probes"]] == pytest.approx(
        [plan.depth_m for plan in result.plans]
    )
    # docs/model.md "Numbers reported": mobilisation once per method used + per location + per
    # metre x planned depth; each method row adds up, and the rows add up to the total.
    methods = {m["id"]: m for m in model["methods"]}
    by_method = doc["by_method"]
    assert sum(m["cost"] for m in by_method) == pytest.approx(totals["cost"])
    assert sum(m["mobilisation"] for m in by_method) == pytest.approx(totals["mobilisation"])
    for row in by_method:
        cost = methods[row["id"]]["cost"]
        assert row["mobilisation"] == cost["mobilisation"]
        assert row["locations_cost"] == pytest.approx(cost["per_location"] * row["probes"])
        assert row["metres_cost"] == pytest.approx(cost["per_metre"] * row["metres"])
        assert row["cost"] == pytest.approx(
            row["mobilisation"] + row["locations_cost"] + row["metres_cost"]
        )
        assert row["duration_days"] == pytest.approx(
            row["metres"] / methods[row["id"]]["metres_per_day"]
        )
    for probe in doc["probes"]:
        cost = methods[probe["method"]]["cost"]
        assert probe["cost"] == pytest.approx(
            cost["per_location"] + cost["per_metre"] * probe["depth_m"]
        )


# ---------------------------------------------------------------- csv, geojson, gpkg


def test_csv_parses_with_every_probe():
    run = cli(str(DEMO), "--layout", LEAN, "--format", "csv")
    assert run.returncode == 0, run.stderr
    rows = list(csv.DictReader(data_lines(run.stdout)))
    ids = [p["id"] for p in layout_doc(model_of(DEMO), LEAN)["probes"]]
    assert [r["id"] for r in rows] == ids
    assert all(float(r["depth_m"]) > 0 and float(r["cost"]) > 0 for r in rows)
    assert_caution(run.stderr)  # the table itself has no room for it


def test_geojson_and_geopackage_files(tmp_path):
    geojson = tmp_path / "schedule.geojson"
    run = cli(str(DEMO), "--layout", LEAN, "--format", "geojson", "-o", str(geojson))
    assert run.returncode == 0, run.stderr
    doc = json.loads(geojson.read_text())
    assert doc["type"] == "FeatureCollection"
    assert_caution(doc["caution"])
    probes = layout_doc(model_of(DEMO), LEAN)["probes"]
    assert [f["properties"]["id"] for f in doc["features"]] == [p["id"] for p in probes]
    # EPSG:27700 to WGS 84, each probe against pyproj's own transform of its grid position
    to_wgs84 = Transformer.from_crs("EPSG:27700", "EPSG:4326", always_xy=True)
    for feature, probe in zip(doc["features"], probes, strict=True):
        want = to_wgs84.transform(probe["x"], probe["y"])
        assert feature["geometry"]["coordinates"] == pytest.approx(want, abs=1e-7)  # ~1 cm

    gpkg = tmp_path / "schedule.gpkg"
    run = cli(str(TINY), "--format", "gpkg", "-o", str(gpkg))
    assert run.returncode == 0, run.stderr
    assert "no CRS" in run.stdout
    frame = geopandas.read_file(gpkg, layer="schedule")
    tiny = model_of(TINY)
    probes = layout_doc(tiny, best_value(tiny))["probes"]
    assert frame.crs is None  # a local site grid has no CRS to give
    assert list(frame["id"]) == [p["id"] for p in probes]
    assert list(zip(frame.geometry.x, frame.geometry.y, strict=True)) == [
        (float(p["x"]), float(p["y"])) for p in probes
    ]
    assert_caution(gpkg_description(gpkg, "schedule"))


# ---------------------------------------------------------------- bad input


def test_unknown_layout_is_one_line_and_exit_2():
    line = one_line_error(cli(str(TINY), "--layout", "No such layout"), "--layout")
    assert "no layout named 'No such layout'" in line
    assert "'Four boreholes'" in line and "'Two boreholes and six CPTs'" in line


def test_bad_model_is_one_line_and_exit_2(tmp_path):
    one_line_error(cli(str(tmp_path / "missing.json")), "MODEL")
    broken = tmp_path / "broken.json"
    broken.write_text("{not json")
    assert cli(str(broken)).returncode == 2
    no_layouts = tmp_path / "no-layouts.json"
    no_layouts.write_text(json.dumps(dict(model_of(TINY), layouts=[])))
    one_line_error(cli(str(no_layouts)), "layouts")


def test_geopackage_needs_a_file():
    one_line_error(cli(str(TINY), "--format", "gpkg"), "-o")


# ---------------------------------------------------------------- probewise.app.schedule


def test_given_results_give_the_same_schedule():
    project = to_core(model_of(TINY))
    alone = build_schedule(project)
    evaluator = GridEvaluator(project)
    results = with_pareto([evaluator.evaluate_layout(lay) for lay in project.layouts])
    given = build_schedule(project, None, evaluator=evaluator, results=results)
    assert given == alone
    other = next(lay.name for lay in project.layouts if lay.name != alone.layout_name)
    named = build_schedule(project, other, evaluator=evaluator, results=results)
    assert named.layout_name == other
    assert named.totals.pareto is False  # on the tiny model the default dominates it
