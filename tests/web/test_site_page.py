"""The Site page: settings, outline, zones, areas, exclusions, GIS import, map data, undo."""

from __future__ import annotations

import io
import json
import zipfile

import pytest
from edit_helpers import (
    add_project,
    assert_links_answer,
    error_beside,
    input_value,
    last_message,
    map_data_of,
    model_of,
    notice_of,
    page_form,
    page_text,
    post,
    revision_of,
)
from web_helpers import htmx

from probewise.io import model_file
from probewise.web.polygon_text import parse_polygon_text, polygon_text
from probewise.web.templating import field_id

SITE = "/projects/{}/site"


def settings(model: dict, revision: int, **changes) -> dict:
    fields = {
        "name": model["name"],
        "crs": model.get("crs") or "",
        "grid_spacing_m": str(model["grid_spacing_m"]),
    }
    return page_form(revision, fields, changes)


# ---------------------------------------------------------------- the page


def test_site_page_answers_with_map_caution_and_links(client, shown_project):
    project_id, model = shown_project
    text = page_text(client, SITE.format(project_id))
    assert 'id="site"' in text and 'aria-current="page"' in text
    data = map_data_of(text, "site-map")
    assert data["site"]["type"] in ("Polygon", "MultiPolygon")
    assert len(data["existing"]) == len(model["existing"])
    assert [z["name"] for z in data["zones"]] == [z["name"] for z in model["zones"]]
    assert "/static/vendor/leaflet-1.9.4/leaflet.js" in text
    assert "/static/js/sitemap.js" in text
    for area in model["areas_of_interest"]:
        assert area["name"].replace("&", "&amp;") in text
    assert_links_answer(client, text)


def test_site_json_serves_the_map_data(client, demo_model):
    answer = client.get("/projects/1/site.json")
    assert answer.status_code == 200
    data = answer.json()
    assert data["crs"] == demo_model["crs"]
    assert len(data["layouts"]) == len(demo_model["layouts"])
    assert data["origin"][0] <= data["bounds"][0] and data["origin"][1] <= data["bounds"][1]
    kinds = {p["kind"] for p in data["existing"]}
    assert kinds <= {"borehole", "cpt", "dmt", "trial_pit", "other"}


def test_grid_cells_shown_match_the_core_grid(client, demo_model):
    from probewise.app.to_core import to_core
    from probewise.core.grid import evaluation_grid

    project = to_core(demo_model)
    grid = evaluation_grid(project.site, (0.0, 0.0))
    text = client.get("/projects/1/site").text
    assert f"{grid.n_cells:,} cells inside the site" in text


# ---------------------------------------------------------------- settings


def test_grid_spacing_edit_saves_a_revision(client, tiny_id, tiny_model):
    answer = post(
        client, f"/projects/{tiny_id}/site/settings", settings(tiny_model, 1, grid_spacing_m=4)
    )
    assert answer.status_code == 200, notice_of(answer.text)
    assert "<html" not in answer.text and 'id="site"' in answer.text  # the fragment
    assert revision_of(client, tiny_id) == 2
    assert model_of(client, tiny_id)["grid_spacing_m"] == 4
    assert input_value(answer.text, field_id("grid_spacing_m")) == "4"
    assert "Saved as revision 2" in notice_of(answer.text)
    assert last_message(client, tiny_id) == "Set the grid spacing to 4 m"
    assert 'name="expected_revision" value="2"' in answer.text


def test_a_save_validates_the_model_once(client, tiny_id, tiny_model, monkeypatch):
    """The edit checks the whole model once and the store keeps that check."""
    calls = []
    checked = model_file._validate

    def counted(data, first_only):
        calls.append(first_only)
        return checked(data, first_only)

    monkeypatch.setattr(model_file, "_validate", counted)
    answer = post(
        client, f"/projects/{tiny_id}/site/settings", settings(tiny_model, 1, grid_spacing_m=4)
    )
    assert answer.status_code == 200, notice_of(answer.text)
    assert revision_of(client, tiny_id) == 2
    assert len(calls) == 1


