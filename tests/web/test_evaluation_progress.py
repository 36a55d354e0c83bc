"""A large project's pages answer at once with a progress bar while its evaluation grid is
computed in the background, then load themselves; small projects compute in the request.

"Large" is the core's local-conditioning rule (``probewise.core.local_conditioning.use_local``).
To keep the case fast its reading threshold is lowered to 100: bench S (benchmarks/make_case.py)
with 120 more invented existing CPTs then holds several hundred readings and is conditioned
tile by tile, the path that reports progress. A hold on the job's progress report keeps the
computation half done while the test looks at the progress.
"""

from __future__ import annotations

import html
import importlib.util
import re
import threading
from pathlib import Path

import pytest
from caution_check import assert_caution
from edit_helpers import add_project
from fastapi.testclient import TestClient
from web_helpers import BASE_URL, htmx

from probewise.app import results as results_module
from probewise.app.evaluation_jobs import EvaluationJob, evaluation_job
from probewise.app.results import project_results
from probewise.core import local_conditioning
from probewise.core.grid import EmptyGridError

BENCH = Path(__file__).resolve().parents[2] / "benchmarks" / "make_case.py"
PAGE = {"Accept": "text/html,application/xhtml+xml,*/*;q=0.8"}  # a browser's page load
WAIT_S = 60  # generous bound on waits for the worker thread; nothing is timed


def bench_model(existing_cpts: int) -> dict:
    spec = importlib.util.spec_from_file_location("make_case", BENCH)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.add_existing_cpts(module.make("S", 1), existing_cpts)


def readings_of(model: dict) -> int:
    """Readings of the existing probes as the model file states them (one per depth)."""
    return sum(len(probe["observed"]) for probe in model["existing"])


class Hold:
    """Keeps a background evaluation waiting after its first progress report."""

    def __init__(self) -> None:
        self.reached = threading.Event()
        self.release = threading.Event()
        self.fractions: list[float] = []


@pytest.fixture
def large(client: TestClient, monkeypatch: pytest.MonkeyPatch) -> tuple[int, dict]:
    """(id, model) of a project whose evaluation conditions locally (the slow path)."""
    monkeypatch.setattr(local_conditioning, "EXACT_MAX_READINGS", 100)
    model = bench_model(120)
    assert readings_of(model) > 100  # above the lowered threshold: the local path
    return add_project(client, model), model


@pytest.fixture
def hold(monkeypatch: pytest.MonkeyPatch):
    held = Hold()
    report = EvaluationJob.report

    def held_report(job: EvaluationJob, fraction: float) -> None:
        report(job, fraction)  # the job's own bookkeeping, then wait
        held.fractions.append(fraction)
        held.reached.set()
        held.release.wait(WAIT_S)

    monkeypatch.setattr(EvaluationJob, "report", held_report)
    yield held
    held.release.set()  # never leave a worker waiting


def job_of(client: TestClient, project_id: int) -> EvaluationJob:
    job = evaluation_job(project_results(client.app.state.db, project_id))
    assert job is not None, "no background evaluation was started"
    return job


def progress_of(text: str) -> str:
    """The progress fragment (its root element and what it holds) in a page or fragment."""
    start = text.index('<div id="evaluation-progress"')
    return text[start : text.index("</div>\n</div>", start)]


def poll_url(text: str) -> str:
    found = re.search(r'<div id="evaluation-progress"[^>]*hx-get="([^"]+)"', text)
    assert found, "the progress fragment does not poll"
    return html.unescape(found.group(1))


