"""Levels beside depths in the schedule rows and exports: ground level and target level
(ground level minus target depth), worked by hand on a plane through three surveyed points."""

from __future__ import annotations

import csv
import io
import json

import pytest

from probewise.app.outputs import schedule_probe_rows
from probewise.io.exports import write_schedule_csv, write_schedule_geojson
from probewise.io.model_file import validate_model

# A plane through (0, 0, 2.0), (200, 0, 6.0), (0, 120, 3.2): GL = 2 + 0.02 x + 0.01 y, so
# at (50, 60): 2 + 1.0 + 0.6 = 3.60 m and at (150, 30): 2 + 3.0 + 0.3 = 5.30 m (by hand;
# linear interpolation on one triangle is the plane itself, and the fourth point lies on it).
SURVEY = [
    {"x": 0, "y": 0, "level_m": 2.0},
    {"x": 200, "y": 0, "level_m": 6.0},
    {"x": 0, "y": 120, "level_m": 3.2},
    {"x": 200, "y": 120, "level_m": 7.2},
]


def levelled(tiny_model: dict) -> dict:
    model = json.loads(json.dumps(tiny_model))
    model["ground_level"] = {"datum": "mOD", "points": SURVEY}
    model["layouts"] = [
        {
            "name": "Two",
            "probes": [
                {"id": "A", "method": "BH", "x": 50, "y": 60, "depth_m": 7.5},
                {"id": "B", "method": "BH", "x": 150, "y": 30, "depth_m": 12.25},
            ],
        }
    ]
    return validate_model(model)


def test_rows_carry_ground_and_target_levels(tiny_model):
    rows = {r["id"]: r for r in schedule_probe_rows(levelled(tiny_model), "Two")}
    assert rows["A"]["ground_level_m"] == pytest.approx(3.60, abs=1e-9)
    assert rows["A"]["target_level_m"] == pytest.approx(3.60 - 7.5, abs=1e-9)  # -3.90
    assert rows["B"]["ground_level_m"] == pytest.approx(5.30, abs=1e-9)
    assert rows["B"]["target_level_m"] == pytest.approx(-6.95, abs=1e-9)  # 5.30 - 12.25


def test_an_existing_probe_own_level_wins_on_its_spot(tiny_model):
    model = levelled(tiny_model)
    spot = model["existing"][0]
    spot["ground_level_m"] = 4.0  # surveyed at the hole: 0.4 m above the surface's 3.60
    model["layouts"][0]["probes"][0].update(x=spot["x"], y=spot["y"])
    rows = {r["id"]: r for r in schedule_probe_rows(validate_model(model), "Two")}
    assert rows["A"]["ground_level_m"] == 4.0
    assert rows["A"]["target_level_m"] == pytest.approx(4.0 - 7.5)


def test_exports_round_levels_to_the_centimetre(tiny_model):
    model = levelled(tiny_model)
    model["layouts"][0]["probes"][0]["depth_m"] = 7.456  # -3.856 -> -3.86
    rows = schedule_probe_rows(validate_model(model), "Two")
    buffer = io.StringIO()
    write_schedule_csv(rows, buffer)
    lines = [line for line in buffer.getvalue().splitlines() if not line.startswith("#")]
    table = {r["id"]: r for r in csv.DictReader(lines)}
    assert table["A"]["ground_level_m"] == "3.6" and table["A"]["target_level_m"] == "-3.86"
    doc = write_schedule_geojson(rows, None)
    props = {f["properties"]["id"]: f["properties"] for f in doc["features"]}
    assert props["B"]["target_level_m"] == -6.95


def test_no_ground_level_no_level_columns(tiny_model):
    model = levelled(tiny_model)
    del model["ground_level"]
    rows = schedule_probe_rows(validate_model(model), "Two")
    assert "ground_level_m" not in rows[0] and "target_level_m" not in rows[0]


def test_cli_schedule_prints_the_target_level(tiny_model, tmp_path, capsys):
    from probewise.cli import main

    model = json.loads(json.dumps(tiny_model))
    model["ground_level"] = {"datum": "mOD", "level_m": 5.0}
    model["layouts"][0]["probes"][0]["depth_m"] = 7.25
    path = tmp_path / "model.json"
    path.write_text(json.dumps(model))
    assert main(["schedule", str(path), "--layout", model["layouts"][0]["name"]]) == 0
    text = capsys.readouterr().out
    assert "Target level (m)" in text
    first = next(line for line in text.splitlines() if line.startswith("BH01"))
    assert "-2.25" in first.split()  # 5.00 - 7.25, by hand
