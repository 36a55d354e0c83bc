"""The Ground model page: units (edit, rename, reorder, add, remove), zone overrides,
boundaries of interest, hard bounds, the thickness chart and undo."""

from __future__ import annotations

import math

import pytest
from edit_helpers import (
    add_project,
    assert_links_answer,
    error_beside,
    input_value,
    last_message,
    model_of,
    notice_of,
    page_form,
    page_text,
    post,
    revision_of,
)

from probewise.core.model import ThicknessRange
from probewise.core.priors import thickness_moments
from probewise.web.charts import thickness_density, thickness_distribution
from probewise.web.templating import field_id

GROUND = "/projects/{}/ground"


def unit_form(unit: dict, revision: int, **changes) -> dict:
    t = unit.get("thickness_m") or {}
    c = unit.get("correlation") or {}
    fields = {
        "name": unit["name"],
        "description": unit.get("description", ""),
        "min": str(t.get("min", "")),
        "likely": str(t.get("likely", "")),
        "max": str(t.get("max", "")),
        "shape": t.get("shape", "pert"),
        "correlation_model": c.get("model", "exponential"),
        "range_m": str(c.get("range_m", "")),
    }
    return page_form(revision, fields, changes)


# ---------------------------------------------------------------- the page


def test_ground_page_answers_with_units_charts_and_caution(client, shown_project):
    project_id, model = shown_project
    text = page_text(client, GROUND.format(project_id))
    for i in range(len(model["units"]) - 1):
        assert f'/projects/{project_id}/charts/thickness/{i}.svg?rev=1"' in text
        assert input_value(text, field_id(f"units[{i}].thickness_m.max")) != ""
        assert 'alt="Thickness distribution of' in text
    basal = len(model["units"]) - 1
    assert f"charts/thickness/{basal}.svg" not in text
    assert "basal unit" in text
    assert_links_answer(client, text)


def test_chart_route_answers_svg_and_pins_revisions(client):
    answer = client.get("/projects/1/charts/thickness/0.svg?rev=1")
    assert answer.status_code == 200
    assert answer.headers["content-type"].startswith("image/svg+xml")
    assert "<svg" in answer.text and "mean" in answer.text
    assert "immutable" in answer.headers["cache-control"]
    again = client.get("/projects/1/charts/thickness/0.svg?rev=1")
    assert again.content == answer.content  # cached / deterministic
    current = client.get("/projects/1/charts/thickness/0.svg")
    assert current.status_code == 200 and "immutable" not in current.headers["cache-control"]
    assert client.get("/projects/1/charts/thickness/4.svg").status_code == 404  # basal
    assert client.get("/projects/1/charts/thickness/9.svg").status_code == 404
    assert client.get("/projects/1/charts/thickness/0.svg?rev=77").status_code == 404


@pytest.mark.parametrize("shape", ["pert", "triangular", "uniform"])
def test_chart_density_matches_the_model_moments(shape):
    # Reference: scipy.stats (beta for PERT with alpha = 1 + 4(b-a)/(c-a), triang, uniform)
    # against the closed forms of docs/model.md used by probewise.core.priors; the plotted density
    # integrates to 1 (trapezoid rule on 2001 points).
    rng = ThicknessRange(0.5, 1.5, 4.0, shape)
    dist = thickness_distribution(rng)
    mean, std = thickness_moments(rng)
    assert dist.mean() == pytest.approx(mean, rel=1e-12)
    assert dist.std() == pytest.approx(std, rel=1e-12)
    x, pdf = thickness_density(rng, 2001)
    area = float(((pdf[1:] + pdf[:-1]) * (x[1:] - x[:-1])).sum() / 2)
    assert area == pytest.approx(1.0, abs=2e-3)
    if shape != "uniform":
        assert x[int(pdf.argmax())] == pytest.approx(1.5, abs=0.01)  # the mode is "likely"
    assert all(math.isfinite(v) for v in pdf)


# ---------------------------------------------------------------- units


