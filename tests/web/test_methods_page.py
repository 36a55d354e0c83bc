"""The Methods and rates page: catalogue, refusal units, precision table, currency."""

from __future__ import annotations

import pytest
from edit_helpers import (
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

from probewise.web.templating import field_id

METHODS = "/projects/{}/methods"


def method_form(method: dict, revision: int, **changes) -> dict:
    fields = {
        "id": method["id"],
        "name": method["name"],
        "kind": method["kind"],
        "mobilisation": str(method["cost"]["mobilisation"]),
        "per_location": str(method["cost"]["per_location"]),
        "per_metre": str(method["cost"]["per_metre"]),
        "metres_per_day": str(method["metres_per_day"]),
        "max_depth_m": str(method["max_depth_m"]),
        "embedment_m": str(method["embedment_m"]),
    }
    return page_form(revision, fields, changes)


def with_refusal(data: dict, units: list[str]) -> dict:
    return {**data, "cannot_penetrate": units}


def test_methods_page_shows_catalogue_precision_and_caution(client, shown_project):
    project_id, model = shown_project
    text = page_text(client, METHODS.format(project_id))
    for k, method in enumerate(model["methods"]):
        assert input_value(text, field_id(f"methods[{k}].id")) == method["id"]
        for name in model["units"][:-1]:
            path = f"methods[{k}].precision_m.{name['name']}"
            expected = method["precision_m"].get(name["name"])
            assert input_value(text, field_id(path)) == (
                "" if expected is None else f"{expected:g}"
            )
    assert f"({model['currency']}/m)" in text  # the currency label beside the rates
    assert_links_answer(client, text)


def test_cost_edit_saves_a_revision(client, tiny_id, tiny_model):
    method = tiny_model["methods"][1]
    data = method_form(method, 1, per_metre=25, metres_per_day=90)
    answer = post(client, f"/projects/{tiny_id}/methods/1", with_refusal(data, ["River gravel"]))
    assert answer.status_code == 200, notice_of(answer.text)
    saved = model_of(client, tiny_id)["methods"][1]
    assert saved["cost"]["per_metre"] == 25 and saved["metres_per_day"] == 90
    assert saved["precision_m"] == method["precision_m"]  # kept
    assert last_message(client, tiny_id) == "Changed costs and production of method CPT"


def test_costs_typed_with_thousands_separators_are_read_as_money(client, tiny_id, tiny_model):
    # "2,500" in a cost field is two thousand five hundred, not 2.5 with a decimal comma;
    # "18,5" (one decimal place) stays a decimal comma
    method = tiny_model["methods"][1]
    data = method_form(method, 1, mobilisation="2,500", per_location="1 250", per_metre="18,5")
    answer = post(client, f"/projects/{tiny_id}/methods/1", with_refusal(data, ["River gravel"]))
    assert answer.status_code == 200, notice_of(answer.text)
    cost = model_of(client, tiny_id)["methods"][1]["cost"]
    assert cost == {"mobilisation": 2500.0, "per_location": 1250.0, "per_metre": 18.5}


def test_refusal_units_are_a_multiple_choice(client, tiny_id, tiny_model):
    method = tiny_model["methods"][0]
    data = with_refusal(method_form(method, 1), ["River gravel", "Mudstone"])
    answer = post(client, f"/projects/{tiny_id}/methods/0", data)
    assert answer.status_code == 200, notice_of(answer.text)
    assert model_of(client, tiny_id)["methods"][0]["cannot_penetrate"] == [
        "River gravel",
        "Mudstone",
    ]
    assert last_message(client, tiny_id) == "Changed refusal units of method BH"


@pytest.mark.parametrize(
    ("field", "value", "path", "words"),
    [
        ("per_metre", "-5", "methods[0].cost.per_metre", "must be >= 0"),
        ("metres_per_day", "0", "methods[0].metres_per_day", "must be > 0"),
        ("max_depth_m", "deep", "methods[0].max_depth_m", "'deep' is not a number"),
        ("id", "CPT", "methods[0].id", "used twice"),
        ("kind", "drone", "methods[0].kind", "must be one of"),
    ],
)
def test_bad_method_fields_are_refused(client, tiny_id, tiny_model, field, value, path, words):
    data = method_form(tiny_model["methods"][0], 1, **{field: value})
    answer = post(client, f"/projects/{tiny_id}/methods/0", data)
    assert answer.status_code == 422
    shown = error_beside(answer.text, path) or error_beside(answer.text, "methods[1].id")
    assert words in shown, shown
    assert revision_of(client, tiny_id) == 1


def test_renaming_a_method_renames_it_in_probes_and_layouts(client, tiny_id, tiny_model):
    data = method_form(tiny_model["methods"][0], 1, id="CP")
    answer = post(client, f"/projects/{tiny_id}/methods/0", data)
    assert answer.status_code == 200, notice_of(answer.text)
    model = model_of(client, tiny_id)
    assert {p["method"] for p in model["existing"]} == {"CP"}
    assert "BH" not in {p["method"] for layout in model["layouts"] for p in layout["probes"]}
    assert last_message(client, tiny_id) == "Changed method BH (now CP)"


def test_removing_a_used_method_is_refused_naming_its_users(client, tiny_id):
    answer = post(client, f"/projects/{tiny_id}/methods/0/remove", {"expected_revision": "1"})
    assert answer.status_code == 409
    shown = error_beside(answer.text, "methods[0]")
    assert "2 existing probe(s) (HBH1, HBH2)" in shown and "Four boreholes" in shown
    assert revision_of(client, tiny_id) == 1


def test_add_then_remove_a_method(client, tiny_id, tiny_model):
    new = {
        "id": "WS",
        "name": "Window sample (invented rates)",
        "kind": "borehole",
        "cost": {"mobilisation": 500, "per_location": 80, "per_metre": 30},
        "metres_per_day": 25,
        "max_depth_m": 6,
        "embedment_m": 0.5,
    }
    data = dict(method_form(new, 1), form_id="new_method")
    answer = post(client, f"/projects/{tiny_id}/methods/add", with_refusal(data, ["Mudstone"]))
    assert answer.status_code == 200, notice_of(answer.text)
    added = model_of(client, tiny_id)["methods"][-1]
    assert (
        added["id"] == "WS"
        and added["precision_m"] == {}
        and added["cannot_penetrate"] == ["Mudstone"]
    )
    assert last_message(client, tiny_id) == "Added method WS"
    answer = post(client, f"/projects/{tiny_id}/methods/3/remove", {"expected_revision": "2"})
    assert answer.status_code == 200
    assert [m["id"] for m in model_of(client, tiny_id)["methods"]] == ["BH", "CPT", "DMT"]


def test_bad_new_method_keeps_the_draft(client, tiny_id, tiny_model):
    data = dict(
        method_form(tiny_model["methods"][0], 1, id="BH", name="Second BH"), form_id="new_method"
    )
    answer = post(client, f"/projects/{tiny_id}/methods/add", data)
    assert answer.status_code == 422
    assert "used twice" in error_beside(answer.text, "new_method.id")
    assert input_value(answer.text, field_id("new_method.name")) == "Second BH"
    assert revision_of(client, tiny_id) == 1


def precision_form(model: dict, revision: int, **changes) -> dict:
    fields = {}
    names = [u["name"] for u in model["units"][:-1]]
    for k, method in enumerate(model["methods"]):
        for j, name in enumerate(names):
            value = method["precision_m"].get(name)
            fields[f"precision_{k}_{j}"] = "" if value is None else str(value)
    return page_form(revision, fields, changes)


def test_precision_table_blank_means_not_resolved(client, tiny_id, tiny_model):
    data = precision_form(tiny_model, 1, precision_1_1="0.08", precision_0_2="")
    answer = post(client, f"/projects/{tiny_id}/methods/precision", data)
    assert answer.status_code == 200, notice_of(answer.text)
    methods = model_of(client, tiny_id)["methods"]
    assert methods[1]["precision_m"]["Alluvial clay"] == 0.08
    assert "River gravel" not in methods[0]["precision_m"]
    assert last_message(client, tiny_id) == "Changed the precision table"


def test_bad_precision_is_refused_beside_its_cell(client, tiny_id, tiny_model):
    data = precision_form(tiny_model, 1, precision_2_0="-0.1")
    answer = post(client, f"/projects/{tiny_id}/methods/precision", data)
    assert answer.status_code == 422
    assert "must be > 0" in error_beside(answer.text, "methods[2].precision_m.Made ground")
    assert input_value(answer.text, field_id("methods[2].precision_m.Made ground")) == "-0.1"
    assert revision_of(client, tiny_id) == 1


def test_currency_label(client, tiny_id):
    answer = post(
        client,
        f"/projects/{tiny_id}/methods/currency",
        {"expected_revision": "1", "currency": "EUR"},
    )
    assert answer.status_code == 200
    assert model_of(client, tiny_id)["currency"] == "EUR"
    assert "(EUR/m)" in answer.text
    too_long = post(
        client,
        f"/projects/{tiny_id}/methods/currency",
        {"expected_revision": "2", "currency": "X" * 40},
    )
    assert too_long.status_code == 422
    assert "longer than 12" in error_beside(too_long.text, "currency")


def test_stale_page_and_undo(client, tiny_id, tiny_model):
    data = method_form(tiny_model["methods"][0], 1, per_metre=99)
    assert post(client, f"/projects/{tiny_id}/methods/0", data).status_code == 200
    stale = post(
        client,
        f"/projects/{tiny_id}/methods/0",
        method_form(tiny_model["methods"][0], 1, per_metre=1),
    )
    assert stale.status_code == 409 and "Reload the page" in notice_of(stale.text)
    answer = post(client, f"/projects/{tiny_id}/methods/undo", {"expected_revision": "2"})
    assert answer.status_code == 200 and 'id="methods"' in answer.text
    assert (
        model_of(client, tiny_id)["methods"][0]["cost"]["per_metre"]
        == tiny_model["methods"][0]["cost"]["per_metre"]
    )
