"""The Design elements page: add, edit, remove and import elements like every other model part,
each edit a revision with undo; refused input named beside its field, 4xx, nothing stored; the
map draws each footprint and the evaluation cells it covers."""

from __future__ import annotations

import json

import pytest
from edit_helpers import (
    add_project,
    assert_page_basics,
    error_beside,
    last_message,
    map_data_of,
    model_of,
    notice_of,
    page_form,
    post,
    revision_of,
)

SQUARE = "20, 20\n60, 20\n60, 60\n20, 60"  # 40 m x 40 m inside the tiny site (0..200 x 0..120)
QUANTITY = {
    "name": "Soil mixing",
    "geometry_text": SQUARE,
    "base_of": "Alluvial clay",
    "adverse": "deeper",
    "design_fractile": "0.95",
    "kind": "quantity",
    "rate_per_m3": "12",
    "reference_depth_m": "0",
}
CHOICE = {
    **QUANTITY,
    "name": "Culvert bed",
    "kind": "choice",
    "threshold_depth_m": "4",
    "cheaper_cost": "100,000",
    "robust_cost": "250,000",
}


def url(project_id: int, tail: str = "") -> str:
    return f"/projects/{project_id}/elements{tail}"


def add(client, project_id: int, fields: dict):
    form = page_form(revision_of(client, project_id), {"form_id": "new_element"}, fields)
    return post(client, url(project_id, "/add"), form)


def test_page_shows_the_demo_elements_and_their_cells_on_the_map(client):
    page = client.get(url(1))
    assert page.status_code == 200
    assert_page_basics(page.text)
    demo = model_of(client, 1)["elements"]
    for element in demo:
        assert element["name"] in page.text
    data = map_data_of(page.text, "elements-map")
    assert [e["name"] for e in data["elements"]] == [e["name"] for e in demo]
    assert len(data["element_cells"]) == len(demo)
    for drawn in data["elements"]:
        assert drawn["cells"] > 0
    assert 'href="/projects/1/elements"' in page.text  # in the navigation


def test_cells_drawn_are_the_grid_cells_inside_the_footprint(client, tiny_id):
    assert add(client, tiny_id, QUANTITY).status_code == 200
    data = map_data_of(client.get(url(tiny_id)).text, "elements-map")
    # 5 m grid aligned to the site's corner: centres at 2.5 + 5k; inside 20..60 are 22.5..57.5,
    # 8 per side (counted by hand)
    assert data["elements"][0]["cells"] == 64
    cells = data["element_cells"][0]["geometry"]
    xs = [p[0] for ring in cells["coordinates"] for p in ring]
    assert (min(xs), max(xs)) == (20.0, 60.0)


def test_add_edit_remove_and_undo_each_make_a_revision(client, tiny_id):
    start = revision_of(client, tiny_id)
    answer = add(client, tiny_id, CHOICE)
    assert answer.status_code == 200, notice_of(answer.text)
    assert revision_of(client, tiny_id) == start + 1
    stored = model_of(client, tiny_id)["elements"][0]
    assert stored["consequence"] == {
        "kind": "choice",
        "basis": "mean",
        "threshold_depth_m": 4.0,
        "cheaper_cost": 100000.0,
        "robust_cost": 250000.0,
    }
    assert last_message(client, tiny_id) == "Added design element Culvert bed"

    form = page_form(
        revision_of(client, tiny_id), {"form_id": "element-0"}, {**CHOICE, "design_fractile": "0.9"}
    )
    assert post(client, url(tiny_id, "/0"), form).status_code == 200
    assert model_of(client, tiny_id)["elements"][0]["design_fractile"] == 0.9
    assert revision_of(client, tiny_id) == start + 2

    form = page_form(revision_of(client, tiny_id), {}, {})
    assert post(client, url(tiny_id, "/0/remove"), form).status_code == 200
    assert "elements" not in model_of(client, tiny_id) or not model_of(client, tiny_id)["elements"]

    form = page_form(revision_of(client, tiny_id), {}, {})
    assert post(client, url(tiny_id, "/undo"), form).status_code == 200
    assert model_of(client, tiny_id)["elements"][0]["name"] == "Culvert bed"


