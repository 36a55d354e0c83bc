"""``history[].settlement.sublayer_m``: optional, absent when not given, checked, and carried
into the settlement sum."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from probewise.app.levels import bounds_json
from probewise.app.project import core_project
from probewise.errors import InputError
from probewise.io.model_file import validate_model

DEMO = Path(__file__).resolve().parents[1] / "seed_data" / "demo-reclaimed-strip.json"


def with_sublayer(value) -> dict:
    model = json.loads(DEMO.read_text())
    if value is not None:
        model["history"][0]["settlement"]["sublayer_m"] = value
    return model


def test_absent_stays_absent_and_a_value_reaches_the_core():
    assert "sublayer_m" not in validate_model(with_sublayer(None))["history"][0]["settlement"]
    project = core_project(validate_model(with_sublayer(0.25)))
    assert project.ground.history[0].settlement.sublayer_m == 0.25


def test_one_thick_sublayer_settles_less_than_thin_ones():
    # log10((s0 + dp) / s0) is convex and decreasing in the initial effective stress s0, and
    # s0 grows linearly with depth, so (Jensen's inequality) its mean over thin sublayers
    # exceeds its value at the one thick layer's mid-depth stress: thin sublayers settle more.
    at = [(80.0, 60.0)]
    name = "Hydraulic fill and made ground"
    thin = bounds_json(core_project(validate_model(with_sublayer(0.1))), at)
    thick = bounds_json(core_project(validate_model(with_sublayer(10.0))), at)
    s_thin = thin["points"][0]["boundaries"][name]["settlement_max_m"]
    s_thick = thick["points"][0]["boundaries"][name]["settlement_max_m"]
    assert s_thin > s_thick > 0


def test_out_of_range_is_refused_naming_the_field():
    with pytest.raises(InputError) as caught:
        validate_model(with_sublayer(0))
    assert caught.value.field == "history[0].settlement.sublayer_m"
