"""The demo project goes into a database that never held a project, and only then."""

import json
from pathlib import Path

from probewise.io.model_file import validate_model
from probewise.store import (
    delete_project,
    get_project,
    list_projects,
    list_revisions,
    seed_demo_if_empty,
)


def test_seed_once(db, tiny, tiny_path):
    project_id = seed_demo_if_empty(db, tiny_path)
    assert project_id is not None
    assert get_project(db, project_id).name == tiny["name"]
    assert seed_demo_if_empty(db, tiny_path) is None
    delete_project(db, project_id)
    assert seed_demo_if_empty(db, tiny_path) is None
    assert list_projects(db) == []


def test_seed_the_shipped_demo(db):
    demo_path = Path(__file__).resolve().parents[2] / "seed_data" / "demo-project.json"
    project_id = seed_demo_if_empty(db, demo_path)
    [summary] = list_projects(db)
    assert summary.id == project_id and summary.revision == 1
    assert list_revisions(db, project_id)[0].message == "Demo project (invented data)"
    demo = json.loads(demo_path.read_text())
    assert get_project(db, project_id).model == validate_model(demo)  # stored whole, validated


def test_seed_both_shipped_demos_in_order(db):
    from probewise.resources import DEMO_PROJECT_PATHS
    from probewise.store import seed_demos_if_empty

    ids = seed_demos_if_empty(db, DEMO_PROJECT_PATHS)
    assert ids == [1, 2]
    for project_id, path in zip(ids, DEMO_PROJECT_PATHS, strict=True):
        model = json.loads(Path(path).read_text())
        assert "invented" in model["name"].lower()  # demo data say they are invented
        assert get_project(db, project_id).model == validate_model(model)
    assert "ground_level" in get_project(db, 2).model  # the levels and history demo
    assert seed_demos_if_empty(db, DEMO_PROJECT_PATHS) == []
