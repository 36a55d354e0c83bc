"""Options page: layouts, probe edits on the map's routes, the guidance grid, the optimiser job."""

from __future__ import annotations

import copy
import html

import pytest
from caution_check import assert_caution
from decision_helpers import (
    import_model,
    job_id_of,
    job_state,
    layout_named,
    post_form,
    stored,
    wait_for_job,
)
from web_helpers import htmx

LEAN = "Lean: CPTu only"
TINY_LAYOUT = "Four boreholes"


def options_url(project_id: int) -> str:
    return f"/projects/{project_id}/options"


# ---------------------------------------------------------------- pages


def test_options_page_on_the_demo(client, demo_model):
    page = client.get(options_url(1))
    assert page.status_code == 200
    text = page.text
    assert_caution(text)
    assert 'class="pw-map options-map"' in text and 'data-map-json="options-map-data"' in text
    for layout in demo_model["layouts"]:
        assert html.escape(layout["name"], quote=False) in text
    # the first layout is shown, its probes in the keyboard table
    first = demo_model["layouts"][0]
    assert first["probes"][0]["id"] in text
    assert 'id="add-method"' in text and 'id="optimiser-budget"' in text
    assert 'href="/projects/1/options"' in text  # the nav links the step


def test_options_page_on_the_tiny_model(client, tiny_model):
    pid = import_model(client, tiny_model)
    page = client.get(options_url(pid), params={"layout": "Two boreholes and six CPTs"})
    assert page.status_code == 200
    assert "CPT06" in page.text
    assert "site grid" in page.text


def test_options_fragment_for_htmx(client):
    answer = client.get(options_url(1), headers=htmx())
    assert answer.status_code == 200
    assert answer.text.lstrip().startswith('<section id="options"')  # the section, not a page
    assert "<html" not in answer.text


def test_empty_state_without_layouts(client, tiny_model):
    model = dict(tiny_model, layouts=[])
    pid = import_model(client, model)
    page = client.get(options_url(pid))
    assert page.status_code == 200
    assert "No layouts yet" in page.text


def test_deleted_project_is_read_only(client, tiny_model):
    pid = import_model(client, tiny_model)
    assert client.delete(f"/api/projects/{pid}").status_code == 200
    page = client.get(options_url(pid))
    assert page.status_code == 200
    assert 'id="add-probe-form"' not in page.text
    assert 'id="optimiser-form"' not in page.text


# ---------------------------------------------------------------- probe edits


def add(client, pid, revision, layout, **fields):
    data = {"expected_revision": revision, "layout": layout, **fields}
    return post_form(client, f"{options_url(pid)}/probes/add", data)


def test_add_move_change_and_remove_a_probe(client, tiny_model):
    pid = import_model(client, tiny_model)
    start = stored(client, pid)
    answer = add(client, pid, start["revision"], TINY_LAYOUT, method="CPT", x="40", y="80")
    assert answer.status_code == 200, answer.text
    assert 'id="options"' in answer.text and "Added probe CPT-01" in answer.text
    after_add = stored(client, pid)
    assert after_add["revision"] == start["revision"] + 1
    probes = layout_named(after_add["model"], TINY_LAYOUT)["probes"]
    assert probes[-1] == {"id": "CPT-01", "method": "CPT", "x": 40.0, "y": 80.0, "depth_m": None}

    moved = post_form(
        client,
        f"{options_url(pid)}/probes/update",
        {
            "expected_revision": after_add["revision"],
            "layout": TINY_LAYOUT,
            "probe": "CPT-01",
            "x": "45.5",
            "y": "81.25",
        },
    )
    assert moved.status_code == 200, moved.text
    after_move = stored(client, pid)
    assert after_move["revision"] == after_add["revision"] + 1
    probe = layout_named(after_move["model"], TINY_LAYOUT)["probes"][-1]
    assert (probe["x"], probe["y"]) == (45.5, 81.25)

    changed = post_form(
        client,
        f"{options_url(pid)}/probes/update",
        {
            "expected_revision": after_move["revision"],
            "layout": TINY_LAYOUT,
            "probe": "CPT-01",
            "method": "DMT",
            "depth_m": "6.5",
        },
    )
    assert changed.status_code == 200, changed.text
    probe = layout_named(stored(client, pid)["model"], TINY_LAYOUT)["probes"][-1]
    assert probe["method"] == "DMT" and probe["depth_m"] == 6.5

    revision = stored(client, pid)["revision"]
    removed = post_form(
        client,
        f"{options_url(pid)}/probes/remove",
        {"expected_revision": revision, "layout": TINY_LAYOUT, "probe": "CPT-01"},
    )
    assert removed.status_code == 200
    final = stored(client, pid)
    assert final["revision"] == revision + 1
    assert [p["id"] for p in layout_named(final["model"], TINY_LAYOUT)["probes"]] == [
        "BH01",
        "BH02",
        "BH03",
        "BH04",
    ]