@pytest.mark.parametrize(
    ("crs", "words"),
    [("EPSG:999999", "not a CRS"), ("EPSG:4326", "geographic"), ("EPSG:3857", "Web Mercator")],
)
def test_bad_crs_is_refused_beside_the_field(client, demo_model, crs, words):
    answer = post(client, "/projects/1/site/settings", settings(demo_model, 1, crs=crs))
    assert answer.status_code == 422
    assert words in error_beside(answer.text, "crs")
    assert input_value(answer.text, field_id("crs")) == crs  # what was typed stays
    assert revision_of(client, 1) == 1
    assert model_of(client, 1)["crs"] == demo_model["crs"]


def test_zero_grid_spacing_is_refused(client, tiny_id, tiny_model):
    answer = post(
        client, f"/projects/{tiny_id}/site/settings", settings(tiny_model, 1, grid_spacing_m="0")
    )
    assert answer.status_code == 422
    assert "> 0" in error_beside(answer.text, "grid_spacing_m")
    answer = post(
        client, f"/projects/{tiny_id}/site/settings", settings(tiny_model, 1, grid_spacing_m="abc")
    )
    assert answer.status_code == 422
    assert "'abc' is not a number" in error_beside(answer.text, "grid_spacing_m")
    assert revision_of(client, tiny_id) == 1


def test_changing_the_crs_with_reprojection_moves_every_coordinate(client, tiny_model):
    from io_builders import placed_model
    from pyproj import Transformer

    model = placed_model(tiny_model)  # EPSG:27700
    project_id = add_project(client, model)
    data = settings(model, 1, crs="EPSG:32630", crs_change="reproject")
    answer = post(client, f"/projects/{project_id}/site/settings", data)
    assert answer.status_code == 200, notice_of(answer.text)
    moved = model_of(client, project_id)
    assert moved["crs"] == "EPSG:32630"
    # Reference: pyproj's own transformation of the same points.
    to_utm = Transformer.from_crs("EPSG:27700", "EPSG:32630", always_xy=True)
    x, y = to_utm.transform(model["existing"][0]["x"], model["existing"][0]["y"])
    assert moved["existing"][0]["x"] == pytest.approx(x, abs=1e-6)
    assert moved["existing"][0]["y"] == pytest.approx(y, abs=1e-6)
    corner = model["site"]["coordinates"][0][0]
    cx, cy = to_utm.transform(*corner)
    assert moved["site"]["coordinates"][0][0] == pytest.approx([cx, cy], abs=1e-6)
    assert last_message(client, project_id) == "Reprojected from EPSG:27700 to EPSG:32630"


def test_relabelling_the_crs_keeps_the_numbers(client, tiny_model):
    from io_builders import placed_model

    model = placed_model(tiny_model)
    project_id = add_project(client, model)
    answer = post(
        client, f"/projects/{project_id}/site/settings", settings(model, 1, crs="EPSG:32630")
    )
    assert answer.status_code == 200
    after = model_of(client, project_id)
    assert after["crs"] == "EPSG:32630"
    assert after["site"] == model["site"] | {"coordinates": after["site"]["coordinates"]}
    assert after["existing"][0]["x"] == model["existing"][0]["x"]


def test_a_stale_page_is_refused_and_changes_nothing(client, tiny_id, tiny_model):
    assert (
        post(
            client, f"/projects/{tiny_id}/site/settings", settings(tiny_model, 1, grid_spacing_m=4)
        ).status_code
        == 200
    )
    answer = post(
        client, f"/projects/{tiny_id}/site/settings", settings(tiny_model, 1, grid_spacing_m=3)
    )
    assert answer.status_code == 409
    notice = notice_of(answer.text)
    assert "changed since this page was loaded" in notice and "Reload the page" in notice
    assert f'href="/projects/{tiny_id}/site"' in answer.text
    assert revision_of(client, tiny_id) == 2
    assert model_of(client, tiny_id)["grid_spacing_m"] == 4