def test_thickness_edit_saves_a_revision(client, tiny_id, tiny_model):
    unit = tiny_model["units"][1]
    answer = post(client, f"/projects/{tiny_id}/ground/units/1", unit_form(unit, 1, max=7.5))
    assert answer.status_code == 200, notice_of(answer.text)
    assert model_of(client, tiny_id)["units"][1]["thickness_m"]["max"] == 7.5
    assert last_message(client, tiny_id) == "Changed thickness of Alluvial clay"
    assert input_value(answer.text, field_id("units[1].thickness_m.max")) == "7.5"
    assert "charts/thickness/1.svg?rev=2" in answer.text


def test_min_above_max_is_refused_beside_the_range(client, tiny_id, tiny_model):
    unit = tiny_model["units"][1]
    answer = post(client, f"/projects/{tiny_id}/ground/units/1", unit_form(unit, 1, min=7))
    assert answer.status_code == 422
    assert "min 7.0 is above max 6.0" in error_beside(answer.text, "units[1].thickness_m")
    assert input_value(answer.text, field_id("units[1].thickness_m.min")) == "7"
    assert revision_of(client, tiny_id) == 1


@pytest.mark.parametrize(
    ("field", "value", "path", "words"),
    [
        ("range_m", "-5", "units[0].correlation.range_m", "must be > 0"),
        ("likely", "", "units[0].thickness_m.likely", "is required"),
        ("shape", "lognormal", "units[0].thickness_m.shape", "must be one of"),
        ("name", "Alluvial clay", "units[0].name", "name of another unit"),
    ],
)
def test_bad_unit_fields_are_refused(client, tiny_id, tiny_model, field, value, path, words):
    unit = tiny_model["units"][0]
    answer = post(
        client, f"/projects/{tiny_id}/ground/units/0", unit_form(unit, 1, **{field: value})
    )
    assert answer.status_code == 422
    assert words in error_beside(answer.text, path)
    assert revision_of(client, tiny_id) == 1


def test_renaming_a_unit_renames_its_references(client, tiny_id, tiny_model):
    unit = tiny_model["units"][1]
    answer = post(
        client, f"/projects/{tiny_id}/ground/units/1", unit_form(unit, 1, name="Soft clay")
    )
    assert answer.status_code == 200, notice_of(answer.text)
    model = model_of(client, tiny_id)
    assert model["units"][1]["name"] == "Soft clay"
    assert "Soft clay" in model["zones"][0]["units"]
    assert [b["base_of"] for b in model["boundaries_of_interest"]][0] == "Soft clay"
    assert "Soft clay" in model["methods"][0]["precision_m"]
    assert list(model["methods"][0]["precision_m"]) == ["Made ground", "Soft clay", "River gravel"]
    assert model["existing"][0]["observed"]["Soft clay"] == 4.0
    assert last_message(client, tiny_id) == "Renamed unit Alluvial clay to Soft clay"


def test_reorder_that_breaks_observed_depths_is_refused(client, tiny_id):
    answer = post(client, f"/projects/{tiny_id}/ground/units/0/down", {"expected_revision": "1"})
    assert answer.status_code == 422
    shown = error_beside(answer.text, "units[0]")
    assert 'Probe "HBH1"' in shown and "depths must not decrease" in shown
    assert [u["name"] for u in model_of(client, tiny_id)["units"]][0] == "Made ground"
    assert revision_of(client, tiny_id) == 1


def test_reorder_moves_a_unit(client, tiny_model):
    tiny_model["existing"] = []
    tiny_model["bounds"] = []
    project_id = add_project(client, tiny_model)
    answer = post(client, f"/projects/{project_id}/ground/units/2/up", {"expected_revision": "1"})
    assert answer.status_code == 200, notice_of(answer.text)
    names = [u["name"] for u in model_of(client, project_id)["units"]]
    assert names == ["Made ground", "River gravel", "Alluvial clay", "Mudstone"]
    assert last_message(client, project_id) == "Moved River gravel above Alluvial clay"
    refused = post(client, f"/projects/{project_id}/ground/units/3/up", {"expected_revision": "2"})
    assert refused.status_code == 409 and "basal unit stays" in notice_of(refused.text)
    refused = post(client, f"/projects/{project_id}/ground/units/0/up", {"expected_revision": "2"})
    assert refused.status_code == 409 and "already at the top" in notice_of(refused.text)
    assert revision_of(client, project_id) == 2


