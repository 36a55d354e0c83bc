"""`probewise value` and the design elements of the model file: the JSON of docs/model-file.md
("CLI output contract"), readable tables with the currency and the caution, `evaluate --json`'s
added keys, and bad input (exit 2, one line naming the field)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from cli_helpers import run_cli
from model_edits import edited

from probewise.caution import CAUTION_LINE
from probewise.errors import InputError
from probewise.io.model_file import dump_model, validate_model

ROOT = Path(__file__).resolve().parents[1]
TINY = json.loads((ROOT / "tests" / "data" / "tiny-model.json").read_text())


def square(x0, y0, x1, y1):
    return {"type": "Polygon", "coordinates": [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]]}


ELEMENTS = [  # invented
    {
        "name": "Ground treatment",
        "geometry": square(0, 40, 200, 80),
        "base_of": "Alluvial clay",
        "adverse": "deeper",
        "consequence": {"kind": "quantity", "rate_per_m3": 30},
    },
    {
        "name": "Culvert bed",
        "geometry": square(60, 50, 140, 70),
        "base_of": "Alluvial clay",
        "adverse": "deeper",
        "design_fractile": 0.9,
        "consequence": {
            "kind": "choice",
            "threshold_depth_m": 4.5,
            "cheaper_cost": 20000,
            "robust_cost": 90000,
        },
    },
]
WITH_ELEMENTS = dict(TINY, elements=ELEMENTS)
TOP = {"currency", "elements", "layouts"}
LAYOUT = {
    "name",
    "gi_cost",
    "design_cost_now",
    "design_cost_expected",
    "expected_saving",
    "net_value",
    "elements",
}


@pytest.fixture
def model_path(tmp_path):
    path = tmp_path / "model.json"
    path.write_text(json.dumps(WITH_ELEMENTS))
    return path


def test_value_json_has_exactly_the_documented_fields(model_path):
    run = run_cli("value", str(model_path), "--json", timeout=120)
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert set(doc) == TOP
    assert doc["currency"] == "GBP"
    assert [set(e) for e in doc["elements"]] == [{"name", "cells", "cost_now"}] * 2
    assert [lay["name"] for lay in doc["layouts"]] == [lay["name"] for lay in TINY["layouts"]]
    for lay in doc["layouts"]:
        assert set(lay) == LAYOUT
        quantity, choice = lay["elements"]
        assert set(quantity) == {"name", "cost_now", "cost_expected", "expected_saving"}
        assert set(choice) == set(quantity) | {"p_cheaper_allowed"}
        assert 0.0 <= choice["p_cheaper_allowed"] <= 1.0
        # the totals are the sums of the elements and the net value subtracts the GI cost
        assert lay["design_cost_now"] == pytest.approx(sum(e["cost_now"] for e in lay["elements"]))
        assert lay["expected_saving"] == pytest.approx(
            lay["design_cost_now"] - lay["design_cost_expected"]
        )
        assert lay["net_value"] == pytest.approx(lay["expected_saving"] - lay["gi_cost"])
        assert lay["expected_saving"] > 0


def test_value_of_one_layout_and_evaluate_agree(model_path):
    name = TINY["layouts"][1]["name"]
    one = json.loads(run_cli("value", str(model_path), "--layout", name, "--json").stdout)
    assert [lay["name"] for lay in one["layouts"]] == [name]
    run = run_cli("evaluate", str(model_path), "--json")
    assert run.returncode == 0, run.stderr
    entry = json.loads(run.stdout)["layouts"][1]
    assert entry["expected_saving"] == pytest.approx(one["layouts"][0]["expected_saving"])
    assert entry["net_value"] == pytest.approx(one["layouts"][0]["net_value"])
    assert entry["cost"] == pytest.approx(one["layouts"][0]["gi_cost"])


def test_evaluate_text_shows_the_value_with_elements(model_path):
    run = run_cli("evaluate", str(model_path))
    assert run.returncode == 0, run.stderr
    assert "Expected saving" in run.stdout and "Net value" in run.stdout


def test_evaluate_json_without_elements_has_no_value_keys(tmp_path):
    path = tmp_path / "m.json"
    path.write_text(json.dumps(TINY))
    doc = json.loads(run_cli("evaluate", str(path), "--json").stdout)
    assert all("expected_saving" not in lay and "net_value" not in lay for lay in doc["layouts"])


def test_value_text_has_currency_and_caution(model_path):
    run = run_cli("value", str(model_path))
    assert run.returncode == 0, run.stderr
    assert "GI cost (GBP)" in run.stdout
    assert "Ground treatment" in run.stdout and "P(cheaper)" in run.stdout
    assert CAUTION_LINE in run.stdout


def test_elements_survive_a_dump_and_take_defaults():
    normal = validate_model(WITH_ELEMENTS)
    assert normal["elements"][0]["design_fractile"] == 0.95
    assert normal["elements"][0]["consequence"]["reference_depth_m"] == 0.0
    assert normal["elements"][1]["consequence"]["basis"] == "mean"
    assert validate_model(json.loads(dump_model(normal))) == normal


BAD = [
    ("elements[0].design_fractile", 0.3, "elements[0].design_fractile", ">= 0.5"),
    ("elements[0].design_fractile", 1.0, "elements[0].design_fractile", "<= 0.999"),
    (
        "elements[1].consequence.robust_cost",
        100,
        "elements[1].consequence.robust_cost",
        "below cheaper_cost",
    ),
    ("elements[0].geometry", square(500, 500, 600, 600), "elements[0].geometry", "outside"),
    ("elements[0].base_of", "Peat", "elements[0].base_of", "not one of the units"),
    ("elements[0].base_of", "Mudstone", "elements[0].base_of", "basal"),
    ("elements[1].consequence.kind", "other", "elements[1].consequence.kind", '"choice"'),
    ("elements[1].adverse", "up", "elements[1].adverse", '"shallower"'),
    ("elements[1].name", "Ground treatment", "elements[1].name", "used twice"),
    ("elements[0].consequence.rate_per_m3", -1, "elements[0].consequence.rate_per_m3", ">= 0"),
]


@pytest.mark.parametrize(("path", "value", "field", "words"), BAD)
def test_bad_elements_name_the_field(path, value, field, words):
    with pytest.raises(InputError) as err:
        validate_model(edited(WITH_ELEMENTS, path, value))
    assert err.value.field == field
    assert words in err.value.problem


def test_element_without_a_cell_exits_2(tmp_path):
    """Inside the site but smaller than a cell and between centres: no cell, exit 2."""
    path = tmp_path / "m.json"
    path.write_text(json.dumps(edited(WITH_ELEMENTS, "elements[1].geometry", square(1, 1, 2, 2))))
    run = run_cli("value", str(path), "--json")
    assert run.returncode == 2
    assert run.stderr.startswith("elements[1].geometry: no evaluation cell centre")
    assert run.stdout == ""


def test_value_without_elements_exits_2(tmp_path):
    path = tmp_path / "m.json"
    path.write_text(json.dumps(TINY))
    run = run_cli("value", str(path))
    assert run.returncode == 2 and run.stderr.startswith("elements:")
