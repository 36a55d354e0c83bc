"""Helpers for the tests of the decision pages (Options, Compare, Schedule)."""

from __future__ import annotations

import time
from html.parser import HTMLParser

from fastapi.testclient import TestClient
from web_helpers import htmx

JOB_DEADLINE_S = 300.0  # a deadline to stop waiting, not a timing assertion


def import_model(client: TestClient, model: dict) -> int:
    answer = client.post("/api/projects", json=model)
    assert answer.status_code == 201, answer.text
    return int(answer.json()["id"])


def stored(client: TestClient, project_id: int) -> dict:
    answer = client.get(f"/api/projects/{project_id}")
    assert answer.status_code == 200, answer.text
    return answer.json()


def layout_named(model: dict, name: str) -> dict:
    return next(layout for layout in model["layouts"] if layout["name"] == name)


def post_form(client: TestClient, url: str, data: dict, *, as_htmx: bool = True):
    return client.post(url, data=data, headers=htmx() if as_htmx else {}, follow_redirects=False)


def job_state(client: TestClient, project_id: int, job_id: int) -> dict:
    answer = client.get(f"/api/projects/{project_id}/jobs/{job_id}")
    assert answer.status_code == 200, answer.text
    return answer.json()


def wait_for_job(client: TestClient, project_id: int, job_id: int) -> dict:
    """Poll until the job has ended; returns its final state."""
    deadline = time.monotonic() + JOB_DEADLINE_S
    while True:
        state = job_state(client, project_id, job_id)
        if state["status"] in {"done", "failed", "cancelled"}:
            return state
        assert time.monotonic() < deadline, f"job {job_id} did not end: {state}"
        time.sleep(0.1)


class _Ids(HTMLParser):
    def __init__(self, attr: str) -> None:
        super().__init__()
        self.attr = attr
        self.values: list[str] = []

    def handle_starttag(self, tag, attrs):
        for name, value in attrs:
            if name == self.attr and value:
                self.values.append(value)


def attribute_values(html: str, attr: str) -> list[str]:
    """Every value of one attribute in a page (hx-get, src, href...)."""
    parser = _Ids(attr)
    parser.feed(html)
    return parser.values


def job_id_of(html: str) -> int:
    """The job id the progress fragment shows."""
    values = attribute_values(html, "data-job")
    assert values, "no job in the fragment"
    return int(values[0])