@pytest.mark.parametrize(
    ("changes", "path", "words"),
    [
        ({"design_fractile": "0.3"}, "new_element.design_fractile", "0.5"),
        ({"design_fractile": "1"}, "new_element.design_fractile", "0.999"),
        ({"robust_cost": "50,000"}, "new_element.consequence.robust_cost", "below cheaper_cost"),
        (
            {"geometry_text": "500, 500\n560, 500\n560, 560"},
            "new_element.geometry",
            "outside the site",
        ),
        ({"base_of": "Granite"}, "new_element.base_of", "Granite"),
        ({"geometry_text": "20, 20\n22, 20\n22, 22"}, "new_element.geometry", "no evaluation cell"),
        ({"name": ""}, "new_element.name", "required"),
        ({"geometry_text": "20, 20\n60, x"}, "new_element.geometry", "line 2"),
    ],
)
def test_bad_input_is_named_beside_its_field_and_nothing_is_stored(
    client, tiny_id, changes, path, words
):
    start = revision_of(client, tiny_id)
    answer = add(client, tiny_id, {**CHOICE, **changes})
    assert 400 <= answer.status_code < 500
    message = error_beside(answer.text, path)
    assert words in message, (message, notice_of(answer.text))
    assert revision_of(client, tiny_id) == start
    assert not model_of(client, tiny_id).get("elements")


def test_a_refused_edit_keeps_the_stored_element(client, tiny_id):
    add(client, tiny_id, QUANTITY)
    start = revision_of(client, tiny_id)
    form = page_form(start, {"form_id": "element-0"}, {**QUANTITY, "design_fractile": "0.2"})
    answer = post(client, url(tiny_id, "/0"), form)
    assert answer.status_code == 422
    assert "0.5" in error_beside(answer.text, "elements[0].design_fractile")
    assert revision_of(client, tiny_id) == start
    assert model_of(client, tiny_id)["elements"][0]["design_fractile"] == 0.95


def _geojson(features: list[tuple[str, list]]) -> bytes:
    return json.dumps(
        {
            "type": "FeatureCollection",
            # a projected CRS, taken as site-grid metres (the tiny project has no CRS)
            "crs": {"type": "name", "properties": {"name": "EPSG:27700"}},
            "features": [
                {
                    "type": "Feature",
                    "properties": {"name": name},
                    "geometry": {"type": "Polygon", "coordinates": [ring]},
                }
                for name, ring in features
            ],
        }
    ).encode()


def test_footprints_import_from_a_gis_file(client, tiny_id):
    ring_a = [[20, 20], [60, 20], [60, 60], [20, 60], [20, 20]]
    ring_b = [[100, 20], [140, 20], [140, 60], [100, 60], [100, 20]]
    data = _geojson([("Pad A", ring_a), ("Pad B", ring_b)])
    start = revision_of(client, tiny_id)
    form = page_form(start, {}, {**QUANTITY, "mode": "append", "as_local": "1"})
    files = {"gis_file": ("pads.geojson", data, "application/geo+json")}
    preview = post(client, url(tiny_id, "/import/preview"), form, files=files)
    assert preview.status_code == 200 and "Pad B" in preview.text
    assert revision_of(client, tiny_id) == start
    answer = post(client, url(tiny_id, "/import"), form, files=files)
    assert answer.status_code == 200, notice_of(answer.text)
    elements = model_of(client, tiny_id)["elements"]
    assert [e["name"] for e in elements] == ["Pad A", "Pad B"]
    assert all(e["consequence"]["rate_per_m3"] == 12.0 for e in elements)
    assert revision_of(client, tiny_id) == start + 1


def test_an_import_outside_the_site_is_refused_and_nothing_stored(client, tiny_id):
    ring = [[500, 500], [560, 500], [560, 560], [500, 560], [500, 500]]
    start = revision_of(client, tiny_id)
    form = page_form(start, {}, {**QUANTITY, "as_local": "1"})
    files = {"gis_file": ("far.geojson", _geojson([("Far", ring)]), "application/geo+json")}
    answer = post(client, url(tiny_id, "/import"), form, files=files)
    assert answer.status_code == 422
    assert "outside the site" in answer.text
    assert revision_of(client, tiny_id) == start


def test_renaming_a_unit_renames_it_in_the_elements(client, tiny_model):
    model = dict(tiny_model)
    project_id = add_project(client, model)
    add(client, project_id, QUANTITY)
    from probewise.web.ground_units import rename_unit

    doc = model_of(client, project_id)
    rename_unit(doc, "Alluvial clay", "Soft clay")
    assert doc["elements"][0]["base_of"] == "Soft clay"
