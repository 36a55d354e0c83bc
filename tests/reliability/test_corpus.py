"""Runs the bad-input corpus (corpus.py) through its channels.

Every case must get its expected 4xx status (web) or exit status 2 (CLI), a message that
names the field (and the problem's words, where the case gives them), never a 5xx or a
traceback, and must leave the store exactly as it was: the web cases compare a snapshot of
every project, revision and job before and after; the CLI cases compare every file in their
folder (the CLI's "store" is the model file and the files it would write).
"""

from __future__ import annotations

import json
from collections import Counter
from collections.abc import Iterator
from pathlib import Path

import pytest
from corpus import CASES, SCRIPT, TINY, Case, cases_of
from fastapi.testclient import TestClient
from reliability_helpers import BASE_URL, api_problems, fill, page_text, store_snapshot

from probewise.cli import main
from probewise.web.app import create_app

MIN_CASES = 40
WEB_CHANNELS = ("api", "upload", "form")


def test_the_corpus_is_large_and_covers_every_channel():
    assert len(CASES) >= MIN_CASES
    counts = Counter(c.channel for c in CASES)
    assert set(counts) == {"api", "upload", "form", "cli"}, counts
    assert len({c.id for c in CASES}) == len(CASES), "case ids must be unique"


# ---------------------------------------------------------------- the web channels


class WebTarget:
    """One app over one database holding the tiny project at revision 2."""

    def __init__(self, db_path: Path):
        self.db_path = db_path
        self.client = TestClient(
            create_app(db_path, seed=False), base_url=BASE_URL, raise_server_exceptions=False
        )

    def start(self) -> None:
        self.client.__enter__()
        created = self.client.post("/api/projects", json=TINY)
        assert created.status_code == 201, created.text
        self.pid = created.json()["id"]
        edited = {**TINY, "name": "Tiny example, edited once"}
        saved = self.client.put(
            f"/api/projects/{self.pid}", json={"model": edited, "expected_revision": 1}
        )
        assert saved.status_code == 200, saved.text

    def names(self) -> dict[str, object]:
        revision = self.client.get(f"/api/projects/{self.pid}").json()["revision"]
        return {"pid": self.pid, "rev": revision, "stale": revision - 1}


@pytest.fixture(scope="module")
def web(tmp_path_factory) -> Iterator[WebTarget]:
    target = WebTarget(tmp_path_factory.mktemp("corpus") / "corpus.db")
    target.start()
    try:
        yield target
    finally:
        target.client.__exit__(None, None, None)


def send(web: WebTarget, case: Case, htmx: bool) -> object:
    payload = fill(case.resolved_payload(), web.names())
    client = web.client
    headers = {"HX-Request": "true"} if htmx else {}
    if case.channel == "api":
        kwargs = {k: payload[k] for k in ("json", "content") if k in payload}
        headers = {"Content-Type": "application/json", **payload.get("headers", {})}
        return client.request(payload["method"], payload["path"], headers=headers, **kwargs)
    if case.channel == "upload":
        files = None
        if payload is not None:
            name, content = payload
            files = {"model_file": (name, content, "application/json")}
        return client.post("/projects/import", files=files, data={}, headers=headers)
    headers.update(payload.get("headers", {}))
    files = payload.get("files")
    return client.post(payload["path"], data=payload["data"], files=files, headers=headers)


def check_web_answer(case: Case, answer) -> None:
    assert answer.status_code < 500, (case.id, answer.status_code, answer.text[:500])
    if "html" in answer.headers.get("content-type", ""):
        assert SCRIPT not in answer.text, f"{case.id}: markup from the input came back unescaped"
    assert answer.status_code == case.expect, (case.id, answer.status_code, answer.text[:500])
    if case.channel == "api" or answer.headers.get("content-type", "").startswith(
        "application/json"
    ):
        problems = api_problems(answer)
        named = [p for f, p in problems if case.field in f or case.field in p]
        assert named, (case.id, problems)
        assert any(case.words in p for p in named), (case.id, problems)
        for _, problem in problems:
            assert "Input should" not in problem, (case.id, problem)  # no pydantic jargon
        return
    text = page_text(answer.text)
    assert case.field in text, (case.id, text[:800])
    assert case.words in text, (case.id, text[:800])
    assert "Traceback" not in text


@pytest.mark.parametrize(
    "case", [c for c in CASES if c.channel in WEB_CHANNELS], ids=lambda c: c.id
)
def test_web_case_is_refused_with_the_field_and_changes_nothing(web, case):
    ways = (False,) if case.channel == "api" else (False, True)  # pages: plain and htmx
    for htmx in ways:
        before = store_snapshot(web.db_path)
        answer = send(web, case, htmx)
        check_web_answer(case, answer)
        if htmx and answer.status_code < 500:
            # htmx swaps a fragment (or the flash area), never a whole page into a target
            assert "<html" not in answer.text.lower(), case.id
        assert store_snapshot(web.db_path) == before, f"{case.id}: the store changed"


def test_a_valid_edit_still_goes_through_after_the_corpus(web):
    """The corpus left the project usable: the current revision takes an edit."""
    names = web.names()
    edited = {**TINY, "name": "Tiny example, after the corpus"}
    answer = web.client.put(
        f"/api/projects/{web.pid}", json={"model": edited, "expected_revision": names["rev"]}
    )
    assert answer.status_code == 200
    assert answer.json()["revision"] == names["rev"] + 1


# ---------------------------------------------------------------- the command line


def folder_state(folder: Path) -> dict[str, bytes]:
    return {
        str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()
    }


@pytest.mark.parametrize("case", cases_of("cli"), ids=lambda c: c.id)
def test_cli_case_exits_2_with_one_line_naming_the_field(tmp_path, capsys, monkeypatch, case):
    def no_serving(*args, **kwargs):
        raise AssertionError("bad input reached the server start")

    monkeypatch.setattr("uvicorn.run", no_serving)
    payload = case.resolved_payload()
    for name, content in payload["files"].items():
        data = content() if callable(content) else content
        (tmp_path / name).write_bytes(
            data if isinstance(data, bytes) else json.dumps(data).encode()
        )
    argv = fill(payload["argv"], {"dir": tmp_path})
    before = folder_state(tmp_path)
    try:
        status = main(argv)
    except SystemExit as stop:  # argparse usage errors
        status = stop.code
    captured = capsys.readouterr()
    err = captured.err
    assert status == case.expect, (case.id, status, err, captured.out[:300])
    assert err.endswith("\n") and err.count("\n") == 1, (case.id, err)  # one line, no traceback
    # The one line names the field; a file import may list its row-by-row problems above it
    # on stdout (the line then names the file and points to the list).
    said = err + captured.out
    assert case.field in said, (case.id, err)
    assert case.words in said, (case.id, err)
    assert folder_state(tmp_path) == before, f"{case.id}: files changed or were written"
