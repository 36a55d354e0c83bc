"""The undo buttons are disabled, saying "Nothing to undo", exactly when undo has nothing to
take back (probewise.store.can_undo), on the overview and on every model-editing page; and the
htmx configuration settles no inline style."""

from __future__ import annotations

import json
import re
from html.parser import HTMLParser

import pytest
from web_helpers import htmx

EDIT_PAGES = ["site", "ground", "existing", "methods", "options"]


class ButtonFinder(HTMLParser):
    """Attributes of the undo buttons of a page (id "undo-button" or class "undo-button")."""

    def __init__(self) -> None:
        super().__init__()
        self.buttons: list[dict[str, str | None]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        found = dict(attrs)
        classes = (found.get("class") or "").split()
        if tag == "button" and (found.get("id") == "undo-button" or "undo-button" in classes):
            self.buttons.append(found)


def undo_buttons(html: str) -> list[dict[str, str | None]]:
    finder = ButtonFinder()
    finder.feed(html)
    return finder.buttons


def rename(client, project_id: int, name: str) -> None:
    project = client.get(f"/api/projects/{project_id}").json()
    answer = client.put(
        f"/api/projects/{project_id}",
        json={"model": dict(project["model"], name=name), "expected_revision": project["revision"]},
    )
    assert answer.status_code == 200, answer.text


def assert_disabled(buttons: list[dict]) -> None:
    assert buttons
    for button in buttons:
        assert "disabled" in button and button.get("title") == "Nothing to undo"


def assert_enabled(buttons: list[dict]) -> None:
    assert buttons
    for button in buttons:
        assert "disabled" not in button and button.get("title") != "Nothing to undo"


@pytest.mark.parametrize("page", ["", *(f"/{p}" for p in EDIT_PAGES)])
def test_undo_button_follows_the_trail(client, page):
    url = f"/projects/1{page}"
    assert_disabled(undo_buttons(client.get(url).text))  # the demo as seeded: revision 1
    rename(client, 1, "Renamed")
    assert_enabled(undo_buttons(client.get(url).text))
    assert client.post("/api/projects/1/undo").status_code == 200
    assert_disabled(undo_buttons(client.get(url).text))  # back at the start of the chain


def test_undo_answer_shows_the_button_state(client):
    rename(client, 1, "Renamed")
    project = client.get("/api/projects/1").json()
    answer = client.post(
        "/projects/1/undo", data={"expected_revision": project["revision"]}, headers=htmx()
    )
    assert answer.status_code == 200
    assert_disabled(undo_buttons(answer.text))


def test_a_restored_revision_can_be_undone(client):
    rename(client, 1, "Renamed")
    client.post("/api/projects/1/undo")
    assert_disabled(undo_buttons(client.get("/projects/1").text))
    answer = client.post(
        "/projects/1/revisions/2/restore", data={"expected_revision": "3"}, headers=htmx()
    )
    assert answer.status_code == 200
    assert_enabled(undo_buttons(answer.text))


def test_htmx_settles_no_inline_style(client):
    page = client.get("/projects/1").text
    content = re.search(r'<meta name="htmx-config" content=\'([^\']*)\'', page).group(1)
    config = json.loads(content)
    assert config["attributesToSettle"] == ["class", "width", "height"]
    assert config["allowEval"] is False
