"""The JSON API: CRUD over projects, optimistic concurrency, one error form throughout."""

from __future__ import annotations

import json

import pytest
from web_helpers import project_count

from probewise.errors import InputError
from probewise.io.model_file import validate_model


def field_problems(answer) -> list[dict]:
    body = answer.json()
    assert isinstance(body["detail"], list), body
    for item in body["detail"]:
        assert set(item) == {"field", "problem"}, item
        assert item["field"] and item["problem"]
    return body["detail"]


def test_list_projects(client, demo_model):
    answer = client.get("/api/projects")
    assert answer.status_code == 200
    # a fresh database gets both invented demos; the relief road is project 1
    demos = {p["id"]: p for p in answer.json()}
    assert sorted(demos) == [1, 2]
    assert demos[2]["name"] == "Demo (invented): Ostrey reclaimed quay strip"
    demo = demos[1]
    assert demo["name"] == demo_model["name"]
    assert demo["revision"] == 1
    assert demo["deleted"] is False
    assert demo["n_layouts"] == len(demo_model.get("layouts", []))
    assert demo["updated_at"]


def test_get_project_returns_model_and_revision(client, demo_model):
    answer = client.get("/api/projects/1")
    assert answer.status_code == 200
    body = answer.json()
    assert body["id"] == 1 and body["revision"] == 1
    assert body["model"] == validate_model(demo_model)


def test_create_project(empty_client, tiny_model):
    answer = empty_client.post("/api/projects", json=tiny_model)
    assert answer.status_code == 201
    assert answer.json() == {"id": 1, "revision": 1}
    stored = empty_client.get("/api/projects/1").json()
    assert stored["name"] == tiny_model["name"]


def test_create_invalid_model_gives_the_field_and_problem(empty_client, tiny_model):
    broken = json.loads(json.dumps(tiny_model))
    broken["units"][1]["correlation"]["range_m"] = -5
    with pytest.raises(InputError) as expected:
        validate_model(broken)
    answer = empty_client.post("/api/projects", json=broken)
    assert answer.status_code == 422
    assert field_problems(answer) == [
        {"field": expected.value.field, "problem": expected.value.problem}
    ]
    assert project_count(empty_client) == 0


@pytest.mark.parametrize(
    ("content", "field"),
    [
        (b"{broken", "body"),
        (b"[1, 2, 3]", "body"),
        (b"", "body"),
    ],
)
def test_malformed_bodies_use_the_same_error_form(empty_client, content, field):
    answer = empty_client.post(
        "/api/projects", content=content, headers={"Content-Type": "application/json"}
    )
    assert answer.status_code == 422
    problems = field_problems(answer)
    assert problems[0]["field"] == field
    assert project_count(empty_client) == 0


def test_save_with_the_current_revision(client):
    project = client.get("/api/projects/1").json()
    model = dict(project["model"], name="Renamed through the API")
    answer = client.put("/api/projects/1", json={"model": model, "expected_revision": 1})
    assert answer.status_code == 200
    assert answer.json() == {"id": 1, "revision": 2}
    assert client.get("/api/projects/1").json()["name"] == "Renamed through the API"


def test_save_on_a_stale_revision_is_refused_and_changes_nothing(client):
    model = client.get("/api/projects/1").json()["model"]
    first = client.put(
        "/api/projects/1", json={"model": dict(model, name="First"), "expected_revision": 1}
    )
    assert first.status_code == 200
    stale = client.put(
        "/api/projects/1", json={"model": dict(model, name="Second"), "expected_revision": 1}
    )
    assert stale.status_code == 409
    assert isinstance(stale.json()["detail"], str)
    assert "revision" in stale.json()["detail"]
    current = client.get("/api/projects/1").json()
    assert current["revision"] == 2 and current["name"] == "First"


def test_save_an_invalid_model_names_the_field_under_model(client):
    model = client.get("/api/projects/1").json()["model"]
    broken = json.loads(json.dumps(model))
    broken["grid_spacing_m"] = 0
    with pytest.raises(InputError) as expected:
        validate_model(broken)
    answer = client.put("/api/projects/1", json={"model": broken, "expected_revision": 1})
    assert answer.status_code == 422
    [problem] = field_problems(answer)
    assert problem["field"] == f"model.{expected.value.field}"
    assert problem["problem"] == expected.value.problem
    assert client.get("/api/projects/1").json()["revision"] == 1


def test_save_without_expected_revision_is_a_field_error(client):
    model = client.get("/api/projects/1").json()["model"]
    answer = client.put("/api/projects/1", json={"model": model})
    assert answer.status_code == 422
    assert [p["field"] for p in field_problems(answer)] == ["expected_revision"]
    answer = client.put("/api/projects/1", json={"model": model, "expected_revision": "x"})
    assert answer.status_code == 422
    assert field_problems(answer)[0]["field"] == "expected_revision"


