"""A large project's page in headless Chromium: it answers at once with a progress bar while
the evaluation grid is computed in the background, then turns into the page by itself.

The project is bench S (benchmarks/make_case.py) with 1,010 more invented existing CPTs: over
4,000 readings, beyond exact conditioning (``probewise.core.local_conditioning``), so the
evaluation runs tile by tile with progress. Waits are on selectors, never on sleeps.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import httpx
from caution_check import assert_caution

BENCH = Path(__file__).resolve().parents[2] / "benchmarks" / "make_case.py"
EVALUATION_WAIT_MS = 300_000  # a deadline to stop waiting, not a timing assertion


def large_model() -> dict:
    spec = importlib.util.spec_from_file_location("make_case", BENCH)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.add_existing_cpts(module.make("S", 1), 1010)


def test_large_project_progress_page_turns_into_the_schedule(page, server_url):
    model = large_model()
    assert sum(len(p["observed"]) for p in model["existing"]) > 4000
    answer = httpx.post(f"{server_url}/api/projects", json=model, timeout=60.0)
    assert answer.status_code == 201, answer.text
    project_id = answer.json()["id"]
    wanted = f"{server_url}/projects/{project_id}/schedule"

    response = page.goto(wanted)
    assert response is not None and response.status == 202  # answered before the evaluation
    page.wait_for_selector("#evaluation-progress progress")
    assert_caution(page.content())

    page.wait_for_selector("#schedule-table", timeout=EVALUATION_WAIT_MS)  # loaded by itself
    assert page.url == wanted
    assert page.locator("#evaluation-progress").count() == 0
    assert page.js_errors == [], page.js_errors
