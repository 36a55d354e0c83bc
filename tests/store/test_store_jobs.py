"""Background jobs: lifecycle, cancel, and jobs orphaned by a killed process."""

import pytest

from probewise.store import (
    JobNotFound,
    ProjectNotFound,
    StoreError,
    create_job,
    create_project,
    get_job,
    is_cancel_requested,
    list_jobs,
    mark_interrupted_jobs,
    open_db,
    request_cancel,
    update_job,
)


@pytest.fixture
def project_id(db, tiny):
    return create_project(db, tiny)


def test_job_lifecycle(db, project_id):
    job_id = create_job(db, project_id, "optimise", {"budget": 25000, "methods": ["BH", "CPT"]})
    job = get_job(db, job_id)
    assert (job.project_id, job.kind, job.status, job.progress, job.result) == (
        project_id,
        "optimise",
        "queued",
        0.0,
        None,
    )
    assert job.params == {"budget": 25000, "methods": ["BH", "CPT"]}
    assert job.created_at and job.updated_at
    update_job(db, job_id, status="running", message="selecting probes")
    job = update_job(db, job_id, progress=0.5)
    assert (job.status, job.progress, job.message) == ("running", 0.5, "selecting probes")
    done = update_job(db, job_id, status="done", progress=1.0, result={"cost": 24100.0})
    assert (done.status, done.result) == ("done", {"cost": 24100.0})
    assert get_job(db, job_id) == done
    with pytest.raises(StoreError, match="already ended"):
        update_job(db, job_id, status="running")


def test_bad_updates_refused(db, project_id):
    job_id = create_job(db, project_id, "optimise", {})
    with pytest.raises(ValueError):
        update_job(db, job_id, status="paused")
    with pytest.raises(ValueError):
        update_job(db, job_id, progress=1.5)
    with pytest.raises(JobNotFound):
        get_job(db, 999)
    with pytest.raises(ProjectNotFound):
        create_job(db, 999, "optimise", {})
    assert get_job(db, job_id).status == "queued"


def test_cancel_running_job(db, project_id):
    job_id = create_job(db, project_id, "optimise", {})
    update_job(db, job_id, status="running")
    assert not is_cancel_requested(db, job_id)
    job = request_cancel(db, job_id)
    assert job.status == "running" and job.cancel_requested
    assert is_cancel_requested(db, job_id)
    # the worker notices at its next check and stops
    assert update_job(db, job_id, status="cancelled", message="cancelled").status == "cancelled"


def test_cancel_queued_job_is_immediate(db, project_id):
    job_id = create_job(db, project_id, "optimise", {})
    assert request_cancel(db, job_id).status == "cancelled"


def test_cancel_finished_job_leaves_it(db, project_id):
    job_id = create_job(db, project_id, "optimise", {})
    update_job(db, job_id, status="done", result={"ok": True})
    job = request_cancel(db, job_id)
    assert job.status == "done" and not job.cancel_requested


def test_mark_interrupted_jobs(tmp_path, tiny):
    path = tmp_path / "p.db"
    db = open_db(path)
    project_id = create_project(db, tiny)
    running = create_job(db, project_id, "optimise", {})
    update_job(db, running, status="running", progress=0.3)
    queued = create_job(db, project_id, "optimise", {})
    done = create_job(db, project_id, "optimise", {})
    update_job(db, done, status="done", result={})
    db.close()  # the process died

    db = open_db(path)
    try:
        assert mark_interrupted_jobs(db) == 2
        for job_id in (running, queued):
            job = get_job(db, job_id)
            assert (job.status, job.message) == ("failed", "interrupted")
        assert get_job(db, running).progress == 0.3
        assert get_job(db, done).status == "done"
        assert mark_interrupted_jobs(db) == 0
    finally:
        db.close()


def test_list_jobs_newest_first_with_filters(db, project_id, tiny):
    other = create_project(db, tiny)
    first = create_job(db, project_id, "optimise", {"n": 1})
    export = create_job(db, project_id, "export", {})
    second = create_job(db, project_id, "optimise", {"n": 2})
    elsewhere = create_job(db, other, "optimise", {})
    loose = create_job(db, None, "optimise", {})
    update_job(db, first, status="done", result={"cost": 1.0})

    assert [j.id for j in list_jobs(db)] == [loose, elsewhere, second, export, first]
    assert [j.id for j in list_jobs(db, project_id)] == [second, export, first]
    assert [j.id for j in list_jobs(db, project_id, "optimise")] == [second, first]
    assert [j.id for j in list_jobs(db, kind="optimise")] == [loose, elsewhere, second, first]
    assert [j.id for j in list_jobs(db, project_id, "optimise", limit=1)] == [second]
    assert list_jobs(db, project_id, "optimise")[-1] == get_job(db, first)  # whole jobs
    assert list_jobs(db, 999) == [] and list_jobs(db, project_id, "posterior") == []
    with pytest.raises(ValueError):
        list_jobs(db, limit=0)
