"""Browser tests: a real ``probewise serve`` on a free 127.0.0.1 port, driven by Playwright
through Debian's Chromium (headless). On a user's machine everything skips cleanly when Chromium
or Playwright is missing; under CI (environment variable CI set, as CI services do) the same
conditions fail, so a broken browser set-up cannot pass as "skipped". Screenshots and PDFs go
to test-artifacts/browser/ (gitignored).

Each test works on its own copy of the invented demo project (imported through the JSON API),
so the tests do not depend on their order.
"""

from __future__ import annotations

import json
import os
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest

from probewise.local_server import ServerStartError, free_port, start_server, stop_server

ROOT = Path(__file__).resolve().parents[2]
CHROMIUM = Path("/usr/bin/chromium")
ARTIFACTS = ROOT / "test-artifacts" / "browser"
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--no-first-run",
    "--disable-sync",
]

try:
    from playwright import sync_api
except ImportError:  # the tests skip; nothing else needs it
    sync_api = None


def pytest_collection_modifyitems(items):
    for item in items:
        if "tests/browser" in str(item.fspath):
            item.add_marker(pytest.mark.browser)


@pytest.fixture(scope="session")
def server_url(tmp_path_factory) -> Iterator[str]:
    """Base URL of a real server over a fresh database (the demo project seeded)."""
    folder = tmp_path_factory.mktemp("served")
    port = free_port()
    # the server runs this checkout's code, whichever checkout the environment was installed from
    path = os.pathsep.join(filter(None, [str(ROOT), os.environ.get("PYTHONPATH")]))
    with pytest.MonkeyPatch.context() as patch:
        patch.setenv("PYTHONPATH", path)
        try:
            process = start_server(
                folder / "browser.db", port, folder / "serve.log", probe_path="/", cwd=folder
            )
        except ServerStartError as exc:
            pytest.fail(str(exc))
    base = f"http://127.0.0.1:{port}"
    try:
        assert httpx.get(f"{base}/", timeout=10.0).status_code == 200
        yield base
    finally:
        stop_server(process)


def cannot_test(reason: str) -> None:
    """Skip on a user's machine; fail under CI, where the browser tests must run."""
    if os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no"):
        pytest.fail(f"browser tests cannot run under CI: {reason}")
    pytest.skip(reason)


@pytest.fixture(scope="session")
def browser():
    if sync_api is None:
        cannot_test("playwright is not installed (pip install playwright)")
    if not CHROMIUM.is_file():
        cannot_test(f"{CHROMIUM} is missing (apt-get install chromium)")
    with sync_api.sync_playwright() as playwright:
        try:
            chromium = playwright.chromium.launch(
                executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_ARGS
            )
        except Exception as exc:  # noqa: BLE001 - any launch failure means: cannot test here
            cannot_test(f"Chromium does not start: {exc}")
        yield chromium
        chromium.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1280, "height": 900}, accept_downloads=True)
    context.set_default_timeout(30_000)
    page = context.new_page()
    errors: list[str] = []
    # every uncaught exception and every console error counts (CSP reports, failed loads...)
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.on(
        "console",
        lambda msg: (
            errors.append(f"{msg.text[:160]} at {msg.location.get('url')}")
            if msg.type == "error"
            else None
        ),
    )
    page.js_errors = errors  # type: ignore[attr-defined]
    yield page
    context.close()


@pytest.fixture
def artifacts() -> Path:
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    return ARTIFACTS


@pytest.fixture
def demo_project(server_url) -> int:
    """A fresh copy of the invented demo project on the server; its id."""
    model = json.loads((ROOT / "seed_data" / "demo-project.json").read_text())
    answer = httpx.post(f"{server_url}/api/projects", json=model, timeout=30.0)
    assert answer.status_code == 201, answer.text
    return int(answer.json()["id"])