def test_probe_outside_the_site_is_refused(client, tiny_model):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    answer = add(client, pid, before["revision"], TINY_LAYOUT, method="BH", x="250", y="60")
    assert answer.status_code == 422
    assert "outside the site" in answer.text
    assert stored(client, pid) == before


def test_moving_a_probe_outside_the_site_is_refused(client, tiny_model):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    answer = post_form(
        client,
        f"{options_url(pid)}/probes/update",
        {
            "expected_revision": before["revision"],
            "layout": TINY_LAYOUT,
            "probe": "BH01",
            "x": "-5",
            "y": "60",
        },
    )
    assert answer.status_code == 422
    assert "outside the site" in answer.text
    assert stored(client, pid) == before


@pytest.mark.parametrize(
    ("fields", "words"),
    [
        ({"method": "BH", "x": "abc", "y": "10"}, "not a number"),
        ({"method": "XX", "x": "10", "y": "10"}, "must be one of"),
        ({"method": "BH", "x": "10", "y": "10", "depth_m": "-2"}, "above 0 m"),
        ({"method": "CPT", "x": "10", "y": "10", "depth_m": "99"}, "deeper than the maximum"),
        ({"method": "BH", "x": "10", "y": "10", "id": "BH01"}, "already a probe"),
    ],
)
def test_bad_probe_input_is_refused_with_a_message(client, tiny_model, fields, words):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    answer = add(client, pid, before["revision"], TINY_LAYOUT, **fields)
    assert answer.status_code == 422, answer.text
    assert words in answer.text
    assert stored(client, pid) == before


def test_probe_in_an_exclusion_is_saved_with_a_warning(client, tiny_model):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    answer = add(client, pid, before["revision"], TINY_LAYOUT, method="BH", x="170", y="100")
    assert answer.status_code == 200
    assert "notice-warning" in answer.text and "Live gas main easement" in answer.text
    assert stored(client, pid)["revision"] == before["revision"] + 1


def test_stale_page_is_refused(client, tiny_model):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    answer = add(client, pid, before["revision"] - 1 + 5, TINY_LAYOUT, method="BH", x="10", y="10")
    assert answer.status_code == 409
    assert "changed since" in answer.text
    assert stored(client, pid) == before


def test_plain_form_post_redirects(client, tiny_model):
    pid = import_model(client, tiny_model)
    revision = stored(client, pid)["revision"]
    answer = post_form(
        client,
        f"{options_url(pid)}/probes/add",
        {
            "expected_revision": revision,
            "layout": TINY_LAYOUT,
            "method": "BH",
            "x": "20",
            "y": "20",
        },
        as_htmx=False,
    )
    assert answer.status_code == 303
    assert answer.headers["location"].startswith(options_url(pid))


def test_unknown_layout_is_refused(client, tiny_model):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    answer = add(client, pid, before["revision"], "No such layout", method="BH", x="1", y="1")
    assert answer.status_code == 409
    assert "no layout named" in answer.text
    assert stored(client, pid) == before


# ---------------------------------------------------------------- layouts, undo