def test_large_project_page_shows_progress_at_once_then_loads_with_results(
    client: TestClient, large, hold: Hold
):
    project_id, model = large
    page = client.get(f"/projects/{project_id}/schedule", headers=PAGE)
    assert page.status_code == 202, page.text[:300]  # answered before the evaluation ended
    assert "<html" in page.text and 'id="schedule-table"' not in page.text
    assert_caution(page.text)  # the page extends base.html
    assert 'hx-trigger="every 1s"' in progress_of(page.text)
    url = poll_url(page.text)
    assert url.startswith(f"/projects/{project_id}/evaluation?")

    assert hold.reached.wait(WAIT_S), "the evaluation never reported progress"
    fraction = hold.fractions[0]
    assert 0 < fraction < 1, "the case must condition several tiles to show progress"
    percent = round(100 * fraction)
    polled = client.get(url, headers=htmx())
    assert polled.status_code == 200
    assert "hx-redirect" not in polled.headers
    assert polled.text.lstrip().startswith('<div id="evaluation-progress"')  # fragment only
    phrase = f"Conditioning the grid on {readings_of(model):,} existing readings: {percent}%"
    assert phrase in polled.text
    assert f'value="{percent}"' in polled.text
    assert poll_url(polled.text) == url  # and it keeps polling

    hold.release.set()
    assert job_of(client, project_id).wait(WAIT_S)
    done = client.get(url, headers=htmx())
    assert done.headers.get("hx-redirect") == f"/projects/{project_id}/schedule"
    assert "hx-trigger" not in done.text  # polling stops

    shown = client.get(done.headers["hx-redirect"], headers=PAGE)
    assert shown.status_code == 200
    assert 'id="evaluation-progress"' not in shown.text
    assert 'id="schedule-table"' in shown.text  # the schedule, computed


def test_large_project_fragment_shows_progress_where_it_goes_then_reloads_the_page(
    client: TestClient, large, hold: Hold
):
    """Compare loads its heavy part as an htmx fragment after the page's shell."""
    project_id, _ = large
    shell = client.get(f"/projects/{project_id}/compare", headers=PAGE)
    assert shell.status_code == 200  # the shell needs no results
    showing = f"{BASE_URL}/projects/{project_id}/compare?quantity=std"
    part = client.get(
        f"/projects/{project_id}/compare/results?quantity=std",
        headers=htmx(**{"HX-Current-URL": showing}),
    )
    assert part.status_code == 202
    assert part.text.lstrip().startswith('<div id="evaluation-progress"')  # no whole page
    assert "<html" not in part.text

    hold.release.set()
    assert job_of(client, project_id).wait(WAIT_S)
    done = client.get(poll_url(part.text), headers=htmx())
    assert done.headers.get("hx-redirect") == f"/projects/{project_id}/compare?quantity=std"
    again = client.get(f"/projects/{project_id}/compare/results?quantity=std", headers=htmx())
    assert again.status_code == 200
    assert 'id="ranking-table"' in again.text


def test_small_project_pages_compute_in_the_request(client: TestClient):
    """The demo is below the thresholds: no progress page, results at once (as always)."""
    page = client.get("/projects/1/schedule", headers=PAGE)
    assert page.status_code == 200
    assert 'id="schedule-table"' in page.text
    assert 'id="evaluation-progress"' not in page.text
    part = client.get("/projects/1/compare/results", headers=htmx())
    assert part.status_code == 200 and 'id="ranking-table"' in part.text
    assert evaluation_job(project_results(client.app.state.db, 1)) is None


def test_api_and_images_of_a_large_project_compute_in_place(client: TestClient, large):
    project_id, model = large
    answer = client.get(f"/api/projects/{project_id}/evaluation")
    assert answer.status_code == 200
    assert answer.json()["conditioning"]["method"] == "local"
    chart = client.get(f"/projects/{project_id}/compare/chart.svg")  # an <img>: no text/html
    assert chart.status_code == 200 and chart.headers["content-type"].startswith("image/svg")
    assert evaluation_job(project_results(client.app.state.db, project_id)) is None


def test_an_input_error_of_the_evaluation_shows_on_the_page_as_before(
    client: TestClient, large, monkeypatch: pytest.MonkeyPatch
):
    """A site no cell centre falls in (the core's EmptyGridError, raised here at its seam)."""
    project_id, _ = large
    problem = "no evaluation cell centre falls inside the site; use a finer spacing"
    release = threading.Event()  # fails only once the page has answered

    def empty_grid(*args, **kwargs):
        release.wait(WAIT_S)
        raise EmptyGridError(problem)

    monkeypatch.setattr(results_module, "GridEvaluator", empty_grid)
    page = client.get(f"/projects/{project_id}/schedule", headers=PAGE)
    release.set()
    assert page.status_code == 202
    assert job_of(client, project_id).wait(WAIT_S)
    done = client.get(poll_url(page.text), headers=htmx())
    assert done.headers.get("hx-redirect") == f"/projects/{project_id}/schedule"
    shown = client.get(f"/projects/{project_id}/schedule", headers=PAGE)
    assert f"The schedule cannot be computed: grid_spacing_m: {problem}" in shown.text


