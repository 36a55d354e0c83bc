"""Server-rendered pages: the projects list and its actions, the overview and undo."""

from __future__ import annotations

import html
import json
import re

import pytest
from caution_check import assert_caution
from web_helpers import htmx, links_of, project_count

from probewise.errors import InputError
from probewise.io.model_file import validate_model
from probewise.web.templating import STATIC_DIR


def upload(client, content: bytes, filename: str = "model.json", headers=None):
    return client.post(
        "/projects/import",
        files={"model_file": (filename, content, "application/json")},
        headers=headers or {},
        follow_redirects=False,
    )


def rename_via_api(client, project_id: int, new_name: str) -> int:
    project = client.get(f"/api/projects/{project_id}").json()
    model = dict(project["model"], name=new_name)
    answer = client.put(
        f"/api/projects/{project_id}",
        json={"model": model, "expected_revision": project["revision"]},
    )
    assert answer.status_code == 200, answer.text
    return answer.json()["revision"]


# ---------------------------------------------------------------- projects list


def test_projects_list_shows_the_demo_project(client, demo_model):
    page = client.get("/")
    assert page.status_code == 200
    assert page.headers["content-type"].startswith("text/html")
    assert html.escape(demo_model["name"], quote=False) in page.text
    assert 'href="/projects/1"' in page.text
    assert 'id="projects"' in page.text
    assert_caution(page.text)


def test_empty_database_shows_an_empty_state(empty_client):
    page = empty_client.get("/")
    assert page.status_code == 200
    assert "No projects yet" in page.text
    assert 'id="import-form"' in page.text


def test_vendored_htmx_is_served_and_linked(client):
    found = sorted((STATIC_DIR / "vendor").glob("htmx-*.min.js"))
    assert found, "static/vendor/htmx-<version>.min.js is missing"
    name = found[-1].name
    assert (STATIC_DIR / "vendor" / name.replace(".min.js", ".LICENSE")).is_file()
    script = client.get(f"/static/vendor/{name}")
    assert script.status_code == 200
    assert "javascript" in script.headers["content-type"]
    assert "htmx" in script.text[:500]
    assert f'src="/static/vendor/{name}"' in client.get("/").text


def test_stylesheet_is_served(client):
    sheet = client.get("/static/css/probewise.css")
    assert sheet.status_code == 200
    assert "text/css" in sheet.headers["content-type"]


def test_import_a_valid_model_adds_it_to_the_list(empty_client, tiny_bytes, tiny_model):
    answer = upload(empty_client, tiny_bytes, "tiny-model.json", headers=htmx())
    assert answer.status_code == 200
    assert 'id="projects"' in answer.text and "<html" not in answer.text  # a fragment
    assert html.escape(tiny_model["name"], quote=False) in answer.text
    assert "Imported" in answer.text
    assert project_count(empty_client) == 1
    listing = empty_client.get("/").text
    assert html.escape(tiny_model["name"], quote=False) in listing


def test_import_without_htmx_redirects_to_the_list(empty_client, tiny_bytes):
    answer = upload(empty_client, tiny_bytes)
    assert answer.status_code == 303
    assert answer.headers["location"] == "/"
    assert project_count(empty_client) == 1


def broken_models(tiny_model: dict) -> list[tuple[str, bytes]]:
    inverted = json.loads(json.dumps(tiny_model))
    inverted["units"][0]["thickness_m"]["min"] = 5.0  # min above max
    no_site = {k: v for k, v in tiny_model.items() if k != "site"}
    bad_method = json.loads(json.dumps(tiny_model))
    bad_method["existing"][0]["method"] = "NOPE"
    return [
        ("inverted range", json.dumps(inverted).encode()),
        ("missing site", json.dumps(no_site).encode()),
        ("unknown method", json.dumps(bad_method).encode()),
    ]


@pytest.mark.parametrize("case", range(3))
def test_import_a_broken_model_names_the_field_and_stores_nothing(client, tiny_model, case):
    label, content = broken_models(tiny_model)[case]
    with pytest.raises(InputError) as expected:
        validate_model(json.loads(content))
    before = project_count(client)
    for headers in (htmx(), {}):
        answer = upload(client, content, headers=headers)
        assert answer.status_code == 400, label
        assert 'id="model_file-error"' in answer.text
        shown = html.unescape(answer.text)
        assert expected.value.field in shown, label
        assert expected.value.problem in shown, label
    assert project_count(client) == before