def test_new_copy_rename_delete_and_undo(client, tiny_model):
    pid = import_model(client, tiny_model)
    url = options_url(pid)
    rev = stored(client, pid)["revision"]
    assert (
        post_form(
            client, f"{url}/layouts/new", {"expected_revision": rev, "name": "Stage 1"}
        ).status_code
        == 200
    )
    model = stored(client, pid)["model"]
    assert layout_named(model, "Stage 1") == {"name": "Stage 1", "origin": "hand", "probes": []}

    rev = stored(client, pid)["revision"]
    answer = post_form(client, f"{url}/layouts/new", {"expected_revision": rev, "name": "Stage 1"})
    assert answer.status_code == 422 and "already a layout" in answer.text

    answer = post_form(
        client, f"{url}/layouts/duplicate", {"expected_revision": rev, "layout": TINY_LAYOUT}
    )
    assert answer.status_code == 200
    copied = layout_named(stored(client, pid)["model"], f"{TINY_LAYOUT} (copy)")
    assert len(copied["probes"]) == 4

    rev = stored(client, pid)["revision"]
    answer = post_form(
        client,
        f"{url}/layouts/rename",
        {"expected_revision": rev, "layout": f"{TINY_LAYOUT} (copy)", "new_name": "Copy renamed"},
    )
    assert answer.status_code == 200
    names = [lay["name"] for lay in stored(client, pid)["model"]["layouts"]]
    assert "Copy renamed" in names and f"{TINY_LAYOUT} (copy)" not in names

    rev = stored(client, pid)["revision"]
    answer = post_form(
        client, f"{url}/layouts/delete", {"expected_revision": rev, "layout": "Copy renamed"}
    )
    assert answer.status_code == 200
    assert "Copy renamed" not in [lay["name"] for lay in stored(client, pid)["model"]["layouts"]]

    rev = stored(client, pid)["revision"]
    answer = post_form(client, f"{url}/undo", {"expected_revision": rev})
    assert answer.status_code == 200
    after = stored(client, pid)
    assert after["revision"] == rev + 1
    assert "Copy renamed" in [lay["name"] for lay in after["model"]["layouts"]]


def test_guidance_grid_creates_a_layout(client, tiny_model):
    pid = import_model(client, tiny_model)
    rev = stored(client, pid)["revision"]
    answer = post_form(
        client,
        f"{options_url(pid)}/guidance",
        {"expected_revision": rev, "method": "BH", "spacing_m": "50"},
    )
    assert answer.status_code == 200, answer.text
    model = stored(client, pid)["model"]
    grid = model["layouts"][-1]
    assert grid["origin"] == "guidance"
    # 200 x 120 m site, 50 m grid centred half a spacing in: 4 x 3 points, of which the one
    # at (175, 125)... lies outside; (175, 75) and (175, 25) are outside the gas easement
    assert grid["probes"] and all(p["method"] == "BH" for p in grid["probes"])
    assert len({(p["x"], p["y"]) for p in grid["probes"]}) == len(grid["probes"])
    assert html.escape(grid["name"], quote=False) in answer.text


def test_guidance_grid_refuses_a_bad_spacing(client, tiny_model):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    for spacing, words in (("0", "positive"), ("x", "not a number"), ("5000", "finer spacing")):
        answer = post_form(
            client,
            f"{options_url(pid)}/guidance",
            {"expected_revision": before["revision"], "method": "BH", "spacing_m": spacing},
        )
        assert answer.status_code == 422, spacing
        assert words in answer.text
    assert stored(client, pid) == before


# ---------------------------------------------------------------- the optimiser job


def start(client, pid, **fields):
    data = {"methods": ["BH", "CPT", "DMT"], **fields}
    return post_form(client, f"/projects/{pid}/optimise", data)


def test_optimiser_job_runs_and_saves_a_layout(client, tiny_model):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    answer = start(client, pid, budget="8000", name="Best for 8k")
    assert answer.status_code == 200, answer.text
    assert 'id="optimiser-job"' in answer.text
    job_id = job_id_of(answer.text)
    state = wait_for_job(client, pid, job_id)
    assert state["status"] == "done", state
    assert state["result"]["layout"] == "Best for 8k"
    assert state["result"]["cost"] <= 8000 + 1e-6
    after = stored(client, pid)
    assert after["revision"] == before["revision"] + 1
    layout = layout_named(after["model"], "Best for 8k")
    assert layout["origin"] == "optimised"
    assert layout["probes"]
    curve = layout["optimiser_curve"]
    assert curve and all(p["cost"] <= 8000 + 1e-6 for p in curve)
    gains = [p["information_gain_bits"] for p in curve]
    assert gains == sorted(gains)  # the curve is an upper envelope: gain rises with cost
    # the watching page is told to show the new layout
    fragment = client.get(
        f"/projects/{pid}/jobs/{job_id}", params={"watching": "1"}, headers=htmx()
    )
    assert fragment.status_code == 200
    assert 'hx-trigger="load"' in fragment.text and "Best%20for%208k" in fragment.text
    # and the Options page shows the last run
    assert "Saved as layout" in client.get(options_url(pid)).text


