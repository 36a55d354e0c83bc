"""The Methods page's refusal rules, rigs and cost items, the schedule's programme, warnings
and per-hole instructions, and the API's refusal of bad programme fields (docs/model.md
"Refusal and pre-drilling", "Cost", "Programme")."""

from __future__ import annotations

import copy
import re
from urllib.parse import urlencode

import pytest
from edit_helpers import (
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

from probewise.app.schedule import build_schedule
from probewise.app.to_core import to_core
from probewise.io.model_file import validate_model
from probewise.web.templating import field_id, format_money_whole


def _method_form(method: dict, revision: int, **changes) -> dict:
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
        "cannot_penetrate": method["cannot_penetrate"],
        "proves_refusal_shown": "1",
        "proves_refusal": "1",
        "rigs": "",
        "move_days": "",
        "refusal_unit_0": "",
        "refusal_chance_0": "",
        "predrill_per_metre_0": "",
        "predrill_rate_0": "",
    }
    return page_form(revision, fields, changes)


def test_refusal_rule_rigs_and_moves_are_saved(client, tiny_id, tiny_model):
    data = _method_form(
        tiny_model["methods"][1],
        1,
        rigs="2",
        move_days="0,25",
        proves_refusal="",
        refusal_unit_0="River gravel",
        refusal_chance_0="0.8",
        predrill_per_metre_0="55",
        predrill_rate_0="20",
    )
    data.pop("proves_refusal")
    answer = post(client, f"/projects/{tiny_id}/methods/1", data)
    assert answer.status_code == 200, notice_of(answer.text)
    saved = model_of(client, tiny_id)["methods"][1]
    assert saved["rigs"] == 2 and saved["move_days"] == 0.25
    assert saved["proves_refusal"] is False
    assert saved["refusal"] == [
        {
            "unit": "River gravel",
            "chance": 0.8,
            "predrill": {"per_metre": 55.0, "metres_per_day": 20.0},
        }
    ]
    assert last_message(client, tiny_id) == "Changed refusal rules and rigs and moves of method CPT"
    text = page_text(client, f"/projects/{tiny_id}/methods")
    assert input_value(text, field_id("methods[1].rigs")) == "2"
    assert input_value(text, field_id("methods[1].refusal[0].chance")) == "0.8"


@pytest.mark.parametrize(
    "changes, path, words",
    [
        ({"rigs": "-1"}, "methods[1].rigs", ">= 1"),
        ({"move_days": "-2"}, "methods[1].move_days", ">= 0"),
        (
            {"refusal_unit_0": "Basalt", "refusal_chance_0": "0.5"},
            "methods[1].refusal[0].unit",
            "no unit",
        ),
        (
            {"refusal_unit_0": "River gravel", "refusal_chance_0": "1.2"},
            "methods[1].refusal[0].chance",
            "<= 1",
        ),
        (
            {"refusal_unit_0": "River gravel", "predrill_per_metre_0": "40"},
            "methods[1].refusal[0].predrill.metres_per_day",
            "required",
        ),
    ],
)
def test_bad_programme_fields_are_refused_beside_the_field(
    client, tiny_id, tiny_model, changes, path, words
):
    answer = post(
        client,
        f"/projects/{tiny_id}/methods/1",
        _method_form(tiny_model["methods"][1], 1, **changes),
    )
    assert answer.status_code == 422
    shown = error_beside(answer.text, path)
    assert words in shown, (shown, notice_of(answer.text))
    assert revision_of(client, tiny_id) == 1


def test_cost_items_are_saved_and_a_bad_contingency_is_refused(client, tiny_id):
    url = f"/projects/{tiny_id}/methods/cost-items"
    bad = page_form(1, {"reporting": "2,500", "contingency_percent": "120"}, {})
    answer = post(client, url, bad)
    assert answer.status_code == 422
    assert "<= 100" in error_beside(answer.text, "cost_items.contingency_percent")
    assert revision_of(client, tiny_id) == 1
    good = page_form(1, {"reporting": "2,500", "contingency_percent": "10"}, {})
    answer = post(client, url, good)
    assert answer.status_code == 200, notice_of(answer.text)
    items = model_of(client, tiny_id)["cost_items"]
    assert items["reporting"] == 2500.0 and items["contingency_percent"] == 10.0
    assert items["supervision_per_day"] == 0.0


def test_api_refuses_a_bad_refusal_rule_and_stores_nothing(client, tiny_model):
    before = client.get("/api/projects").json()
    bad = copy.deepcopy(tiny_model)
    bad["methods"][1]["refusal"] = [{"unit": "Basalt", "chance": 0.5}]
    answer = client.post("/api/projects", json=bad)
    assert 400 <= answer.status_code < 500
    assert "methods[1].refusal[0].unit" in answer.text
    assert client.get("/api/projects").json() == before


def test_schedule_shows_the_programme_warnings_and_instructions(client, demo_model):
    """The demo: the page's cost breakdown total is the layout's cost; each CPTu that stops on
    the gravel carries its warning; every hole has its instructions with P5-P95 bands."""
    layout = "Mixed: boreholes + CPTu along the culvert and approach"
    text = page_text(client, f"/projects/1/schedule?{urlencode({'layout': layout})}")
    schedule = build_schedule(to_core(validate_model(demo_model)), layout)
    total = re.search(r'id="cost-items-total">([^<]*)<', text).group(1)
    assert total == format_money_whole(schedule.totals.cost)
    assert 'id="programme-calendar-days"' in text and "rig-days" in text
    cpt_rows = [r for r in schedule.probes if r["method"] == "CPTu"]
    assert cpt_rows and all(
        any("stop on Sand and gravel" in w for w in r["warnings"]) for r in cpt_rows
    )
    assert all(
        any("No person entry" in w for w in r["warnings"])
        for r in schedule.probes
        if r["kind"] == "trial_pit" and r["depth_m"] > 1.2
    )
    for row in schedule.probes:
        assert f'id="instruction-{row["id"]}"' in text
    first = schedule.instructions[0]
    assert first.bands and all(b.p05_m <= b.p95_m for b in first.bands)
    assert "stop and call the engineer" in first.unexpected