@pytest.mark.parametrize(
    ("content", "words"),
    [
        (b"{not json", "not valid JSON"),
        (b"", "is empty"),
        (b"\xff\xfe\x00bad", "UTF-8"),
        (b"[1, 2]", ""),
    ],
)
def test_import_of_a_file_that_is_not_a_model(client, content, words):
    before = project_count(client)
    answer = upload(client, content, headers=htmx())
    assert answer.status_code == 400
    assert 'id="model_file-error"' in answer.text
    assert words in answer.text
    assert project_count(client) == before


def test_import_without_a_file_asks_for_one(client):
    answer = client.post("/projects/import", data={}, headers=htmx())
    assert answer.status_code == 400
    assert "choose a model file" in answer.text


def test_duplicate_delete_restore_from_the_list(client, demo_model):
    name = html.escape(demo_model["name"], quote=False)
    answer = client.post("/projects/1/duplicate", headers=htmx())
    assert answer.status_code == 200
    assert f"{name} (copy)" in answer.text
    assert project_count(client) == 3  # the two demos and the copy

    answer = client.post("/projects/3/delete", headers=htmx())
    assert answer.status_code == 200
    assert "Recently deleted" in answer.text
    assert 'id="deleted-project-3"' in answer.text
    assert 'id="project-3"' not in answer.text
    assert project_count(client, include_deleted=False) == 2

    answer = client.post("/projects/3/restore", headers=htmx())
    assert answer.status_code == 200
    assert 'id="project-3"' in answer.text
    assert 'id="deleted-heading"' not in answer.text
    assert project_count(client, include_deleted=False) == 3


def test_plain_form_posts_redirect_back(client):
    for path in ("/projects/1/duplicate", "/projects/3/delete", "/projects/3/restore"):
        answer = client.post(path, follow_redirects=False)
        assert answer.status_code == 303, path
        assert answer.headers["location"] == "/"


def test_export_downloads_the_model_file(client, demo_model):
    answer = client.get("/projects/1/export")
    assert answer.status_code == 200
    assert "attachment" in answer.headers["content-disposition"]
    assert ".json" in answer.headers["content-disposition"]
    exported = answer.json()
    assert exported["name"] == demo_model["name"]
    assert validate_model(exported) == validate_model(demo_model)


def test_project_names_are_escaped(empty_client, tiny_model):
    evil = "<script>alert(1)</script>"
    created = empty_client.post("/api/projects", json=dict(tiny_model, name=evil))
    assert created.status_code == 201
    project_id = created.json()["id"]
    for path in ("/", f"/projects/{project_id}"):
        text = empty_client.get(path).text
        assert evil not in text, path
        assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text, path


def test_actions_on_a_missing_project_answer_404(client):
    assert client.get("/projects/999").status_code == 404
    assert client.post("/projects/999/duplicate").status_code == 404
    assert client.get("/projects/999/export").status_code == 404
    page = client.get("/projects/999")
    assert "no project with id 999" in page.text
    assert_caution(page.text)  # the error page keeps the layout


def test_unknown_path_answers_a_404_page(client):
    page = client.get("/no/such/page")
    assert page.status_code == 404
    assert "<html" in page.text


def test_errors_of_htmx_requests_go_to_the_flash_area(client):
    answer = client.post("/projects/999/delete", headers=htmx())
    assert answer.status_code == 404
    assert answer.headers["hx-retarget"] == "#flash"
    assert answer.text.strip().startswith('<div id="flash"')


# ---------------------------------------------------------------- overview


def test_overview_shows_the_site_the_model_and_the_caution(client, demo_model):
    page = client.get("/projects/1")
    assert page.status_code == 200
    text = page.text
    assert_caution(text)
    assert '<svg class="map"' in text
    assert 'class="map-site"' in text
    assert 'class="scale-bar"' in text and 'class="north-arrow"' in text
    assert text.count('class="probe probe-') >= len(demo_model.get("existing", []))
    for unit in demo_model["units"]:
        assert html.escape(unit["name"], quote=False) in text
    for method in demo_model["methods"]:
        assert html.escape(method["name"], quote=False) in text
    for layout in demo_model.get("layouts", []):
        assert html.escape(layout["name"], quote=False) in text
    if demo_model.get("currency"):
        assert demo_model["currency"] in text
    assert 'id="overview"' in text and 'id="current-revision"' in text


