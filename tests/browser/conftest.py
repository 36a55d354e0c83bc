"""Browser tests: a real ``probewise serve`` on a free 127.0.0.1 port, driven by Playwright
through Debian's Chromium (headless). Everything skips cleanly when Chromium or Playwright is
missing. Screenshots and PDFs go to test-artifacts/browser/ (gitignored).

Each test works on its own copy of the invented demo project (imported through the JSON API),
so the tests do not depend on their order.
"""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest

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
STARTUP_DEADLINE_S = 60.0  # a deadline to stop waiting, not a timing assertion

try:
    from playwright import sync_api
except ImportError:  # the tests skip; nothing else needs it
    sync_api = None


def pytest_collection_modifyitems(items):
    for item in items:
        if "tests/browser" in str(item.fspath):
            item.add_marker(pytest.mark.browser)


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def probewise_command() -> list[str]:
    script = Path(sys.executable).with_name("probewise")
    if script.is_file():
        return [str(script)]
    found = shutil.which("probewise")
    return [found] if found else [sys.executable, "-m", "server.cli"]


@pytest.fixture(scope="session")
def server_url(tmp_path_factory) -> Iterator[str]:
    """Base URL of a real server over a fresh database (the demo project seeded)."""
    folder = tmp_path_factory.mktemp("served")
    port = free_port()
    log_path = folder / "serve.log"
    log = log_path.open("w+")
    process = subprocess.Popen(
        [*probewise_command(), "serve", "--db", str(folder / "browser.db"), "--port", str(port)],
        cwd=folder,
        stdout=log,
        stderr=subprocess.STDOUT,
        env={**os.environ, "PYTHONUNBUFFERED": "1"},
    )
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + STARTUP_DEADLINE_S
        while True:
            if process.poll() is not None:
                log.seek(0)
                pytest.fail(f"probewise serve exited early:\n{log.read()}")
            try:
                if httpx.get(f"{base}/", timeout=2.0).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            if time.monotonic() > deadline:
                log.seek(0)
                pytest.fail(f"probewise serve did not answer:\n{log.read()}")
            time.sleep(0.2)
        yield base
    finally:
        process.terminate()
        try:
            process.wait(timeout=10)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=10)
        log.close()


@pytest.fixture(scope="session")
def browser():
    if sync_api is None:
        pytest.skip("playwright is not installed (pip install playwright)")
    if not CHROMIUM.is_file():
        pytest.skip(f"{CHROMIUM} is missing (apt-get install chromium)")
    with sync_api.sync_playwright() as playwright:
        try:
            chromium = playwright.chromium.launch(
                executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_ARGS
            )
        except Exception as exc:  # noqa: BLE001 - any launch failure means: cannot test here
            pytest.skip(f"Chromium does not start: {exc}")
        yield chromium
        chromium.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1280, "height": 900}, accept_downloads=True)
    context.set_default_timeout(30_000)
    page = context.new_page()
    errors: list[str] = []
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.on(
        "console",
        lambda msg: (
            errors.append(f"{msg.text[:80]} at {msg.location.get('url')}")
            if msg.type == "error" and "Content Security Policy" in msg.text
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