def test_optimiser_job_can_be_cancelled(client, demo_model):
    pid = import_model(client, demo_model)
    before = stored(client, pid)
    answer = post_form(
        client,
        f"/projects/{pid}/optimise",
        {"budget": "120000", "methods": ["CP", "RC", "CPTu", "SDMT", "TP"]},
    )
    assert answer.status_code == 200
    job_id = job_id_of(answer.text)
    cancelled = post_form(client, f"/projects/{pid}/jobs/{job_id}/cancel", {})
    assert cancelled.status_code == 200
    state = wait_for_job(client, pid, job_id)
    assert state["status"] == "cancelled"
    assert stored(client, pid) == before


def test_optimiser_failure_leaves_the_project_unchanged(client, tiny_model):
    pid = import_model(client, tiny_model)
    before = stored(client, pid)
    answer = start(client, pid, budget="100")  # below every mobilisation
    assert answer.status_code == 200
    state = wait_for_job(client, pid, job_id_of(answer.text))
    assert state["status"] == "failed"
    assert "mobilisation" in state["message"]
    assert stored(client, pid) == before
    page = client.get(options_url(pid)).text
    assert "job-failed" in page and "mobilisation" in page


@pytest.mark.parametrize(
    ("fields", "words"),
    [
        ({"budget": "", "methods": ["BH"]}, "positive amount"),
        ({"budget": "-5", "methods": ["BH"]}, "positive amount"),
        ({"budget": "lots", "methods": ["BH"]}, "positive amount"),
        ({"budget": "5000", "methods": []}, "at least one method"),
        ({"budget": "5000", "methods": ["ZZ"]}, "no method"),
    ],
)
def test_optimiser_refuses_bad_input(client, tiny_model, fields, words):
    pid = import_model(client, tiny_model)
    answer = post_form(client, f"/projects/{pid}/optimise", fields)
    assert answer.status_code == 422
    assert words in answer.text
    assert "data-job" not in answer.text  # no job was started


def test_one_optimiser_per_project_and_pages_stay_responsive(client, demo_model):
    pid = import_model(client, demo_model)
    before = stored(client, pid)
    answer = post_form(
        client,
        f"/projects/{pid}/optimise",
        {"budget": "150000", "methods": ["CP", "RC", "CPTu", "SDMT", "TP"]},
    )
    job_id = job_id_of(answer.text)
    try:
        second = post_form(
            client, f"/projects/{pid}/optimise", {"budget": "9000", "methods": ["CPTu"]}
        )
        assert second.status_code == 409
        assert "already" in second.text
        # other requests are served while it runs (no timing assertion: just that they answer)
        assert client.get(f"/projects/{pid}").status_code == 200
        assert client.get(options_url(pid)).status_code == 200
        assert job_state(client, pid, job_id)["status"] in {"queued", "running", "done"}
    finally:
        post_form(client, f"/projects/{pid}/jobs/{job_id}/cancel", {})
        state = wait_for_job(client, pid, job_id)
    if state["status"] == "cancelled":
        assert stored(client, pid) == before


def test_job_of_another_project_is_not_found(client, tiny_model):
    pid = import_model(client, tiny_model)
    answer = start(client, pid, budget="100")
    job_id = job_id_of(answer.text)
    wait_for_job(client, pid, job_id)
    assert client.get(f"/projects/1/jobs/{job_id}").status_code == 404
    assert client.get(f"/projects/{pid}/jobs/999999").status_code == 404


def test_optimised_layout_keeps_extra_fields_through_edits(client, tiny_model):
    model = copy.deepcopy(tiny_model)
    model["layouts"][0]["origin"] = "optimised"
    model["layouts"][0]["optimiser_curve"] = [{"cost": 1.0, "information_gain_bits": 0.5}]
    pid = import_model(client, model)
    rev = stored(client, pid)["revision"]
    assert add(client, pid, rev, TINY_LAYOUT, method="BH", x="20", y="20").status_code == 200
    layout = layout_named(stored(client, pid)["model"], TINY_LAYOUT)
    assert layout["origin"] == "optimised" and layout["optimiser_curve"]
