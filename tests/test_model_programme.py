"""Refusal rules, rigs and cost items in the model file (docs/model-file.md "Refusal,
programme and cost items"): each bad value is refused naming its field, by the validator,
the command line (exit 2, one line); the web's answers are in tests/web."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest
from cli_helpers import run_cli

from probewise.errors import InputError
from probewise.io.model_file import validate_model

DATA = Path(__file__).resolve().parent / "data"
TINY = json.loads((DATA / "tiny-model.json").read_text())

GOOD_ITEMS = {"reporting": 2000, "contingency_percent": 10}


def _with(change) -> dict:
    model = copy.deepcopy(TINY)
    change(model)
    return model


def _set_method(key, value, k=1):
    return lambda m: m["methods"][k].__setitem__(key, value)


def _set_items(items):
    return lambda m: m.__setitem__("cost_items", items)


BAD = [
    (_set_method("rigs", -1), "methods[1].rigs", ">= 1"),
    (_set_method("rigs", 0), "methods[1].rigs", ">= 1"),
    (_set_method("move_days", -0.5), "methods[1].move_days", ">= 0"),
    (_set_method("refusal", [{"unit": "Basalt"}]), "methods[1].refusal[0].unit", "no unit"),
    (
        _set_method("refusal", [{"unit": "River gravel"}, {"unit": "River gravel"}]),
        "methods[1].refusal[1].unit",
        "rule already",
    ),
    (_set_method("refusal", [{"unit": "River gravel", "chance": 1.5}]), "chance", "<= 1"),
    (_set_method("refusal", [{"unit": "River gravel", "chance": 0}]), "chance", "> 0"),
    (
        _set_method("refusal", [{"unit": "River gravel", "predrill": {"per_metre": -4}}]),
        "methods[1].refusal[0].predrill",
        "",
    ),
    (_set_items({"contingency_percent": 120}), "cost_items.contingency_percent", "<= 100"),
    (_set_items({"contingency_percent": -1}), "cost_items.contingency_percent", ">= 0"),
    (_set_items({"supervision_per_day": -10}), "cost_items.supervision_per_day", ">= 0"),
]


@pytest.mark.parametrize("change, field, words", BAD)
def test_bad_programme_fields_are_refused_naming_the_field(change, field, words):
    with pytest.raises(InputError) as info:
        validate_model(_with(change))
    assert field in info.value.field and words in info.value.problem, str(info.value)


def test_good_fields_are_kept_and_absent_ones_stay_absent():
    model = _with(_set_items(GOOD_ITEMS))
    model["methods"][1]["refusal"] = [{"unit": "River gravel", "chance": 0.6}]
    model["methods"][1]["rigs"] = 2
    normal = validate_model(model)
    assert normal["methods"][1]["refusal"] == [{"unit": "River gravel", "chance": 0.6}]
    assert normal["methods"][1]["rigs"] == 2
    assert "rigs" not in normal["methods"][0] and "refusal" not in normal["methods"][0]
    assert normal["cost_items"]["contingency_percent"] == 10
    assert "cost_items" not in validate_model(copy.deepcopy(TINY))


def test_cli_exits_2_naming_the_field(tmp_path):
    path = tmp_path / "model.json"
    path.write_text(json.dumps(_with(_set_items({"contingency_percent": 150}))))
    done = run_cli("validate", str(path), timeout=120)
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("cost_items.contingency_percent:"), lines


@pytest.mark.parametrize("proves", [True, False])
def test_a_stop_that_proves_nothing_is_warned_on_the_schedule(proves):
    from probewise.app.schedule import build_schedule
    from probewise.app.to_core import to_core

    model = copy.deepcopy(TINY)
    model["methods"][1]["proves_refusal"] = proves
    probe = {"id": "C1", "method": "CPT", "x": 100.0, "y": 60.0, "depth_m": 20.0}
    model["layouts"].append({"name": "deep cone", "probes": [probe]})
    (row,) = build_schedule(to_core(validate_model(model)), "deep cone").probes
    assert any("stop on River gravel" in w for w in row["warnings"])
    assert any("does not prove the top of River gravel" in w for w in row["warnings"]) != proves


def test_instructions_say_why_and_what_ends_each_hole():
    from probewise.app.schedule import build_schedule
    from probewise.app.to_core import to_core

    model = copy.deepcopy(TINY)
    probes = [
        {"id": "B1", "method": "BH", "x": 100.0, "y": 60.0},
        {"id": "C1", "method": "CPT", "x": 100.0, "y": 60.0},
    ]
    model["layouts"].append({"name": "pair", "probes": probes})
    bh, cpt = build_schedule(to_core(validate_model(model)), "pair").instructions
    assert "base of River gravel" in bh.why and "embedment of 1.5 m" in bh.why
    assert bh.ends.startswith("Target depth")
    assert "expected to stop on River gravel" in cpt.why
    assert cpt.ends.startswith("Refusal on River gravel")
    # the bands printed are the current P5-P95 of each boundary the hole may meet
    assert [b.boundary for b in bh.bands] == ["Made ground", "Alluvial clay", "River gravel"]
    assert all(b.p05_m < b.p95_m for b in bh.bands)