def test_plain_form_post_redirects_back_to_the_page(client, tiny_id, tiny_model):
    answer = post(
        client,
        f"/projects/{tiny_id}/site/settings",
        settings(tiny_model, 1, grid_spacing_m=4),
        headers={},
    )
    assert answer.status_code == 303
    assert answer.headers["location"] == f"/projects/{tiny_id}/site"


def test_saving_nothing_new_stores_no_revision(client, tiny_id, tiny_model):
    answer = post(client, f"/projects/{tiny_id}/site/settings", settings(tiny_model, 1))
    assert answer.status_code == 200
    assert "Nothing changed" in notice_of(answer.text)
    assert revision_of(client, tiny_id) == 1


# ---------------------------------------------------------------- geometry as text


def test_polygon_text_round_trip():
    geometry = {
        "type": "Polygon",
        "coordinates": [
            [[0.0, 0.0], [10.0, 0.0], [10.0, 10.0], [0.0, 10.0], [0.0, 0.0]],
            [[2.0, 2.0], [4.0, 2.0], [4.0, 4.0], [2.0, 2.0]],
        ],
    }
    text = polygon_text(geometry)
    assert text.splitlines()[0] == "0, 0"
    assert parse_polygon_text(text, "site") == geometry


def test_outline_edit_closes_the_ring(client, tiny_id):
    text = "-10, -10\n210; -10\n210\t130\n-10 130"
    answer = post(
        client,
        f"/projects/{tiny_id}/site/outline",
        {"expected_revision": "1", "form_id": "outline", "geometry_text": text},
    )
    assert answer.status_code == 200, notice_of(answer.text)
    ring = model_of(client, tiny_id)["site"]["coordinates"][0]
    assert ring[0] == ring[-1] == [-10.0, -10.0] and len(ring) == 5
    assert last_message(client, tiny_id) == "Changed the site outline"


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("0, 0\n200, 0\nabc, 5", "line 3: 'abc' is not a number"),
        ("0, 0\n200, 0", "at least 3 different points"),
        ("0, 0\n100, 100\n100, 0\n0, 100", "not a valid polygon"),
        ("0, 0\n50, 0\n50, 50\n0, 50", "leaves some of the project outside"),  # probes outside
    ],
)
def test_bad_outline_is_refused_with_the_reason(client, tiny_id, text, words):
    answer = post(
        client,
        f"/projects/{tiny_id}/site/outline",
        {"expected_revision": "1", "form_id": "outline", "geometry_text": text},
    )
    assert answer.status_code == 422
    shown = error_beside(answer.text, "site") or notice_of(answer.text)
    assert words in shown or words in notice_of(answer.text), (shown, notice_of(answer.text))
    assert text.split("\n")[0] in answer.text  # the typed text is shown back
    assert revision_of(client, tiny_id) == 1


# ---------------------------------------------------------------- zones, areas, exclusions


def test_add_an_area_of_interest(client, tiny_id):
    data = {
        "expected_revision": "1",
        "form_id": "new_areas",
        "name": "Headwall",
        "weight": "4",
        "geometry_text": "150, 80\n190, 80\n190, 110\n150, 110",
    }
    answer = post(client, f"/projects/{tiny_id}/site/areas/add", data)
    assert answer.status_code == 200, notice_of(answer.text)
    areas = model_of(client, tiny_id)["areas_of_interest"]
    assert areas[-1]["name"] == "Headwall" and areas[-1]["weight"] == 4
    assert last_message(client, tiny_id) == "Added area of interest Headwall"
    assert "1,200 m²" in answer.text  # 40 m x 30 m


