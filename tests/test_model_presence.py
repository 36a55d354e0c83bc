"""The optional fields this model-file version added: a unit's presence, a probe's ground level."""

from __future__ import annotations

import copy

import pytest

from probewise.app.to_core import core_ground
from probewise.core.field import unit_fields
from probewise.errors import InputError
from probewise.io.model_file import dump_model, validate_all, validate_model


def test_presence_and_ground_level_are_kept_and_stay_absent_when_not_given(tiny_model):
    normal = validate_model(tiny_model)
    assert "presence" not in normal["units"][0]
    assert "ground_level_m" not in normal["existing"][0]
    model = copy.deepcopy(tiny_model)
    model["units"][1]["presence"] = 0.3
    model["existing"][0]["ground_level_m"] = 4.25
    normal = validate_model(model)
    assert normal["units"][1]["presence"] == 0.3
    assert normal["existing"][0]["ground_level_m"] == 4.25
    assert '"presence": 0.3' in dump_model(model)
    ground = core_ground(normal)
    assert ground.units[1].presence == 0.3 and ground.units[0].presence == 1.0
    fields = unit_fields(ground, [[50.0, 50.0]])
    assert fields.min_m[0, 1] == 0.0


@pytest.mark.parametrize(
    ("where", "value", "field", "words"),
    [
        ((1, "presence"), 0, "units[1].presence", "must be > 0"),
        ((1, "presence"), 1.5, "units[1].presence", "<= 1"),
        ((1, "presence"), "most", "units[1].presence", "number"),
        ((-1, "presence"), 0.5, "units[3].presence", "basal"),
    ],
)
def test_bad_presence_names_the_field(tiny_model, where, value, field, words):
    model = copy.deepcopy(tiny_model)
    model["units"][where[0]][where[1]] = value
    problems = validate_all(model)
    assert problems, "a bad presence must be refused"
    assert problems[0].field == field
    assert words in problems[0].problem


def test_bad_ground_level_names_the_field(tiny_model):
    model = copy.deepcopy(tiny_model)
    model["existing"][0]["ground_level_m"] = "high"
    with pytest.raises(InputError) as err:
        validate_model(model)
    assert err.value.field == "existing[0].ground_level_m"


def test_ground_page_depth_limits_let_a_local_unit_be_absent(tiny_model):
    from probewise.web.summary import depth_limits

    model = copy.deepcopy(tiny_model)
    full = depth_limits(model)
    model["units"][1]["presence"] = 0.3
    local = depth_limits(model)
    clay_min = tiny_model["units"][1]["thickness_m"]["min"]
    assert local["Made ground"] == full["Made ground"]
    assert local["Alluvial clay"][0] == pytest.approx(full["Alluvial clay"][0] - clay_min)
    assert local["Alluvial clay"][1] == full["Alluvial clay"][1]