def test_removing_a_referenced_unit_names_the_references(client, tiny_id):
    answer = post(client, f"/projects/{tiny_id}/ground/units/1/remove", {"expected_revision": "1"})
    assert answer.status_code == 409
    shown = error_beside(answer.text, "units[1]")
    for words in (
        "zone \u201cOld channel\u201d",
        "the boundaries of interest",
        "method BH (precision)",
        "2 existing probes (HBH1, HBH2)",
    ):
        assert words in shown
    assert revision_of(client, tiny_id) == 1
    basal = post(client, f"/projects/{tiny_id}/ground/units/3/remove", {"expected_revision": "1"})
    assert basal.status_code == 409 and "basal unit cannot be removed" in notice_of(basal.text)


def test_add_a_unit_above_the_basal_unit_then_remove_it(client, tiny_id):
    data = {
        "expected_revision": "1",
        "form_id": "new_unit",
        "name": "Weathered mudstone",
        "description": "invented",
        "min": "0",
        "likely": "0.5",
        "max": "2",
        "shape": "triangular",
        "correlation_model": "exponential",
        "range_m": "50",
    }
    answer = post(client, f"/projects/{tiny_id}/ground/units/add", data)
    assert answer.status_code == 200, notice_of(answer.text)
    names = [u["name"] for u in model_of(client, tiny_id)["units"]]
    assert names == [
        "Made ground",
        "Alluvial clay",
        "River gravel",
        "Weathered mudstone",
        "Mudstone",
    ]
    assert last_message(client, tiny_id) == "Added unit Weathered mudstone above Mudstone"
    answer = post(client, f"/projects/{tiny_id}/ground/units/3/remove", {"expected_revision": "2"})
    assert answer.status_code == 200, notice_of(answer.text)
    assert len(model_of(client, tiny_id)["units"]) == 4


def test_bad_new_unit_is_refused_and_the_draft_kept(client, tiny_id):
    data = {
        "expected_revision": "1",
        "form_id": "new_unit",
        "name": "Peat",
        "min": "0",
        "likely": "3",
        "max": "2",
        "shape": "pert",
        "correlation_model": "exponential",
        "range_m": "30",
        "position": "1",
    }
    answer = post(client, f"/projects/{tiny_id}/ground/units/add", data)
    assert answer.status_code == 422
    assert "likely 3.0 is above max 2.0" in error_beside(answer.text, "new_unit.thickness_m")
    assert input_value(answer.text, field_id("new_unit.name")) == "Peat"
    assert revision_of(client, tiny_id) == 1


# ---------------------------------------------------------------- zones, boundaries, bounds


def test_zone_overrides_save_and_refuse(client, tiny_id):
    data = {
        "expected_revision": "1",
        "min_1": "3",
        "likely_1": "6",
        "max_1": "10",
        "shape_1": "pert",
        "min_2": "0.2",
        "likely_2": "1",
        "max_2": "2",
        "shape_2": "uniform",
    }
    answer = post(client, f"/projects/{tiny_id}/ground/zones/0", data)
    assert answer.status_code == 200, notice_of(answer.text)
    overrides = model_of(client, tiny_id)["zones"][0]["units"]
    assert overrides["Alluvial clay"]["thickness_m"]["max"] == 10
    assert overrides["River gravel"]["thickness_m"]["shape"] == "uniform"
    assert "Made ground" not in overrides  # blank row: the unit's default
    bad = dict(data, expected_revision="2", min_1="12")
    answer = post(client, f"/projects/{tiny_id}/ground/zones/0", bad)
    assert answer.status_code == 422
    assert "min 12.0 is above" in answer.text
    assert revision_of(client, tiny_id) == 2


def test_boundaries_of_interest(client, tiny_id):
    data = {
        "expected_revision": "1",
        "interest_0": "1",
        "weight_0": "0.5",
        "tolerance_0": "0.2",
        "interest_1": "1",
        "weight_1": "2",
        "tolerance_1": "0.5",
        "weight_2": "1",
        "tolerance_2": "1",
    }
    answer = post(client, f"/projects/{tiny_id}/ground/boundaries", data)
    assert answer.status_code == 200, notice_of(answer.text)
    boundaries = model_of(client, tiny_id)["boundaries_of_interest"]
    assert [b["base_of"] for b in boundaries] == ["Alluvial clay", "Made ground"]
    assert boundaries[1]["tolerance_m"] == 0.2
    bad = dict(data, expected_revision="2", weight_0="-1")
    answer = post(client, f"/projects/{tiny_id}/ground/boundaries", bad)
    assert answer.status_code == 422
    assert "must be > 0" in error_beside(answer.text, "boundaries_of_interest[1].weight")
    assert revision_of(client, tiny_id) == 2


