"""can_undo: true exactly when undo would not raise NothingToUndo, along any edit history."""

import copy
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from probewise.store import (
    NothingToUndo,
    ProjectNotFound,
    can_undo,
    create_project,
    delete_project,
    duplicate_project,
    get_project,
    list_revisions,
    open_db,
    restore_revision,
    save_project,
    undo,
)


def renamed(model: dict, name: str) -> dict:
    new = copy.deepcopy(model)
    new["name"] = name
    return new


def test_nothing_to_undo_at_the_start(db, tiny):
    project_id = create_project(db, tiny)
    assert can_undo(db, project_id) is False
    assert get_project(db, project_id).can_undo is False
    with pytest.raises(NothingToUndo):
        undo(db, project_id)
    assert can_undo(db, duplicate_project(db, project_id)) is False


def test_undo_walks_back_until_nothing_is_left(db, tiny):
    project_id = create_project(db, tiny)
    save_project(db, project_id, renamed(tiny, "A"), 1, "A")
    save_project(db, project_id, renamed(tiny, "B"), 2, "B")
    assert can_undo(db, project_id) and get_project(db, project_id).can_undo
    undo(db, project_id)  # B undone
    assert can_undo(db, project_id)
    undo(db, project_id)  # A undone: back at the start of the chain
    assert can_undo(db, project_id) is False
    assert get_project(db, project_id).can_undo is False
    with pytest.raises(NothingToUndo):
        undo(db, project_id)


def test_a_restore_can_be_undone(db, tiny):
    project_id = create_project(db, tiny)
    save_project(db, project_id, renamed(tiny, "A"), 1, "A")
    undo(db, project_id)
    assert not can_undo(db, project_id)
    restore_revision(db, project_id, 2)
    assert can_undo(db, project_id)


def test_deleted_project_and_unknown_project(db, tiny):
    project_id = create_project(db, tiny)
    save_project(db, project_id, renamed(tiny, "A"), 1, "A")
    delete_project(db, project_id)
    assert can_undo(db, project_id)  # the trail still has an edit; pages hide the button
    with pytest.raises(ProjectNotFound):
        can_undo(db, 999)


OPERATIONS = st.lists(st.sampled_from(["save", "undo", "restore"]), min_size=1, max_size=8)


@settings(
    max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(operations=OPERATIONS, picks=st.lists(st.integers(0, 50), min_size=8, max_size=8))
def test_can_undo_predicts_undo(tiny, operations, picks):
    with tempfile.TemporaryDirectory() as folder:
        db = open_db(Path(folder) / "p.db")
        try:
            project_id = create_project(db, tiny)
            for step, (operation, pick) in enumerate(zip(operations, picks, strict=False)):
                predicted = can_undo(db, project_id)
                head = get_project(db, project_id)
                assert head.can_undo is predicted
                if operation == "save":
                    save_project(db, project_id, renamed(tiny, f"S{step}"), head.revision, "s")
                elif operation == "restore":
                    numbers = [r.number for r in list_revisions(db, project_id)]
                    restore_revision(db, project_id, numbers[pick % len(numbers)])
                elif predicted:
                    undo(db, project_id)
                else:
                    with pytest.raises(NothingToUndo):
                        undo(db, project_id)
                    assert get_project(db, project_id).revision == head.revision
        finally:
            db.close()