def test_undo_through_the_api(client, demo_model):
    model = client.get("/api/projects/1").json()["model"]
    client.put(
        "/api/projects/1", json={"model": dict(model, name="Edited"), "expected_revision": 1}
    )
    stale = client.post("/api/projects/1/undo", json={"expected_revision": 1})
    assert stale.status_code == 409
    answer = client.post("/api/projects/1/undo", json={"expected_revision": 2})
    assert answer.status_code == 200
    assert answer.json() == {"id": 1, "revision": 3}
    assert client.get("/api/projects/1").json()["name"] == demo_model["name"]
    # An undo without a body applies to the current revision.
    again = client.post("/api/projects/1/undo")
    assert again.status_code == 409  # back at the start: nothing to undo
    assert "nothing to undo" in again.json()["detail"]


def test_duplicate_delete_restore(client, demo_model):
    answer = client.post("/api/projects/1/duplicate")
    assert answer.status_code == 201
    copy_id = answer.json()["id"]
    assert client.get(f"/api/projects/{copy_id}").json()["name"] == f"{demo_model['name']} (copy)"

    answer = client.delete(f"/api/projects/{copy_id}")
    assert answer.status_code == 200
    assert answer.json() == {"id": copy_id, "deleted": True}
    assert sorted(p["id"] for p in client.get("/api/projects").json()) == [1, 2]  # the demos
    everything = client.get("/api/projects", params={"include_deleted": True}).json()
    assert {p["id"]: p["deleted"] for p in everything} == {1: False, 2: False, copy_id: True}
    # A deleted project can be read but not changed.
    model = client.get(f"/api/projects/{copy_id}").json()["model"]
    refused = client.put(f"/api/projects/{copy_id}", json={"model": model, "expected_revision": 1})
    assert refused.status_code == 409

    answer = client.post(f"/api/projects/{copy_id}/restore")
    assert answer.status_code == 200
    assert answer.json() == {"id": copy_id, "deleted": False}
    assert len(client.get("/api/projects").json()) == 3  # two demos and the copy


def test_export_is_a_model_file_download(client, demo_model):
    answer = client.get("/api/projects/1/export")
    assert answer.status_code == 200
    assert answer.headers["content-type"].startswith("application/json")
    assert "attachment" in answer.headers["content-disposition"]
    assert validate_model(answer.json()) == validate_model(demo_model)


def test_revisions(client):
    model = client.get("/api/projects/1").json()["model"]
    client.put("/api/projects/1", json={"model": dict(model, name="Two"), "expected_revision": 1})
    answer = client.get("/api/projects/1/revisions")
    assert answer.status_code == 200
    revisions = answer.json()
    assert [r["number"] for r in revisions] == [1, 2]
    assert revisions[1]["name"] == "Two"
    assert all(r["message"] and r["created_at"] for r in revisions)


@pytest.mark.parametrize(
    ("method", "path"),
    [
        ("GET", "/api/projects/404"),
        ("PUT", "/api/projects/404"),
        ("POST", "/api/projects/404/undo"),
        ("POST", "/api/projects/404/duplicate"),
        ("DELETE", "/api/projects/404"),
        ("POST", "/api/projects/404/restore"),
        ("GET", "/api/projects/404/export"),
        ("GET", "/api/projects/404/revisions"),
    ],
)
def test_missing_project_is_404_with_a_message(client, tiny_model, method, path):
    body = {"model": tiny_model, "expected_revision": 1} if method == "PUT" else None
    answer = client.request(method, path, json=body)
    assert answer.status_code == 404
    assert "404" in answer.json()["detail"]


def test_unknown_api_path_is_json_404(client):
    answer = client.get("/api/nothing-here")
    assert answer.status_code == 404
    assert isinstance(answer.json()["detail"], str)


def test_bad_path_parameter_is_a_field_error(client):
    answer = client.get("/api/projects/abc")
    assert answer.status_code == 422
    assert field_problems(answer)[0]["field"] == "path.project_id"


def test_openapi_schema_lists_the_api(client):
    schema = client.get("/openapi.json").json()
    paths = schema["paths"]
    for path in (
        "/api/projects",
        "/api/projects/{project_id}",
        "/api/projects/{project_id}/undo",
        "/api/projects/{project_id}/duplicate",
        "/api/projects/{project_id}/restore",
        "/api/projects/{project_id}/export",
        "/api/projects/{project_id}/revisions",
    ):
        assert path in paths, path
    assert set(paths["/api/projects/{project_id}"]) == {"get", "put", "delete"}
    assert "/" not in paths  # the HTML pages stay out of the API schema
