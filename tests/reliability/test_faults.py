"""Faults: a killed server, two people editing one project, an optimiser run that fails.

- ``probewise serve`` is killed with SIGKILL while a client saves edits in a loop, three
  times, restarted on the same database each time: the file passes ``PRAGMA
  integrity_check`` and holds every revision the client saw acknowledged (200), with its
  content, numbered without gaps. (tests/store/test_store_kill.py does the same for the store
  alone; this one goes through HTTP, uvicorn and the app.)
- Optimistic concurrency: two clients that opened the same revision both save; the second
  is refused (409, a message saying the project changed) and the first one's edit stands.
  Through the JSON API, through the model-editing pages, and with eight clients at once.
- An optimiser job that fails (nothing fits the budget; an unexpected error inside) ends as
  "failed" with a message, and the project is left exactly as it was.
"""

from __future__ import annotations

import os
import random
import re
import signal
import sqlite3
import sys
import threading
import time
from concurrent.futures import ThreadPoolExecutor

import httpx
import pytest
from corpus import TINY, UNIT_FORM
from fastapi.testclient import TestClient
from reliability_helpers import (
    BASE_URL,
    free_port,
    page_text,
    served,
    start_server,
    stop_server,
    store_snapshot,
)

from probewise.store import get_revision, list_revisions, open_db
from probewise.web.app import create_app

POLL_DEADLINE_S = 120.0  # a deadline to stop waiting, not a timing assertion


def edited(number: int) -> dict:
    return {**TINY, "name": f"Edit {number}"}


# ---------------------------------------------------------------- SIGKILL during writes


class EditLoop(threading.Thread):
    """Saves edits one after another, each on the revision the last answer gave."""

    def __init__(self, base: str, pid: int, revision: int, acknowledged: list[int]):
        super().__init__(daemon=True)
        self.base, self.pid, self.revision = base, pid, revision
        self.acknowledged = acknowledged
        self.stop = threading.Event()

    def run(self) -> None:
        with httpx.Client(base_url=self.base, timeout=10.0) as client:
            while not self.stop.is_set():
                number = self.revision + 1
                try:
                    answer = client.put(
                        f"/api/projects/{self.pid}",
                        json={"model": edited(number), "expected_revision": self.revision},
                    )
                except httpx.TransportError:
                    return  # the server died mid-request: this edit was never acknowledged
                assert answer.status_code == 200, answer.text
                self.revision = answer.json()["revision"]
                assert self.revision == number
                self.acknowledged.append(number)


@pytest.mark.slow
@pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX")
def test_sigkill_of_the_server_mid_edit_loses_no_acknowledged_revision(tmp_path):
    db_path = tmp_path / "killed.db"
    log = tmp_path / "serve.log"
    rng = random.Random(20240611)
    acknowledged: list[int] = []
    pid = None
    for round_ in range(3):
        port = free_port()
        process = start_server(db_path, port, log, "--no-seed")
        base = f"http://127.0.0.1:{port}"
        try:
            if pid is None:
                pid = httpx.post(f"{base}/api/projects", json=edited(1)).json()["id"]
                acknowledged.append(1)
            revision = httpx.get(f"{base}/api/projects/{pid}").json()["revision"]
            loop = EditLoop(base, pid, revision, acknowledged)
            loop.start()
            wanted = len(acknowledged) + rng.randint(5, 30)
            deadline = time.monotonic() + POLL_DEADLINE_S
            while len(acknowledged) < wanted and loop.is_alive() and time.monotonic() < deadline:
                time.sleep(0.005)
            assert len(acknowledged) >= wanted, f"round {round_}: edits stalled"
            os.kill(process.pid, signal.SIGKILL)  # mid-stream: a PUT is usually in flight
            process.wait(timeout=30)
            loop.join(timeout=30)
            assert not loop.is_alive()
        finally:
            stop_server(process)
        assert process.returncode == -signal.SIGKILL

    conn = sqlite3.connect(db_path)
    try:
        assert conn.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        assert conn.execute("PRAGMA foreign_key_check").fetchall() == []
    finally:
        conn.close()
    db = open_db(db_path)
    try:
        numbers = [r.number for r in list_revisions(db, pid)]
        assert numbers == list(range(1, len(numbers) + 1))  # no gap, nothing half-written
        assert acknowledged == sorted(set(acknowledged))
        assert set(acknowledged) <= set(numbers), "an acknowledged revision was lost"
        for number in acknowledged:
            assert get_revision(db, pid, number)["name"] == f"Edit {number}"
        # each kill may have cut off one edit after its commit, before its answer
        assert len(numbers) - len(acknowledged) <= 3
    finally:
        db.close()
    # and the server starts again on that file and serves the latest state
    with served(db_path, log, "--no-seed") as base:
        latest = httpx.get(f"{base}/api/projects/{pid}").json()
        assert latest["revision"] == numbers[-1]


# ---------------------------------------------------------------- optimistic concurrency


@pytest.fixture
def client(tmp_path):
    with TestClient(create_app(tmp_path / "p.db", seed=False), base_url=BASE_URL) as test_client:
        test_client.db_path = tmp_path / "p.db"
        yield test_client