def test_overview_workflow_nav_links_only_to_built_pages(client):
    text = client.get("/projects/1").text
    nav = text[text.index('id="workflow-nav"') : text.index("</nav>", text.index("workflow-nav"))]
    for label in (
        "Overview",
        "Site",
        "Ground model",
        "Existing",
        "Methods",
        "Options",
        "Compare",
        "Schedule",
    ):
        assert label in nav
    assert 'aria-current="page"' in nav
    for href in re.findall(r'href="([^"]+)"', nav):
        assert client.get(href).status_code == 200


def test_every_link_on_the_list_and_overview_answers(client):
    for page in ("/", "/projects/1"):
        text = client.get(page).text
        urls = [u for u in links_of(text) if u.startswith("/") and not u.startswith("//")]
        assert urls, page
        for url in sorted(set(urls)):
            answer = client.get(url.split("#")[0])
            assert answer.status_code < 500, f"{page} -> {url}: {answer.status_code}"
            assert answer.status_code < 400, f"{page} -> {url}: {answer.status_code}"


def test_undo_from_the_overview_swaps_the_main_fragment(client, demo_model):
    assert rename_via_api(client, 1, "Renamed for the test") == 2
    assert "Renamed for the test" in client.get("/projects/1").text

    answer = client.post("/projects/1/undo", data={"expected_revision": "2"}, headers=htmx())
    assert answer.status_code == 200
    assert answer.text.lstrip().startswith('<section id="overview"')
    assert "<html" not in answer.text
    assert 'id="current-revision">3<' in answer.text
    assert html.escape(demo_model["name"], quote=False) in answer.text
    assert "undone" in answer.text
    assert client.get("/api/projects/1").json()["model"]["name"] == demo_model["name"]


def test_undo_without_htmx_redirects_to_the_overview(client):
    rename_via_api(client, 1, "Another name")
    answer = client.post(
        "/projects/1/undo", data={"expected_revision": "2"}, follow_redirects=False
    )
    assert answer.status_code == 303
    assert answer.headers["location"] == "/projects/1"


def test_undo_on_a_stale_page_changes_nothing(client):
    rename_via_api(client, 1, "Edited elsewhere")
    answer = client.post("/projects/1/undo", data={"expected_revision": "1"}, headers=htmx())
    assert answer.status_code == 409
    assert 'id="overview"' in answer.text
    assert "Not undone" in answer.text
    assert client.get("/api/projects/1").json()["revision"] == 2


def test_undo_with_nothing_to_undo_says_so(client):
    page = client.get("/projects/1").text
    assert 'id="undo-button" disabled' in page
    answer = client.post("/projects/1/undo", data={"expected_revision": "1"}, headers=htmx())
    assert answer.status_code == 409
    assert "nothing to undo" in answer.text
    assert client.get("/api/projects/1").json()["revision"] == 1


def test_restore_an_older_revision_from_the_trail(client, demo_model):
    rename_via_api(client, 1, "Second name")
    answer = client.post(
        "/projects/1/revisions/1/restore", data={"expected_revision": "2"}, headers=htmx()
    )
    assert answer.status_code == 200
    assert 'id="current-revision">3<' in answer.text
    assert client.get("/api/projects/1").json()["model"]["name"] == demo_model["name"]
    revisions = client.get("/api/projects/1/revisions").json()
    assert [r["number"] for r in revisions] == [1, 2, 3]


def test_overview_of_a_deleted_project_is_read_only(client):
    client.delete("/api/projects/1")
    page = client.get("/projects/1")
    assert page.status_code == 200
    assert "This project is deleted" in page.text
    assert 'id="undo-button"' not in page.text
    answer = client.post("/projects/1/undo", headers=htmx())
    assert answer.status_code == 409


def test_pages_carry_security_headers(client):
    page = client.get("/projects/1")
    assert page.headers["x-content-type-options"] == "nosniff"
    assert page.headers["x-frame-options"] == "DENY"
    assert "script-src 'self'" in page.headers["content-security-policy"]
    assert page.headers["referrer-policy"] == "same-origin"
    # The CSP forbids inline scripts and styles: the templates must not need them.
    assert "<script>" not in page.text
    assert " style=" not in page.text and "<style" not in page.text
    assert " onclick=" not in page.text
