"""The model file's ``requirements`` and methods' ``delivers``: bad input named by field
(exit 2 on the command line), and the optimise/evaluate/rank answers about them."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest
from cli_helpers import run_cli

from probewise.errors import InputError
from probewise.io.model_file import validate_model

TINY = Path(__file__).resolve().parent / "data" / "tiny-model.json"


def tiny_with(requirements=None, delivers=None) -> dict:
    model = json.loads(TINY.read_text())
    if requirements is not None:
        model["requirements"] = requirements
    if delivers is not None:
        model["methods"][0]["delivers"] = delivers
    return model


GOOD_DELIVERY = {"kind": "sample", "name": "Tube", "quality_class": 1, "category": "A",
                 "every_m": 1.0, "units": ["Alluvial clay"], "parameters": ["su"]}  # fmt: skip
GOOD = {
    "min_probes": {"BH": 2},
    "calibration": [{"method": "BH", "for": ["CPT"], "per": 4, "within_m": 60}],
    "tests": [{"unit": "Alluvial clay", "parameter": "su", "count": 3}],
}


def test_good_requirements_and_deliveries_validate_and_stay():
    normal = validate_model(tiny_with(GOOD, [GOOD_DELIVERY]))
    assert normal["requirements"]["min_probes"] == {"BH": 2}
    assert normal["requirements"]["calibration"][0]["for"] == ["CPT"]
    assert normal["methods"][0]["delivers"][0]["every_m"] == 1.0
    assert "delivers" not in normal["methods"][1]  # absent stays absent


BAD = [
    ({**GOOD, "min_probes": {"BH": -1}}, None, "requirements.min_probes.BH", ">= 0"),
    ({**GOOD, "min_probes": {"XX": 1}}, None, "requirements.min_probes.XX", "method ids"),
    ({**GOOD, "calibration": [{"method": "XX", "for": ["CPT"], "per": 4, "within_m": 60}]},
     None, "requirements.calibration[0].method", "method ids"),
    ({**GOOD, "calibration": [{"method": "BH", "for": ["CPT"], "per": 0, "within_m": 60}]},
     None, "requirements.calibration[0].per", ">= 1"),
    ({**GOOD, "tests": [{"unit": "Peat", "parameter": "su", "count": 3}]},
     None, "requirements.tests[0].unit", "not one of the units"),
    ({**GOOD, "tests": [{"unit": "Alluvial clay", "parameter": "su", "count": -2}]},
     None, "requirements.tests[0].count", ">= 0"),
    ({**GOOD, "tests": [{"unit": "Alluvial clay", "parameter": "su",
                         "characteristic": {"cov": 0.3, "max_reduction": 0.4, "v_known": True}}]},
     None, "requirements.tests[0].characteristic.max_reduction", "1.645"),
    (None, [{**GOOD_DELIVERY, "units": ["Peat"]}], "methods[0].delivers[0].units[0]", "units"),
    (None, [{**GOOD_DELIVERY, "every_m": -1.0}], "methods[0].delivers[0].every_m", "> 0"),
    (None, [{**GOOD_DELIVERY, "per_unit": 2}], "methods[0].delivers[0]", "exactly one"),
]  # fmt: skip


@pytest.mark.parametrize(("req", "delivers", "field", "words"), BAD)
def test_bad_requirements_are_named(req, delivers, field, words):
    with pytest.raises(InputError) as info:
        validate_model(tiny_with(req, copy.deepcopy(delivers)))
    assert info.value.field == field
    assert words in info.value.problem


def test_cli_exits_2_naming_the_field(tmp_path):
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(tiny_with({**GOOD, "min_probes": {"BH": -1}})))
    run = run_cli("evaluate", str(path))
    assert run.returncode == 2
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("requirements.min_probes.BH: "), run.stderr


def test_optimise_that_cannot_meet_says_which_exit_0(tmp_path):
    path = tmp_path / "model.json"
    path.write_text(json.dumps(tiny_with(GOOD, [GOOD_DELIVERY])))
    run = run_cli("optimise", str(path), "--budget", "4000", "--json")
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert doc["layout"] is None
    assert any("at least 2 BH" in text for text in doc["unmet"])


def test_evaluate_json_says_whether_each_layout_meets_them(tmp_path):
    path = tmp_path / "model.json"
    path.write_text(json.dumps(tiny_with(GOOD, [GOOD_DELIVERY])))
    run = run_cli("evaluate", str(path), "--json")
    assert run.returncode == 0, run.stderr
    layouts = {lay["name"]: lay for lay in json.loads(run.stdout)["layouts"]}
    # "Four boreholes": four BH of which each gives one tube per metre of clay -> met;
    # "Two boreholes and six CPTs": meets the BH count; checked against the layout itself
    four = layouts["Four boreholes"]
    assert four["requirements_met"] is True and four["unmet"] == []
    for lay in layouts.values():
        assert isinstance(lay["requirements_met"], bool)
        assert lay["requirements_met"] == (lay["unmet"] == [])


def test_schedule_lab_csv_from_the_command_line():
    demo = Path(__file__).resolve().parents[1] / "seed_data" / "demo-project.json"
    layout = "Mixed: boreholes + CPTu along the culvert and approach"
    run = run_cli("schedule", str(demo), "--layout", layout, "--format", "lab-csv")
    assert run.returncode == 0, run.stderr
    lines = run.stdout.splitlines()
    assert lines[0].startswith("# ") and "qualified geotechnical professional" in lines[0]
    assert lines[1].startswith("unit,parameter,test,probe,method,samples,target_depths_m")
    assert any(",UU triaxial,BH0" in line for line in lines[2:])
