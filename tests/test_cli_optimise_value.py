"""`probewise optimise --objective net-value` (docs/optimiser.md "Net value"): the JSON document
of docs/optimiser.md, the value it reports equals `probewise value` of the layout it writes,
a readable table with the currency and the caution, and bad input (exit 2 naming the field)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from cli_helpers import run_cli

from probewise.caution import CAUTION_LINE

ROOT = Path(__file__).resolve().parents[1]
TINY = json.loads((ROOT / "tests" / "data" / "tiny-model.json").read_text())


def square(x0, y0, x1, y1):
    return {"type": "Polygon", "coordinates": [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]]}


ELEMENTS = [  # invented
    {
        "name": "Platform treatment",
        "geometry": square(20, 20, 90, 80),
        "base_of": "Alluvial clay",
        "adverse": "deeper",
        "consequence": {"kind": "quantity", "rate_per_m3": 6, "reference_depth_m": 2},
    },
    {
        "name": "Culvert bed",
        "geometry": square(110, 40, 190, 70),
        "base_of": "Alluvial clay",
        "adverse": "deeper",
        "consequence": {
            "kind": "choice",
            "threshold_depth_m": 5.0,
            "cheaper_cost": 20000,
            "robust_cost": 30000,
        },
    },
]
FAST = ("--candidate-spacing", "40")  # 14 locations: quick


@pytest.fixture
def model_path(tmp_path):
    path = tmp_path / "model.json"
    path.write_text(json.dumps(dict(TINY, elements=ELEMENTS)))
    return path


def test_json_curve_and_value_match_probewise_value_of_the_written_layout(model_path, tmp_path):
    out_path = tmp_path / "out.json"
    run = run_cli(
        "optimise", str(model_path), "--objective", "net-value", *FAST, "--json",
        "-o", str(out_path),
    )  # fmt: skip
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert set(doc) == {"objective", "currency", "budget", "layout", "value", "curve",
                        "optimisation"}  # fmt: skip
    assert doc["objective"] == "net-value" and doc["budget"] is None
    assert doc["currency"] == "GBP"
    for point in doc["curve"]:
        assert set(point) == {"cost", "expected_saving", "net_value", "probes", "optimum"}
        assert point["net_value"] == pytest.approx(point["expected_saving"] - point["cost"])
    assert sum(p["optimum"] for p in doc["curve"]) == 1
    assert doc["layout"]["net_value"] == pytest.approx(doc["value"]["net_value"])
    # Reference: `probewise value` of the layout as written into the model file.
    name = doc["layout"]["name"]
    ref = run_cli("value", str(out_path), "--layout", name, "--json")
    assert ref.returncode == 0, ref.stderr
    valued = json.loads(ref.stdout)["layouts"][0]
    assert valued["net_value"] == pytest.approx(doc["value"]["net_value"], rel=1e-6)
    assert valued["gi_cost"] == pytest.approx(doc["layout"]["cost"], rel=1e-9)
    written = json.loads(out_path.read_text())["layouts"][-1]
    assert "budget" not in written
    assert all({"cost", "expected_saving", "net_value"} <= set(p)
               for p in written["optimiser_curve"])  # fmt: skip
    assert sum(p.get("optimum", False) for p in written["optimiser_curve"]) == 1


def test_a_budget_caps_the_net_value_layout(model_path):
    run = run_cli(
        "optimise", str(model_path), "--objective", "net-value", "--budget", "2500", *FAST,
        "--json",
    )  # fmt: skip
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert doc["budget"] == 2500
    assert doc["layout"]["cost"] <= 2500
    assert all(p["cost"] <= 2500 for p in doc["curve"])


def test_text_has_currency_curve_and_caution(model_path):
    run = run_cli("optimise", str(model_path), "--objective", "net-value", *FAST)
    assert run.returncode == 0, run.stderr
    assert "net value" in run.stdout and "GBP" in run.stdout
    assert "Saving-cost curve" in run.stdout and "<- optimum" in run.stdout
    assert CAUTION_LINE in run.stdout


def test_no_elements_exits_2_naming_the_field(tmp_path):
    path = tmp_path / "m.json"
    path.write_text(json.dumps(TINY))
    run = run_cli("optimise", str(path), "--objective", "net-value")
    assert run.returncode == 2
    assert run.stderr.strip().startswith("elements:")


def test_gain_objective_still_needs_a_budget(model_path):
    run = run_cli("optimise", str(model_path))
    assert run.returncode == 2
    assert run.stderr.strip().startswith("--budget:")