def test_negative_weight_is_refused_and_the_draft_kept(client, tiny_id):
    data = {
        "expected_revision": "1",
        "form_id": "new_areas",
        "name": "Headwall",
        "weight": "-2",
        "geometry_text": "150, 80\n190, 80\n190, 110",
    }
    answer = post(client, f"/projects/{tiny_id}/site/areas/add", data)
    assert answer.status_code == 422
    assert "must be > 0" in error_beside(answer.text, "new_areas.weight")
    assert input_value(answer.text, field_id("new_areas.name")) == "Headwall"
    assert revision_of(client, tiny_id) == 1


def test_edit_and_remove_a_zone(client, tiny_id, tiny_model):
    zone = tiny_model["zones"][0]
    data = {
        "expected_revision": "1",
        "form_id": "zones-0",
        "name": "Former channel",
        "geometry_text": polygon_text(zone["geometry"]),
    }
    answer = post(client, f"/projects/{tiny_id}/site/zones/0", data)
    assert answer.status_code == 200, notice_of(answer.text)
    model = model_of(client, tiny_id)
    assert model["zones"][0]["name"] == "Former channel"
    assert model["zones"][0]["units"] == zone["units"]  # overrides kept
    answer = post(client, f"/projects/{tiny_id}/site/zones/0/remove", {"expected_revision": "2"})
    assert answer.status_code == 200
    assert model_of(client, tiny_id)["zones"] == []
    assert "No zones yet" in answer.text


def test_unknown_role_and_index_are_refused(client, tiny_id):
    answer = post(client, f"/projects/{tiny_id}/site/things/0/remove", {"expected_revision": "1"})
    assert answer.status_code == 404
    answer = post(client, f"/projects/{tiny_id}/site/zones/7/remove", {"expected_revision": "1"})
    assert answer.status_code == 409
    assert "no zone number 8" in notice_of(answer.text)
    assert revision_of(client, tiny_id) == 1


# ---------------------------------------------------------------- GIS import