def test_two_api_clients_the_second_stale_edit_is_refused(client):
    pid = client.post("/api/projects", json=TINY).json()["id"]
    seen_by_a = client.get(f"/api/projects/{pid}").json()["revision"]
    seen_by_b = client.get(f"/api/projects/{pid}").json()["revision"]
    first = client.put(
        f"/api/projects/{pid}", json={"model": edited(101), "expected_revision": seen_by_a}
    )
    assert first.status_code == 200
    before = store_snapshot(client.db_path)
    second = client.put(
        f"/api/projects/{pid}", json={"model": edited(202), "expected_revision": seen_by_b}
    )
    assert second.status_code == 409
    assert "changed since you opened it" in second.json()["detail"]
    assert "reload" in second.json()["detail"]
    assert store_snapshot(client.db_path) == before
    assert client.get(f"/api/projects/{pid}").json()["model"]["name"] == "Edit 101"


def test_two_page_editors_the_second_stale_edit_is_refused(client):
    """Two browser tabs on the Ground model page, both at the same revision."""
    pid = client.post("/api/projects", json=TINY).json()["id"]
    shown = client.get(f"/api/projects/{pid}").json()["revision"]
    form_a = {**UNIT_FORM, "expected_revision": str(shown), "max": "2.5"}
    form_b = {**UNIT_FORM, "expected_revision": str(shown), "max": "3.5"}
    htmx = {"HX-Request": "true"}
    first = client.post(f"/projects/{pid}/ground/units/0", data=form_a, headers=htmx)
    assert first.status_code == 200, page_text(first.text)[:300]
    before = store_snapshot(client.db_path)
    second = client.post(f"/projects/{pid}/ground/units/0", data=form_b, headers=htmx)
    assert second.status_code == 409
    assert "changed since this page was loaded" in page_text(second.text)
    assert store_snapshot(client.db_path) == before
    stored = client.get(f"/api/projects/{pid}").json()["model"]
    assert stored["units"][0]["thickness_m"]["max"] == 2.5


@pytest.mark.slow
def test_eight_clients_saving_on_one_revision_at_once_one_wins(tmp_path):
    db_path = tmp_path / "race.db"
    with served(db_path, tmp_path / "serve.log", "--no-seed") as base:
        pid = httpx.post(f"{base}/api/projects", json=TINY).json()["id"]
        barrier = threading.Barrier(8)

        def save(n: int) -> int:
            with httpx.Client(base_url=base, timeout=30.0) as c:
                barrier.wait()
                body = {"model": edited(300 + n), "expected_revision": 1}
                return c.put(f"/api/projects/{pid}", json=body).status_code

        with ThreadPoolExecutor(8) as pool:
            statuses = sorted(pool.map(save, range(8)))
        assert statuses == [200] + [409] * 7
        final = httpx.get(f"{base}/api/projects/{pid}").json()
        assert final["revision"] == 2
        assert [r["number"] for r in httpx.get(f"{base}/api/projects/{pid}/revisions").json()] == [
            1,
            2,
        ]


# ---------------------------------------------------------------- a failed optimiser job


def wait_for_job(client: TestClient, pid: int, job_id: int) -> dict:
    deadline = time.monotonic() + POLL_DEADLINE_S
    while time.monotonic() < deadline:
        job = client.get(f"/api/projects/{pid}/jobs/{job_id}").json()
        if job["status"] in ("done", "failed", "cancelled"):
            return job
        time.sleep(0.05)
    raise AssertionError(f"job {job_id} did not end")


def start_job(client: TestClient, pid: int, budget: str) -> int:
    revision = client.get(f"/api/projects/{pid}").json()["revision"]
    answer = client.post(
        f"/projects/{pid}/optimise",
        data={
            "budget": budget,
            "methods": ["BH", "CPT", "DMT"],
            "expected_revision": str(revision),
        },
        headers={"HX-Request": "true"},
    )
    assert answer.status_code == 200, page_text(answer.text)[:300]
    # a run that ends at once (a crash) answers with its final state and no polling link
    found = re.findall(r"/jobs/(\d+)", answer.text) or re.findall(r'data-job="(\d+)"', answer.text)
    assert found, answer.text[:500]
    return int(found[0])


def project_state(db_path) -> tuple:
    projects, revisions, _jobs = store_snapshot(db_path)
    return projects, revisions


def test_an_optimiser_run_that_cannot_run_fails_and_changes_nothing(client):
    """A budget below every method's mobilisation: the optimiser refuses; the job says why."""
    pid = client.post("/api/projects", json=TINY).json()["id"]
    before = project_state(client.db_path)
    job = wait_for_job(client, pid, start_job(client, pid, "10"))
    assert job["status"] == "failed"
    assert "could not run" in job["message"] and "mobilisation" in job["message"]
    assert job["result"] is None
    assert project_state(client.db_path) == before
    page = client.get(f"/projects/{pid}/jobs/{job['id']}", headers={"HX-Request": "true"})
    assert page.status_code == 200 and "mobilisation" in page_text(page.text)


def test_an_optimiser_run_that_crashes_fails_and_changes_nothing(client, monkeypatch):
    """An unexpected error inside the optimiser: the job ends "failed", nothing is saved."""
    import probewise.app.optimiser_jobs as optimiser_jobs

    def broken(*args, **kwargs):
        raise FloatingPointError("invented fault for the test")

    monkeypatch.setattr(optimiser_jobs, "optimise", broken)
    pid = client.post("/api/projects", json=TINY).json()["id"]
    before = project_state(client.db_path)
    job = wait_for_job(client, pid, start_job(client, pid, "20000"))
    assert job["status"] == "failed"
    assert "unexpected error" in job["message"]
    assert "invented fault" not in job["message"]  # details go to the log, not the page
    assert project_state(client.db_path) == before
    # the project still takes a new run afterwards (the failed one released its slot)
    monkeypatch.undo()
    assert client.get(f"/projects/{pid}/options").status_code == 200
