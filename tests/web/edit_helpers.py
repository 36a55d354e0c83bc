"""Helpers for the model-editing page tests (Site, Ground model, Existing, Methods)."""

from __future__ import annotations

import html
import json
import re

from caution_check import assert_caution
from fastapi.testclient import TestClient
from web_helpers import htmx, links_of

from probewise.web.templating import field_id


def add_project(client: TestClient, model: dict) -> int:
    answer = client.post("/api/projects", json=model)
    assert answer.status_code == 201, answer.text
    return answer.json()["id"]


def project_of(client: TestClient, project_id: int) -> dict:
    answer = client.get(f"/api/projects/{project_id}")
    assert answer.status_code == 200, answer.text
    return answer.json()


def revision_of(client: TestClient, project_id: int) -> int:
    return project_of(client, project_id)["revision"]


def model_of(client: TestClient, project_id: int) -> dict:
    return project_of(client, project_id)["model"]


def last_message(client: TestClient, project_id: int) -> str:
    answer = client.get(f"/api/projects/{project_id}/revisions")
    assert answer.status_code == 200, answer.text
    return answer.json()[-1]["message"]


def page_form(revision: int, fields: dict, changes: dict) -> dict:
    """A page's form as posted: the revision the page showed, its fields, then ``changes``
    (as text) over them."""
    return {"expected_revision": str(revision), **fields, **{k: str(v) for k, v in changes.items()}}


def post(client: TestClient, url: str, data: dict, files=None, headers=None):
    """An htmx form post (as the page sends it)."""
    return client.post(
        url,
        data=data,
        files=files,
        headers=headers if headers is not None else htmx(),
        follow_redirects=False,
    )


def text_of(fragment: str) -> str:
    """Visible text of a bit of HTML, entities decoded, spaces collapsed."""
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", fragment)).split())


def error_beside(page: str, path: str) -> str:
    """The message shown beside the field (or group) of model path ``path``; '' if none."""
    fid = field_id(path)
    match = re.search(rf'<p class="field-error" id="{re.escape(fid)}-error">(.*?)</p>', page, re.S)
    if match:
        return text_of(match.group(1))
    match = re.search(
        rf'<div class="field-error group-error" id="{re.escape(fid)}"[^>]*>(.*?)</div>', page, re.S
    )
    return text_of(match.group(1)) if match else ""


def notice_of(page: str) -> str:
    match = re.search(r'<div class="notice notice-\w+"[^>]*>(.*?)</div>', page, re.S)
    return text_of(match.group(1)) if match else ""


def input_value(page: str, input_id: str) -> str:
    match = re.search(rf'<input[^>]*\bid="{re.escape(input_id)}"[^>]*>', page, re.S)
    assert match, f"no input #{input_id}"
    value = re.search(r'\bvalue="([^"]*)"', match.group(0))
    return html.unescape(value.group(1)) if value else ""


def map_data_of(page: str, map_key: str) -> dict:
    """The data a map is drawn from (the data-map attribute of its element)."""
    match = re.search(
        rf"<div class=\"pw-map\" data-map-key=\"{re.escape(map_key)}\" data-map='([^']*)'", page
    )
    assert match, f"no map {map_key}"
    return json.loads(html.unescape(match.group(1)))


def assert_links_answer(client: TestClient, page: str) -> None:
    """Every same-site link and asset of a page answers below 400."""
    urls = sorted({u.split("#")[0] for u in links_of(page) if u.startswith("/")})
    urls = [u for u in urls if u and not u.startswith("//")]
    assert urls
    for url in urls:
        answer = client.get(url)
        assert answer.status_code < 400, f"{url}: {answer.status_code}"


def assert_page_basics(page: str) -> None:
    """A model page: the caution (box and footer), no inline script or style."""
    assert_caution(page, times=2)  # the caution box and the footer
    assert "<style" not in page
    assert " style=" not in page
    scripts = re.findall(r"<script(?![^>]*\bsrc=)([^>]*)>", page)
    assert all('type="application/json"' in attrs for attrs in scripts), scripts


def page_text(client: TestClient, url: str) -> str:
    """The HTML of a model page, checked to answer 200 with the basics (assert_page_basics)."""
    page = client.get(url)
    assert page.status_code == 200
    assert_page_basics(page.text)
    return page.text
