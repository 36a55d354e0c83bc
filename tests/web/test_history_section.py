"""The maximum and minimum potential levels from site history on the Compare section."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
from edit_helpers import add_project

from server.app.levels import bounds_json, history_limits
from server.app.project import core_project
from server.io.model_file import validate_model

DEMO = Path(__file__).resolve().parents[2] / "seed_data" / "demo-reclaimed-strip.json"


def test_history_limits_are_the_bounds_where_a_rule_applies():
    project = core_project(validate_model(json.loads(DEMO.read_text())))
    xy = np.array([[80.0, 60.0], [250.0, 60.0], [370.0, 60.0]])
    limits = history_limits(project, xy)
    assert list(limits) == [0]  # only the fill base has a history rule
    lo, hi = limits[0]
    doc = bounds_json(project, xy)
    for i in (0, 1):
        b = doc["points"][i]["boundaries"]["Hydraulic fill and made ground"]
        assert (lo[i], hi[i]) == (b["min_depth_m"], b["max_depth_m"])
    assert np.isnan(lo[2]) and np.isnan(hi[2])  # east of the mapped environments


def test_section_with_history_draws(empty_client):
    pid = add_project(empty_client, json.loads(DEMO.read_text()))
    answer = empty_client.get(
        f"/projects/{pid}/compare/section.png",
        params={"x1": "0", "y1": "60", "x2": "400", "y2": "60"},
    )
    assert answer.status_code == 200, answer.text
    assert answer.headers["content-type"] == "image/png"
