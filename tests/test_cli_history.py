"""Levels and site history through the model file and the command line: `probewise bounds`,
the level fields of `probewise posterior` (docs/model-file.md "CLI output contract"), and the
history bound reaching the evaluation. Hand-worked values are derived beside each check."""

from __future__ import annotations

import copy
import json
import math
from pathlib import Path

import numpy as np
import pytest
from cli_helpers import run_cli
from scipy.stats import truncnorm

from probewise.app.project import core_project
from probewise.core.evaluate import evaluate_project
from probewise.io.model_file import validate_model

ROOT = Path(__file__).resolve().parents[1]
HISTORY = ROOT / "tests" / "data" / "history-model.json"
TINY = ROOT / "tests" / "data" / "tiny-model.json"
BOUND_KEYS = {"min_depth_m", "max_depth_m", "sources", "max_level_m", "min_level_m"}
HISTORY_KEYS = {"former_level_min_m", "former_level_max_m", "settlement_min_m", "settlement_max_m"}

# The file's ground level is the plane 5 + 0.0025 x - 0.5/120 y through its four corners, so
# GL(50, 60) = 5 + 0.125 - 0.25 = 4.875 m. Reference levels: MLWS 1.0 - 2.2 = -1.2 m,
# MHWS 6.0 - 2.2 = 3.8 m (datum shift -2.2 m).
GL = 4.875


def history_model() -> dict:
    return json.loads(HISTORY.read_text())


def write(tmp_path: Path, model: dict) -> str:
    path = tmp_path / "m.json"
    path.write_text(json.dumps(model))
    return str(path)


def bounds_doc(path: str, *points: str) -> dict:
    run = run_cli("bounds", path, *(f"--at={p}" for p in points), "--json")
    assert run.returncode == 0, run.stderr
    return json.loads(run.stdout)


def test_bounds_json_by_hand_without_settlement(tmp_path):
    # In the salt marsh: depth in [GL - 3.8, GL + 1.2] = [1.075, 6.075] m; bounds[0] (0.5-1.8
    # m) and the unit ranges (0.3-2.0 m) cut the top to 1.8 m. Outside: levels 3.0-4.0 m give
    # [0.875, 1.875] m, cut by bounds[0] to [0.875, 1.8] m.
    model = history_model()
    model["history"][0]["settlement"] = None
    doc = bounds_doc(write(tmp_path, model), "50,60", "150,60")
    marsh, outside = (p["boundaries"]["Made ground"] for p in doc["points"])
    assert set(marsh) == BOUND_KEYS | HISTORY_KEYS
    assert doc["points"][0]["ground_level_m"] == pytest.approx(GL, abs=1e-9)
    assert (marsh["min_depth_m"], marsh["max_depth_m"]) == pytest.approx((1.075, 1.8), abs=1e-9)
    assert (marsh["former_level_min_m"], marsh["former_level_max_m"]) == pytest.approx((-1.2, 3.8))
    assert marsh["settlement_min_m"] == marsh["settlement_max_m"] == 0.0
    assert marsh["max_level_m"] == pytest.approx(GL - 1.075, abs=1e-9)
    assert any("Salt marsh" in s for s in marsh["sources"])
    assert any("bounds[0]" in s for s in marsh["sources"])
    assert outside["min_depth_m"] == pytest.approx(5.125 - 4.0, abs=1e-9)  # GL(150,60) 5.125
    assert any("outside the mapped environments" in s for s in outside["sources"])
    other = doc["points"][0]["boundaries"]["Alluvial clay"]
    assert set(other) == BOUND_KEYS and other["sources"] == ["unit thickness ranges"]


def hand_settlement(cc, e0, g_eff, load, thickness):
    """Terzaghi's sum over ceil(H / 0.5) sublayers, written out as docs/model.md gives it."""
    n = math.ceil(thickness / 0.5 - 1e-9)
    h = thickness / n
    total = sum(
        math.log10((g_eff * (j - 0.5) * h + load) / (g_eff * (j - 0.5) * h))
        for j in range(1, n + 1)
    )
    return cc / (1 + e0) * h * total


def test_bounds_json_settlement_by_hand(tmp_path):
    # Alluvial clay 1.0-6.0 m at (50, 60) (outside the "Old channel" zone); g' = 16 - 9.81.
    # S_min: Cc 0.2, H 1.0, dq = 19 (GL - 3.8); S_max: Cc 0.5, H 6.0, dq = 19 (GL + 1.2).
    doc = bounds_doc(str(HISTORY), "50,60")
    b = doc["points"][0]["boundaries"]["Made ground"]
    s_min = hand_settlement(0.2, 1.4, 6.19, 19 * (GL - 3.8), 1.0)
    s_max = hand_settlement(0.5, 1.4, 6.19, 19 * (GL + 1.2), 6.0)
    assert b["settlement_min_m"] == pytest.approx(s_min, rel=1e-9)
    assert b["settlement_max_m"] == pytest.approx(s_max, rel=1e-9)
    assert b["min_depth_m"] == pytest.approx(GL - 3.8 + s_min, rel=1e-9)