def test_an_unexpected_failure_is_reported_and_a_new_page_load_tries_again(
    client: TestClient, large, monkeypatch: pytest.MonkeyPatch
):
    project_id, _ = large
    calls = []
    release = threading.Event()  # fails only once the page has answered

    def broken(*args, **kwargs):
        calls.append(1)
        release.wait(WAIT_S)
        raise RuntimeError("invented fault")

    monkeypatch.setattr(results_module, "GridEvaluator", broken)
    page = client.get(f"/projects/{project_id}/schedule", headers=PAGE)
    release.set()
    assert page.status_code == 202
    assert job_of(client, project_id).wait(WAIT_S)
    polled = client.get(poll_url(page.text), headers=htmx())
    assert "hx-redirect" not in polled.headers
    assert "The evaluation failed: the server met an unexpected error" in polled.text
    assert 'role="alert"' in polled.text and "hx-trigger" not in polled.text
    again = client.get(f"/projects/{project_id}/schedule", headers=PAGE)
    assert again.status_code == 202
    assert job_of(client, project_id).wait(WAIT_S)
    assert len(calls) == 2  # the second page load started a new evaluation


def test_a_newer_revision_stops_the_evaluation_of_the_older_one(
    client: TestClient, large, hold: Hold
):
    project_id, model = large
    first = client.get(f"/projects/{project_id}/schedule", headers=PAGE)
    assert first.status_code == 202
    assert hold.reached.wait(WAIT_S)
    older = job_of(client, project_id)
    revision = older.revision
    saved = client.put(
        f"/api/projects/{project_id}",
        json={"model": dict(model, name="Renamed"), "expected_revision": revision},
    )
    assert saved.status_code == 200, saved.text
    second = client.get(f"/projects/{project_id}/schedule", headers=PAGE)
    assert second.status_code == 202
    newer = job_of(client, project_id)
    assert newer is not older and newer.revision > revision
    hold.release.set()
    assert older.wait(WAIT_S) and newer.wait(WAIT_S)
    assert older.failed and older.error == "a newer revision of the project replaced it"
    assert newer.stage == "done"
    done = client.get(poll_url(second.text), headers=htmx())
    assert done.headers.get("hx-redirect") == f"/projects/{project_id}/schedule"


@pytest.mark.parametrize(
    "wanted",
    ["https://elsewhere.example/projects/{id}/schedule", "//elsewhere.example/x", "/projects/"],
)
def test_the_poll_sends_the_browser_only_to_this_projects_pages(
    client: TestClient, large, wanted: str
):
    project_id, _ = large
    _ = client.get(f"/api/projects/{project_id}/evaluation")  # computed: the poll answers done
    done = client.get(
        f"/projects/{project_id}/evaluation",
        params={"next": wanted.format(id=project_id)},
        headers=htmx(),
    )
    assert done.headers.get("hx-redirect") == f"/projects/{project_id}"
    kept = client.get(
        f"/projects/{project_id}/evaluation",
        params={"next": f"/projects/{project_id}/schedule?layout=A"},
        headers=htmx(),
    )
    assert kept.headers.get("hx-redirect") == f"/projects/{project_id}/schedule?layout=A"


def test_sensitivity_of_a_large_project_is_ranked_on_request_not_on_load(client: TestClient, large):
    """Each changed model is a whole evaluation again: beyond exact conditioning the fragment
    offers a button (``?go=1``) instead of ranking on every page load."""
    project_id, model = large
    offer = client.get(f"/projects/{project_id}/schedule/sensitivity")
    assert offer.status_code == 200
    assert "Not ranked yet" in offer.text and "sensitivity?go=1" in offer.text
    assert "sensitivity-table" not in offer.text
    assert f"{readings_of(model):,} existing readings" in offer.text
    ranked = client.get(f"/projects/{project_id}/compare/sensitivity?go=1")
    assert ranked.status_code == 200 and "sensitivity-table" in ranked.text
    small = client.get("/projects/1/compare/sensitivity")  # the demo: ranked on load
    assert "sensitivity-table" in small.text and "Not ranked yet" not in small.text
