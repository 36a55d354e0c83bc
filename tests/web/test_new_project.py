"""Starting a project from nothing on the projects page: a blank or templated model that the
rest of the app can use at once, and refusals that name the field and store nothing."""

from __future__ import annotations

import pytest
from web_helpers import htmx, project_count

from probewise.app.new_project import STARTING_POINTS, starting_spacing_m
from probewise.io.model_file import validate_model

BOX = "451000, 283000\n451400, 283000\n451400, 283200\n451000, 283200"


def create(client, **fields):
    form = {"name": "Quarry lane", "crs": "", "currency": "GBP", "outline": "", "start": "blank"}
    return client.post("/projects/new", data={**form, **fields}, headers=htmx())


def test_the_projects_page_offers_a_new_project(client):
    page = client.get("/")
    assert page.status_code == 200
    assert 'action="/projects/new"' in page.text
    for point in STARTING_POINTS.values():
        assert point.label in page.text


@pytest.mark.parametrize("start", sorted(STARTING_POINTS))
def test_each_starting_point_makes_a_project_the_pages_can_show(client, start):
    answer = create(client, name=f"New {start}", crs="EPSG:27700", outline=BOX, start=start)
    assert answer.status_code == 200, answer.text
    target = answer.headers["HX-Redirect"]
    project_id = int(target.rsplit("/", 1)[1])
    model = client.get(f"/api/projects/{project_id}").json()["model"]
    validate_model(model)  # what the store holds is a valid model file
    assert model["crs"] == "EPSG:27700" and model["currency"] == "GBP"
    assert model["site"]["coordinates"][0][0] == [451000.0, 283000.0]
    # 400 m x 200 m: sqrt(80,000 / 2,500) = 5.66 m, rounded up to the next of 1-2-5 x 10^k
    assert model["grid_spacing_m"] == 10.0
    for page in ("", "/site", "/ground", "/methods", "/options", "/compare", "/schedule"):
        assert client.get(f"{target}{page}").status_code == 200, page
    if start != "blank":
        assert model["methods"] and model["boundaries_of_interest"]
        assert all("invented" in u["description"] for u in model["units"])


def test_without_an_outline_the_site_is_a_100_m_square_on_a_site_grid(client):
    answer = create(client)
    model = client.get(f"/api/projects/{answer.headers['HX-Redirect'].rsplit('/', 1)[1]}").json()
    site = model["model"]["site"]["coordinates"][0]
    assert model["model"]["crs"] is None
    assert site == [[0.0, 0.0], [100.0, 0.0], [100.0, 100.0], [0.0, 100.0], [0.0, 0.0]]


@pytest.mark.parametrize(
    ("fields", "field", "words"),
    [
        ({"name": "  "}, "name", "is required"),
        ({"crs": "EPSG:99999"}, "crs", "not a CRS"),
        ({"outline": "0, 0\n10, 0"}, "outline", "at least 3"),
        ({"outline": "a, b\n1, 2\n3, 4"}, "outline", "not a number"),
        ({"name": "Fenmere relief road crossing (invented demo)"}, "name", "already exists"),
        ({"start": "castle"}, "start", "unknown starting point"),
    ],
)
def test_bad_input_names_the_field_and_stores_nothing(client, fields, field, words):
    demo_name = client.get("/api/projects").json()[0]["name"]
    if fields.get("name", "").startswith("Fenmere"):
        fields = {"name": demo_name}
    before = project_count(client)
    answer = create(client, **fields)
    assert answer.status_code == 400
    assert f'<code class="field-path">{field}</code>' in answer.text
    assert words in answer.text
    assert project_count(client) == before


@pytest.mark.parametrize(
    ("area_m2", "spacing_m"),
    [(10_000, 2.0), (80_000, 10.0), (2_500, 1.0), (1_000_000, 20.0), (25_000_000, 100.0)],
)
def test_starting_spacing_is_the_next_round_spacing(area_m2, spacing_m):
    # worked by hand: sqrt(area / 2,500) rounded up to 1, 2 or 5 x 10^k
    assert starting_spacing_m(area_m2) == spacing_m


def test_the_overview_lists_what_a_new_project_still_lacks(client):
    target = create(client, start="embankment").headers["HX-Redirect"]
    page = client.get(target).text
    assert 'id="readiness"' in page
    assert "replace the placeholder units: Topsoil and made ground" in page
    assert "Still to do:" in page and "A layout with probes" in page
    # the demo has everything: no checklist
    assert 'id="readiness"' not in client.get("/projects/1").text
