"""The maximum and minimum potential levels from site history on the Compare section."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
from edit_helpers import add_project

from probewise.app.levels import bounds_json, history_limits
from probewise.app.project import core_project
from probewise.io.model_file import validate_model

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


def sections_of(model: dict) -> dict:
    return {k: model[k] for k in ("ground_level", "reference_levels", "history") if k in model}


def conflicting(doc: dict) -> dict:
    out = json.loads(json.dumps(doc))
    out["history"][0]["environments"][0].update(level_min=-9.0, level_max=-8.0)
    out["history"][0]["settlement"] = None
    return out


def test_history_page_shows_and_saves(empty_client):
    from edit_helpers import model_of, revision_of

    model = json.loads(DEMO.read_text())
    pid = add_project(empty_client, model)
    page = empty_client.get(f"/projects/{pid}/history")
    assert page.status_code == 200
    assert "Former tidal flats" in page.text and "Caution" in page.text
    assert f"/projects/{pid}/history/band.png" in page.text
    band = empty_client.get(f"/projects/{pid}/history/band.png")
    assert band.status_code == 200 and band.headers["content-type"] == "image/png"
    # a valid edit: the salt marsh's band widened to MLWN-HAT
    doc = sections_of(model_of(empty_client, pid))
    doc["history"][0]["environments"][0]["level_min"] = "MLWN"
    rev = revision_of(empty_client, pid)
    answer = empty_client.post(
        f"/projects/{pid}/history/sections",
        data={"expected_revision": str(rev), "sections": json.dumps(doc)},
    )
    assert answer.status_code in (200, 303), answer.text
    saved = model_of(empty_client, pid)
    assert saved["history"][0]["environments"][0]["level_min"] == "MLWN"
    # bad input: 4xx naming the field, nothing stored
    rev = revision_of(empty_client, pid)
    for text, words in (
        ("{not json", "not valid JSON"),
        (json.dumps({"history": [], "tides": 1}), "is not one of"),
        (json.dumps({**doc, "ground_level": {"points": doc["ground_level"]["points"][:2]}}),
         "at least 3"),
        # the salt marsh at -9 to -8 m puts the fill base 12-13 m down: beyond its 0.8-7 m
        (json.dumps(conflicting(doc)), "misses"),
    ):  # fmt: skip
        answer = empty_client.post(
            f"/projects/{pid}/history/sections",
            data={"expected_revision": str(rev), "sections": text},
        )
        assert answer.status_code == 422 and words in answer.text, answer.text[:300]
    assert revision_of(empty_client, pid) == rev
