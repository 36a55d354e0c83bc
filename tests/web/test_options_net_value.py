"""The optimiser form's net-value objective (docs/optimiser.md "Net value"): offered only when
the model has design elements, runs without a budget, saves the layout with its saving-cost
curve (docs/model-file.md ``optimiser_curve``), and bad input is refused naming the field."""

from __future__ import annotations

import pytest
from decision_helpers import import_model, job_id_of, layout_named, post_form, stored, wait_for_job


def square(x0, y0, x1, y1):
    return {"type": "Polygon", "coordinates": [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]]}


ELEMENTS = [  # invented
    {
        "name": "Platform treatment",
        "geometry": square(20, 20, 90, 80),
        "base_of": "Alluvial clay",
        "adverse": "deeper",
        "consequence": {"kind": "quantity", "rate_per_m3": 6, "reference_depth_m": 2},
    },
]


def start(client, pid, **fields):
    data = {"methods": ["BH", "CPT", "DMT"], **fields}
    return post_form(client, f"/projects/{pid}/optimise", data)


def test_objective_offered_only_with_elements(client, tiny_model):
    plain = import_model(client, tiny_model)
    assert 'value="net-value"' not in client.get(f"/projects/{plain}/options").text
    valued = import_model(client, dict(tiny_model, elements=ELEMENTS))
    page = client.get(f"/projects/{valued}/options").text
    assert 'name="objective"' in page and 'value="net-value"' in page


def test_net_value_job_saves_the_layout_with_its_curve(client, tiny_model):
    pid = import_model(client, dict(tiny_model, elements=ELEMENTS))
    answer = start(client, pid, objective="net-value", budget="", name="Worth buying")
    assert answer.status_code == 200, answer.text
    state = wait_for_job(client, pid, job_id_of(answer.text))
    assert state["status"] == "done", state
    result = state["result"]
    assert result["net_value"] == pytest.approx(result["expected_saving"] - result["cost"])
    layout = layout_named(stored(client, pid)["model"], "Worth buying")
    assert layout["origin"] == "optimised" and "budget" not in layout
    curve = layout["optimiser_curve"]
    assert all({"cost", "expected_saving", "net_value"} <= set(p) for p in curve)
    assert sum(bool(p.get("optimum")) for p in curve) == 1
    assert "net value" in client.get(f"/projects/{pid}/options").text


def test_net_value_refused_without_elements_and_gain_needs_a_budget(client, tiny_model):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    answer = start(client, pid, objective="net-value", budget="")
    assert answer.status_code == 422 and "elements" in answer.text
    answer = start(client, pid, objective="gain", budget="")
    assert answer.status_code == 422 and "budget" in answer.text
    answer = start(client, pid, objective="most-holes", budget="5000")
    assert answer.status_code == 422 and "objective" in answer.text
    assert stored(client, pid) == before
