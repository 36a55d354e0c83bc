"""Helpers of the reliability tests (imported as ``reliability_helpers``): a store snapshot to
prove nothing changed, the plain text of an answer, and a real ``probewise serve`` process."""

from __future__ import annotations

import contextlib
import hashlib
import html
import json
import re
import sqlite3
from collections.abc import Iterator
from html.parser import HTMLParser
from pathlib import Path

import httpx

from probewise.local_server import free_port, start_server, stop_server  # noqa: F401 (re-exported)

BASE_URL = "http://127.0.0.1"  # a Host the app accepts (the DNS-rebinding guard is on)


def store_snapshot(db_path: Path) -> tuple:
    """Everything a user could lose, read through a separate connection: projects (id,
    revision, name, deleted), every revision's number and a digest of its document, and the
    jobs. Two equal snapshots mean the store was not changed."""
    conn = sqlite3.connect(f"file:{db_path}?mode=ro", uri=True)
    try:
        projects = conn.execute(
            "SELECT id, revision, name, deleted_at FROM projects ORDER BY id"
        ).fetchall()
        revisions = [
            (pid, number, hashlib.sha256(model.encode()).hexdigest())
            for pid, number, model in conn.execute(
                "SELECT project_id, number, model FROM revisions ORDER BY project_id, number"
            )
        ]
        jobs = conn.execute("SELECT id, status FROM jobs ORDER BY id").fetchall()
    finally:
        conn.close()
    return projects, revisions, jobs


def fill(value, names: dict[str, object]):
    """Replace ``{name}`` placeholders in strings, bytes, lists and dicts."""
    if isinstance(value, str):
        for key, sub in names.items():
            value = value.replace("{" + key + "}", str(sub))
        return value
    if isinstance(value, bytes):
        return fill(value.decode("latin-1"), names).encode("latin-1")
    if isinstance(value, list):
        return [fill(v, names) for v in value]
    if isinstance(value, dict):
        return {fill(k, names): fill(v, names) for k, v in value.items()}
    return value


def page_text(markup: str) -> str:
    """The words a reader sees in an HTML answer (tags dropped, entities decoded)."""
    without_scripts = re.sub(r"(?is)<(script|style)\b.*?</\1>", " ", markup)
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", without_scripts)).split())


def api_problems(answer: httpx.Response) -> list[tuple[str, str]]:
    """(field, problem) pairs of a JSON error answer; a plain detail has an empty field."""
    detail = answer.json()["detail"]
    if isinstance(detail, str):
        return [("", detail)]
    return [(item["field"], item["problem"]) for item in detail]


@contextlib.contextmanager
def served(db_path: Path, log_path: Path, *extra: str) -> Iterator[str]:
    """A running server's base URL for the duration of the block."""
    port = free_port()
    process = start_server(db_path, port, log_path, *extra)
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        stop_server(process)


def dumps(model: dict) -> str:
    return json.dumps(model, allow_nan=True)


class _LinkParser(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.urls: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        for name, value in attrs:
            if name in {"href", "src", "hx-get"} and value:
                self.urls.append(value)


def links_of(markup: str) -> list[str]:
    """The href, src and hx-get values of a page."""
    parser = _LinkParser()
    parser.feed(markup)
    return parser.urls