def rectangle(x0: float, y0: float, x1: float, y1: float) -> list:
    return [[[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]]


def feature_collection(features: list[tuple[str, list, dict]], crs: str | None) -> bytes:
    doc = {
        "type": "FeatureCollection",
        "features": [
            {
                "type": "Feature",
                "properties": {"name": name, **props},
                "geometry": {"type": "Polygon", "coordinates": rings},
            }
            for name, rings, props in features
        ],
    }
    if crs:
        doc["crs"] = {"type": "name", "properties": {"name": crs}}
    return json.dumps(doc).encode()


def gis_form(revision: int, role: str, **extra) -> dict:
    return {"expected_revision": str(revision), "role": role, "mode": "append", **extra}


def demo_box(demo_model: dict, pad: float = 30.0) -> list:
    xs = [p[0] for p in demo_model["site"]["coordinates"][0]]
    ys = [p[1] for p in demo_model["site"]["coordinates"][0]]
    return rectangle(min(xs) - pad, min(ys) - pad, max(xs) + pad, max(ys) + pad)


def test_geojson_outline_preview_then_import(client, demo_model):
    content = feature_collection([("Red line", demo_box(demo_model), {})], "EPSG:27700")
    files = {"gis_file": ("outline.geojson", content, "application/geo+json")}
    preview = post(client, "/projects/1/site/import/preview", gis_form(1, "site"), files=files)
    assert preview.status_code == 200
    assert 'id="site-import-preview"' in preview.text and "<html" not in preview.text
    assert "Red line" in preview.text and "1 polygon" in preview.text
    assert revision_of(client, 1) == 1  # a preview stores nothing
    answer = post(client, "/projects/1/site/import", gis_form(1, "site"), files=files)
    assert answer.status_code == 200, notice_of(answer.text)
    assert model_of(client, 1)["site"]["coordinates"] == demo_box(demo_model)
    assert last_message(client, 1) == "Imported the site outline from outline.geojson"


def test_geojson_in_wgs84_is_reprojected_into_the_project_crs(client, demo_model):
    from pyproj import Transformer

    to_wgs84 = Transformer.from_crs("EPSG:27700", "EPSG:4326", always_xy=True)
    x0, y0 = 451300.0, 283420.0
    box = rectangle(x0, y0, x0 + 40, y0 + 30)
    lonlat = [[list(to_wgs84.transform(x, y)) for x, y in box[0]]]
    content = feature_collection([("Pumping station", lonlat, {"w": 5})], None)  # RFC 7946
    files = {"gis_file": ("areas.geojson", content, "application/geo+json")}
    answer = post(
        client, "/projects/1/site/import", gis_form(1, "areas", weight_column="w"), files=files
    )
    assert answer.status_code == 200, notice_of(answer.text)
    area = model_of(client, 1)["areas_of_interest"][-1]
    assert area["name"] == "Pumping station" and area["weight"] == 5
    # Round trip through pyproj: within a millimetre of the box drawn in EPSG:27700.
    assert area["geometry"]["coordinates"][0][0] == pytest.approx([x0, y0], abs=1e-3)


def test_invalid_polygon_is_named_and_repair_offered(client, demo_model):
    x0, y0 = 451300.0, 283420.0
    bow_tie = [[[x0, y0], [x0 + 40, y0 + 30], [x0 + 40, y0], [x0, y0 + 30], [x0, y0]]]
    content = feature_collection(
        [("Good", rectangle(x0, y0, x0 + 5, y0 + 5), {}), ("Twisted", bow_tie, {})], "EPSG:27700"
    )
    files = {"gis_file": ("twisted.geojson", content, "application/geo+json")}
    answer = post(client, "/projects/1/site/import", gis_form(1, "exclusions"), files=files)
    assert answer.status_code == 422
    assert answer.headers["HX-Retarget"] == "#site-import-preview"
    assert "feature 2" in answer.text and "invalid polygon" in answer.text
    assert "Repair invalid polygons" in answer.text and 'name="repair"' in answer.text
    assert revision_of(client, 1) == 1
    answer = post(
        client, "/projects/1/site/import", gis_form(1, "exclusions", repair="1"), files=files
    )
    assert answer.status_code == 200, notice_of(answer.text)
    names = [e["name"] for e in model_of(client, 1)["exclusions"]]
    assert "Good" in names and any(n.startswith("Twisted") for n in names)


@pytest.mark.parametrize(
    ("filename", "content", "words"),
    [
        ("plan.geojson", b"{not json", "cannot be read"),
        ("plan.dwg", b"AC1027", "unknown file type"),
        ("plan.zip", b"PK\x03\x04 broken", "zip"),
        ("plan.geojson", b"", "is empty"),
        ("", b"", "choose a GeoJSON"),
    ],
)
def test_bad_gis_files_give_a_clear_message_and_store_nothing(client, filename, content, words):
    files = {"gis_file": (filename, content, "application/octet-stream")}
    answer = post(client, "/projects/1/site/import", gis_form(1, "areas"), files=files)
    assert answer.status_code == 422
    assert words in answer.text
    assert revision_of(client, 1) == 1


def test_geopackage_lists_layers_then_imports_the_chosen_one(client, demo_model, tmp_path):
    import geopandas
    from shapely.geometry import Polygon

    x0, y0 = 451300.0, 283420.0
    path = tmp_path / "plan.gpkg"
    for layer, name, dx in (("culverts", "Culvert B", 0.0), ("ponds", "New pond", 60.0)):
        frame = geopandas.GeoDataFrame(
            {"label": [name]},
            geometry=[Polygon(rectangle(x0 + dx, y0, x0 + dx + 20, y0 + 20)[0])],
            crs="EPSG:27700",
        )
        frame.to_file(path, layer=layer, driver="GPKG")
    files = {"gis_file": ("plan.gpkg", path.read_bytes(), "application/geopackage+sqlite3")}
    preview = post(
        client, "/projects/1/site/import/preview", gis_form(1, "exclusions"), files=files
    )
    assert preview.status_code == 200
    assert "choose one" in preview.text and "culverts" in preview.text and "ponds" in preview.text
    form = gis_form(1, "exclusions", layer="ponds", name_column="label")
    preview = post(client, "/projects/1/site/import/preview", form, files=files)
    assert preview.status_code == 200 and "New pond" in preview.text and "label" in preview.text
    answer = post(client, "/projects/1/site/import", form, files=files)
    assert answer.status_code == 200, notice_of(answer.text)
    assert model_of(client, 1)["exclusions"][-1]["name"] == "New pond"


def test_zipped_shapefile_import(client, demo_model, tmp_path):
    import geopandas
    from shapely.geometry import Polygon

    x0, y0 = 451300.0, 283420.0
    folder = tmp_path / "shp"
    folder.mkdir()
    frame = geopandas.GeoDataFrame(
        {"name": ["Old channel B"]},
        geometry=[Polygon(rectangle(x0, y0, x0 + 30, y0 + 40)[0])],
        crs="EPSG:27700",
    )
    frame.to_file(folder / "zones.shp")
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        for member in folder.iterdir():
            archive.write(member, member.name)
    files = {"gis_file": ("zones.zip", buffer.getvalue(), "application/zip")}
    answer = post(client, "/projects/1/site/import", gis_form(1, "zones"), files=files)
    assert answer.status_code == 200, notice_of(answer.text)
    zone = model_of(client, 1)["zones"][-1]
    assert zone["name"] == "Old channel B" and zone["units"] == {}


def test_local_grid_project_refuses_geographic_files(client, tiny_id):
    content = feature_collection([("Box", rectangle(-0.1, 51.5, -0.09, 51.51), {})], None)
    files = {"gis_file": ("box.geojson", content, "application/geo+json")}
    answer = post(client, f"/projects/{tiny_id}/site/import", gis_form(1, "areas"), files=files)
    assert answer.status_code == 422
    assert "geographic" in answer.text and "set the project CRS" in answer.text
    assert revision_of(client, tiny_id) == 1


# ---------------------------------------------------------------- undo and read-only


def test_undo_from_the_site_page(client, tiny_id, tiny_model):
    post(client, f"/projects/{tiny_id}/site/settings", settings(tiny_model, 1, grid_spacing_m=4))
    answer = post(client, f"/projects/{tiny_id}/site/undo", {"expected_revision": "2"})
    assert answer.status_code == 200 and 'id="site"' in answer.text
    assert revision_of(client, tiny_id) == 3
    assert model_of(client, tiny_id)["grid_spacing_m"] == tiny_model["grid_spacing_m"]
    assert "Undone" in notice_of(answer.text)
    stale = post(client, f"/projects/{tiny_id}/site/undo", {"expected_revision": "2"})
    assert stale.status_code == 409
    assert revision_of(client, tiny_id) == 3


def test_deleted_project_is_read_only(client, tiny_id, tiny_model):
    assert client.post(f"/projects/{tiny_id}/delete", headers=htmx()).status_code == 200
    page = client.get(SITE.format(tiny_id))
    assert page.status_code == 200
    assert "This project is deleted" in page.text
    assert "Undo last change" not in page.text
    answer = post(
        client, f"/projects/{tiny_id}/site/settings", settings(tiny_model, 1, grid_spacing_m=4)
    )
    assert answer.status_code == 409
    assert model_of(client, tiny_id)["grid_spacing_m"] == tiny_model["grid_spacing_m"]


def test_missing_project_answers_404(client):
    assert client.get("/projects/99/site").status_code == 404
    assert client.get("/projects/99/site.json").status_code == 404


def test_plain_form_post_with_a_problem_answers_the_whole_page(client, demo_model):
    answer = post(
        client, "/projects/1/site/settings", settings(demo_model, 1, crs="EPSG:4326"), headers={}
    )
    assert answer.status_code == 422
    assert "<html" in answer.text and "geographic" in error_beside(answer.text, "crs")
    assert revision_of(client, 1) == 1