def test_posterior_json_levels_and_median():
    run = run_cli("posterior", str(HISTORY), "--at", "50,60", "--json")
    assert run.returncode == 0, run.stderr
    point = json.loads(run.stdout)["points"][0]
    assert point["level_m"] == pytest.approx(GL, abs=1e-9)
    fill = point["boundaries"]["Made ground"]
    assert fill["mean_level_m"] == pytest.approx(GL - fill["mean_m"], abs=1e-12)
    # p50_m against scipy.stats.truncnorm with the bounds `probewise bounds` reports there.
    b = bounds_doc(str(HISTORY), "50,60")["points"][0]["boundaries"]["Made ground"]
    m, s = fill["mean_m"], fill["std_m"]
    a, z = (b["min_depth_m"] - m) / s, (b["max_depth_m"] - m) / s
    assert fill["p50_m"] == pytest.approx(truncnorm.ppf(0.5, a, z, loc=m, scale=s), abs=1e-9)
    assert b["min_depth_m"] <= fill["p05_m"] <= fill["p50_m"] <= fill["p95_m"]
    # no ground level: no level fields, p50_m still given
    run = run_cli("posterior", str(TINY), "--at", "50,60", "--json")
    point = json.loads(run.stdout)["points"][0]
    assert "level_m" not in point and "p50_m" in point["boundaries"]["Made ground"]


def test_history_narrows_the_evaluation():
    # The history bound enters the P5-P95 of every cell through the same bounds as the rest:
    # the fill base's mean width can only shrink, and other boundaries are untouched.
    with_history = validate_model(history_model())
    plain = copy.deepcopy(with_history)
    plain.pop("history")
    a = evaluate_project(core_project(with_history)).baseline
    b = evaluate_project(core_project(plain)).baseline
    wa = a.boundaries["Made ground"].width90_mean_m
    wb = b.boundaries["Made ground"].width90_mean_m
    assert wa < wb - 0.05
    np.testing.assert_array_equal(a.grid.p95_m[:, 1:], b.grid.p95_m[:, 1:])


def test_bounds_table_and_caution():
    run = run_cli("bounds", str(HISTORY), "--at", "50,60")
    assert run.returncode == 0, run.stderr
    assert "Salt marsh" in run.stdout and "Caution" in run.stdout


def test_reclaimed_strip_demo_shows_the_band():
    # The invented demo with two former environments: each narrows the fill base below the
    # unit ranges (0.8-7.0 m), the tidal flats lie deeper than the salt marsh, and the strip
    # east of the mapped environments has no history bound.
    path = ROOT / "seed_data" / "demo-reclaimed-strip.json"
    model = json.loads(path.read_text())
    assert "invented" in model["name"].lower() and "invented" in model["notes"].lower()
    doc = bounds_doc(str(path), "80,60", "250,60", "370,60")
    marsh, flats, east = (p["boundaries"]["Hydraulic fill and made ground"] for p in doc["points"])
    for b in (marsh, flats):
        assert 0.8 < b["min_depth_m"] < b["max_depth_m"] <= 7.0
        assert b["settlement_max_m"] > b["settlement_min_m"] > 0
    assert flats["min_depth_m"] > marsh["min_depth_m"]
    assert (east["min_depth_m"], east["max_depth_m"]) == (0.8, 7.0)
    assert east["former_level_min_m"] is None


def test_zone_transition_reaches_the_core():
    model = json.loads(TINY.read_text())
    model["zones"][0]["transition_m"] = 10
    project = core_project(validate_model(model))
    assert project.ground.zones[0].transition_m == 10.0
    assert (
        core_project(validate_model(json.loads(TINY.read_text()))).ground.zones[0].transition_m == 0
    )


def test_schedule_speaks_of_the_band():
    # The demo's second layout: CPT06 at x = 340 lies east of the mapped environments
    # (x > 330), so 7 of its 8 probes are bounded; BH01 given a 2 m depth stops above the band
    # (the salt marsh's lowest potential level is more than 2 m down there).
    from probewise.app.schedule import build_schedule

    model = json.loads((ROOT / "seed_data" / "demo-reclaimed-strip.json").read_text())
    layout = "CPTu along the pavement with two boreholes"
    text = " ".join(build_schedule(core_project(validate_model(model)), layout).justification)
    assert "at 7 of the 8 planned probes" in text and "pass below the band" in text
    model["layouts"][1]["probes"][0]["depth_m"] = 2.0
    text = " ".join(build_schedule(core_project(validate_model(model)), layout).justification)
    assert "Planned to stop above the band's base: BH01." in text


def test_posterior_table_gives_levels_with_a_ground_level():
    run = run_cli("posterior", str(HISTORY), "--at", "50,60")
    assert run.returncode == 0, run.stderr
    assert "ground level 4.88 m" in run.stdout and "Mean level (m)" in run.stdout
    assert "Mean level" not in run_cli("posterior", str(TINY), "--at", "50,60").stdout
