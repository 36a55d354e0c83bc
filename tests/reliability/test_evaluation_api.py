"""GET /api/projects/{id}/evaluation: the document of `probewise evaluate --json`
(docs/model-file.md) for the project's current revision, recomputed when the project changes."""

from __future__ import annotations

import copy
import json
import subprocess
import sys

import pytest
from corpus import DATA, TINY
from fastapi.testclient import TestClient
from reliability_helpers import BASE_URL

from probewise.web.app import create_app

ROOT = DATA.parents[1]


@pytest.fixture
def client(tmp_path):
    with TestClient(create_app(tmp_path / "p.db", seed=False), base_url=BASE_URL) as c:
        yield c


def test_the_evaluation_is_the_cli_document(client):
    pid = client.post("/api/projects", json=TINY).json()["id"]
    answer = client.get(f"/api/projects/{pid}/evaluation")
    assert answer.status_code == 200
    cli = subprocess.run(
        [
            sys.executable,
            "-m",
            "probewise.cli",
            "evaluate",
            str(DATA / "tiny-model.json"),
            "--json",
        ],
        capture_output=True,
        text=True,
        cwd=ROOT,
        timeout=120,
    )
    assert cli.returncode == 0, cli.stderr
    assert answer.json() == json.loads(cli.stdout)


def test_the_evaluation_follows_the_current_revision(client):
    pid = client.post("/api/projects", json=TINY).json()["id"]
    first = client.get(f"/api/projects/{pid}/evaluation").json()
    assert [lay["name"] for lay in first["layouts"]] == [lay["name"] for lay in TINY["layouts"]]
    assert client.get(f"/api/projects/{pid}/evaluation").json() == first  # cached, same answer
    fewer = copy.deepcopy(TINY)
    fewer["layouts"] = fewer["layouts"][:1]
    saved = client.put(f"/api/projects/{pid}", json={"model": fewer, "expected_revision": 1})
    assert saved.status_code == 200
    second = client.get(f"/api/projects/{pid}/evaluation").json()
    assert [lay["name"] for lay in second["layouts"]] == [TINY["layouts"][0]["name"]]
    assert second["baseline"] == first["baseline"]


def test_a_site_with_no_cell_centre_is_a_field_error(client):
    """A sliver 10 m long and 0.5 m wide at 1.5 m spacing: the validator's area test passes
    (about 1.1 cells) but no cell centre falls inside; the answer names grid_spacing_m."""
    sliver = copy.deepcopy(TINY)
    sliver.update(
        site={"type": "Polygon", "coordinates": [[[0, 0], [10, 0], [10, 0.5], [0, 0]]]},
        grid_spacing_m=1.5,
        zones=[],
        areas_of_interest=[],
        exclusions=[],
        existing=[],
        layouts=[],
        bounds=[],
    )
    created = client.post("/api/projects", json=sliver)
    assert created.status_code == 201, created.text
    answer = client.get(f"/api/projects/{created.json()['id']}/evaluation")
    assert answer.status_code == 422
    [problem] = answer.json()["detail"]
    assert problem["field"] == "grid_spacing_m" and "finer spacing" in problem["problem"]


@pytest.mark.parametrize(("path", "status"), [("404404", 404), ("0", 422), ("x", 422)])
def test_missing_or_malformed_ids(client, path, status):
    answer = client.get(f"/api/projects/{path}/evaluation")
    assert answer.status_code == status
    assert answer.json()["detail"]


def test_the_route_is_in_the_openapi_schema(client):
    paths = client.get("/openapi.json").json()["paths"]
    operation = paths["/api/projects/{project_id}/evaluation"]["get"]
    assert {"200", "404", "422"} <= set(operation["responses"])