def test_hard_bounds_add_edit_remove(client, tiny_id):
    base = {
        "expected_revision": "1",
        "form_id": "new_bound",
        "base_of": "River gravel",
        "min_depth_m": "4",
        "max_depth_m": "9",
        "geometry_text": "",
    }
    answer = post(client, f"/projects/{tiny_id}/ground/bounds/add", base)
    assert answer.status_code == 200, notice_of(answer.text)
    bounds = model_of(client, tiny_id)["bounds"]
    assert bounds[-1] == {
        "base_of": "River gravel",
        "min_depth_m": 4.0,
        "max_depth_m": 9.0,
        "geometry": None,
    }
    bad = dict(base, expected_revision="2", min_depth_m="9", max_depth_m="4")
    answer = post(client, f"/projects/{tiny_id}/ground/bounds/add", bad)
    assert answer.status_code == 422
    assert "must be below max_depth_m" in error_beside(answer.text, "new_bound")
    polygon = dict(base, expected_revision="2", geometry_text="0, 0\n100, 0\n100, 60")
    answer = post(client, f"/projects/{tiny_id}/ground/bounds/1", polygon)
    assert answer.status_code == 200, notice_of(answer.text)
    assert model_of(client, tiny_id)["bounds"][1]["geometry"]["type"] == "Polygon"
    answer = post(client, f"/projects/{tiny_id}/ground/bounds/1/remove", {"expected_revision": "3"})
    assert answer.status_code == 200
    assert len(model_of(client, tiny_id)["bounds"]) == 1


def test_stale_page_and_undo(client, tiny_id, tiny_model):
    unit = tiny_model["units"][0]
    post(client, f"/projects/{tiny_id}/ground/units/0", unit_form(unit, 1, max=2.2))
    stale = post(client, f"/projects/{tiny_id}/ground/units/0", unit_form(unit, 1, max=2.4))
    assert stale.status_code == 409 and "Reload the page" in notice_of(stale.text)
    assert model_of(client, tiny_id)["units"][0]["thickness_m"]["max"] == 2.2
    answer = post(client, f"/projects/{tiny_id}/ground/undo", {"expected_revision": "2"})
    assert answer.status_code == 200 and 'id="ground"' in answer.text
    assert model_of(client, tiny_id)["units"][0]["thickness_m"]["max"] == 2.0
    assert revision_of(client, tiny_id) == 3


def test_presence_is_set_refused_beside_its_field_and_cleared(client, tiny_id, tiny_model):
    unit = tiny_model["units"][1]
    url = f"/projects/{tiny_id}/ground/units/1"
    answer = post(client, url, unit_form(unit, 1, presence="0.3"))
    assert answer.status_code == 200, notice_of(answer.text)
    assert model_of(client, tiny_id)["units"][1]["presence"] == 0.3
    assert last_message(client, tiny_id) == "Changed presence of Alluvial clay"
    # triangular 1/3/6: mean 10/3, variance 19/18; over the site 0.3 x 10/3 = 1 m, std
    # sqrt(0.3 x 19/18 + 0.3 x 0.7 x (10/3)^2) = 1.63 m (docs/model.md, worked by hand)
    shown = page_text(client, GROUND.format(tiny_id))
    assert "over the site (presence 0.3) mean 1 m · std 1.63 m" in shown
    refused = post(client, url, unit_form(unit, 2, presence="1.5"))
    assert refused.status_code == 422
    assert "<= 1" in error_beside(refused.text, "units[1].presence")
    assert revision_of(client, tiny_id) == 2
    # a form without the field keeps it; an empty field clears it
    post(client, url, unit_form(unit, 2, max=7.0))
    assert model_of(client, tiny_id)["units"][1]["presence"] == 0.3
    post(client, url, unit_form(unit, 3, presence=""))
    assert "presence" not in model_of(client, tiny_id)["units"][1]
