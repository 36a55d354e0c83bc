"""The Methods page's requirements and deliveries: shown, edited, bad input refused (4xx,
field named beside it, nothing stored)."""

from __future__ import annotations

from edit_helpers import error_beside, model_of, notice_of, page_text, post, revision_of

METHODS = "/projects/{}/methods"


def requirements_form(revision: int, **fields) -> dict:
    # tiny model methods: BH, CPT, DMT (indices 0, 1, 2)
    data = {
        "expected_revision": str(revision),
        "min_0": "2",
        "cal_rows": "0",
        "cal_method_0": "BH",
        "cal_for_0": "CPT",
        "cal_per_0": "4",
        "cal_within_0": "60",
        "test_rows": "0",
        "test_unit_0": "Alluvial clay",
        "test_param_0": "su",
        "test_name_0": "UU triaxial",
        "test_cov_0": "0.3",
        "test_red_0": "0.6",
    }
    data.update(fields)
    return data


def test_demo_methods_page_shows_deliveries_and_requirements(client):
    text = page_text(client, METHODS.format(1))
    assert "Thin-wall tube sample" in text  # a delivery of the demo's CP borehole
    assert "Requirements every plan must meet" in text
    # su in the soft clay: V = 0.3 unknown, at most 60% below the mean -> 9 results
    # (least n with t_0.95(n-1) sqrt(1 + 1/n) x 0.3 <= 0.6; EN 1990 Annex D, D.7.2)
    assert "EN 1990 Annex D: V = 0.3 (unknown)" in text


def test_requirements_edit_saves_them(client, tiny_id):
    answer = post(client, f"/projects/{tiny_id}/methods/requirements", requirements_form(1))
    assert answer.status_code == 200, notice_of(answer.text)
    req = model_of(client, tiny_id)["requirements"]
    assert req["min_probes"] == {"BH": 2}
    assert req["calibration"] == [{"method": "BH", "for": ["CPT"], "per": 4, "within_m": 60.0}]
    assert req["tests"][0]["characteristic"] == {"cov": 0.3, "max_reduction": 0.6,
                                                 "v_known": False}  # fmt: skip


def test_negative_count_is_refused_beside_its_field(client, tiny_id):
    answer = post(
        client, f"/projects/{tiny_id}/methods/requirements", requirements_form(1, min_0="-1")
    )
    assert answer.status_code == 422
    assert "must be >= 0" in error_beside(answer.text, "requirements.min_probes.BH")
    assert revision_of(client, tiny_id) == 1  # nothing stored
    assert "requirements" not in model_of(client, tiny_id)


def test_delivery_edit_and_unknown_unit_refused(client, tiny_id):
    data = {
        "expected_revision": "1",
        "rows": "0",
        "name_0": "Tube",
        "kind_0": "sample",
        "how_0": "every_m",
        "amount_0": "1.5",
        "class_0": "1",
        "category_0": "A",
        "units_0": "Alluvial clay",
        "parameters_0": "su, Cc",
    }
    answer = post(client, f"/projects/{tiny_id}/methods/0/delivers", data)
    assert answer.status_code == 200, notice_of(answer.text)
    saved = model_of(client, tiny_id)["methods"][0]["delivers"]
    assert saved[0]["every_m"] == 1.5 and saved[0]["parameters"] == ["su", "Cc"]
    bad = dict(data, expected_revision="2", units_0="Peat")
    answer = post(client, f"/projects/{tiny_id}/methods/0/delivers", bad)
    assert answer.status_code == 422
    assert "is not one of the units" in notice_of(answer.text) + answer.text
    assert revision_of(client, tiny_id) == 2


def test_api_refuses_a_requirement_naming_an_unknown_method(empty_client, tiny_model):
    broken = dict(tiny_model, requirements={"min_probes": {"XX": 1}})
    answer = empty_client.post("/api/projects", json=broken)
    assert answer.status_code == 422
    assert "requirements.min_probes.XX" in answer.text
    assert empty_client.get("/api/projects").json() == []  # nothing stored


def test_optimiser_job_that_cannot_meet_a_requirement_names_it(client, tiny_model):
    from decision_helpers import import_model, job_id_of, post_form, stored, wait_for_job

    model = dict(tiny_model, requirements={"min_probes": {"BH": 3}})
    pid = import_model(client, model)
    before = stored(client, pid)
    # 4000 pays the BH mobilisation (2500) and one borehole, not three
    answer = post_form(
        client, f"/projects/{pid}/optimise", {"budget": "4000", "methods": ["BH", "CPT"]}
    )
    state = wait_for_job(client, pid, job_id_of(answer.text))
    assert state["status"] == "failed"
    assert "at least 3 BH probes" in state["message"]
    assert stored(client, pid) == before
