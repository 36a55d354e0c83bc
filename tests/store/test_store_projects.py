"""Projects and their revision trail: create, save, stale saves, invalid input, undo, copies."""

import copy

import pytest

from probewise.errors import InputError
from probewise.io.model_file import ValidModel, check_model
from probewise.store import (
    NothingToUndo,
    ProjectDeleted,
    ProjectNotFound,
    RevisionNotFound,
    StaleRevision,
    create_project,
    delete_project,
    duplicate_project,
    export_project,
    get_project,
    get_revision,
    list_projects,
    list_revisions,
    open_db,
    restore_project,
    restore_revision,
    save_project,
    undo,
)


def edited(model: dict, name: str, spacing_m: float | None = None) -> dict:
    new = copy.deepcopy(model)
    new["name"] = name
    if spacing_m is not None:
        new["grid_spacing_m"] = spacing_m
    return new


def snapshot(db, project_id):
    """Everything a reader can see of one project."""
    revisions = list_revisions(db, project_id)
    contents = [get_revision(db, project_id, r.number) for r in revisions]
    return get_project(db, project_id), revisions, contents


def test_create_get_list(db, tiny, model_validator):
    project_id = create_project(db, tiny)
    stored = get_project(db, project_id)
    assert stored.id == project_id
    assert stored.revision == 1
    assert stored.name == tiny["name"]
    assert stored.model == model_validator(tiny)
    assert stored.deleted is False
    [summary] = list_projects(db)
    assert (summary.id, summary.name, summary.revision, summary.deleted) == (
        project_id,
        tiny["name"],
        1,
        False,
    )
    assert summary.n_layouts == len(tiny["layouts"]) == 2
    [rev] = list_revisions(db, project_id)
    assert (rev.number, rev.message, rev.name) == (1, "Imported model file", tiny["name"])
    assert export_project(db, project_id) == stored.model


def test_list_newest_first(db, tiny):
    first = create_project(db, edited(tiny, "First"))
    second = create_project(db, edited(tiny, "Second"))
    assert [p.id for p in list_projects(db)] == [second, first]
    save_project(db, first, edited(tiny, "First, edited"), 1, "rename")
    assert [p.name for p in list_projects(db)] == ["First, edited", "Second"]


def test_unknown_project(db, tiny):
    with pytest.raises(ProjectNotFound, match="no project with id 42"):
        get_project(db, 42)
    with pytest.raises(ProjectNotFound):
        save_project(db, 42, tiny, 1, "x")
    with pytest.raises(ProjectNotFound):
        undo(db, 42)
    with pytest.raises(ProjectNotFound):
        list_revisions(db, 42)


def test_save_increments_revision(db, tiny, model_validator):
    project_id = create_project(db, tiny)
    assert save_project(db, project_id, edited(tiny, "Two", 10), 1, "grid 10 m") == 2
    assert save_project(db, project_id, edited(tiny, "Three", 20), 2, "grid 20 m") == 3
    stored = get_project(db, project_id)
    assert stored.revision == 3
    assert stored.name == "Three"
    assert stored.model == model_validator(edited(tiny, "Three", 20))
    assert [r.message for r in list_revisions(db, project_id)] == [
        "Imported model file",
        "grid 10 m",
        "grid 20 m",
    ]
    assert [r.name for r in list_revisions(db, project_id)] == [tiny["name"], "Two", "Three"]


def test_stale_save_refused_and_store_unchanged(db, tiny):
    project_id = create_project(db, tiny)
    save_project(db, project_id, edited(tiny, "Theirs"), 1, "their edit")
    before = snapshot(db, project_id)
    with pytest.raises(StaleRevision) as caught:
        save_project(db, project_id, edited(tiny, "Mine"), 1, "my edit")
    assert (caught.value.current, caught.value.expected) == (2, 1)
    assert str(caught.value) == (
        "the project changed since you opened it (revision 2, you had 1); "
        "reload and re-apply your edit"
    )
    assert snapshot(db, project_id) == before


def test_stale_save_across_connections(tmp_path, tiny):
    """Two handles on one file (two processes in real life) see each other's revisions."""
    path = tmp_path / "p.db"
    first, second = open_db(path), open_db(path)
    try:
        project_id = create_project(first, tiny)
        assert save_project(second, project_id, edited(tiny, "B"), 1, "b") == 2
        with pytest.raises(StaleRevision):
            save_project(first, project_id, edited(tiny, "A"), 1, "a")
        assert get_project(first, project_id).name == "B"
    finally:
        first.close()
        second.close()


@pytest.mark.parametrize(
    "spoil",
    [
        lambda m: m.update(schema="probewise/99"),
        lambda m: m.update(units="clay"),
        lambda m: m.pop("name"),
    ],
    ids=["schema", "units", "name"],
)
def test_invalid_model_refused_and_store_unchanged(db, tiny, spoil):
    project_id = create_project(db, tiny)
    before = snapshot(db, project_id)
    bad = copy.deepcopy(tiny)
    spoil(bad)
    with pytest.raises(InputError):
        save_project(db, project_id, bad, 1, "bad edit")
    with pytest.raises(InputError):
        create_project(db, bad)
    assert snapshot(db, project_id) == before
    assert [p.id for p in list_projects(db, include_deleted=True)] == [project_id]
    assert db["revisions"].count == 1


def test_a_checked_model_is_stored_as_checked_and_cannot_be_forged(db, tiny):
    project_id = create_project(db, tiny)
    valid, problems = check_model(edited(tiny, "Checked"))
    assert problems == [] and valid is not None
    assert save_project(db, project_id, valid, 1, "checked edit") == 2
    assert get_project(db, project_id).model == valid.document
    bad = copy.deepcopy(tiny)
    bad["schema"] = "probewise/99"
    assert check_model(bad)[0] is None
    with pytest.raises(TypeError):
        ValidModel(bad)  # only check_model makes one: the store's trust is not open to forgery


def test_undo_multi_step(db, tiny, model_validator):
    project_id = create_project(db, edited(tiny, "S1"))
    save_project(db, project_id, edited(tiny, "S2"), 1, "edit A")
    save_project(db, project_id, edited(tiny, "S3"), 2, "edit B")

    assert undo(db, project_id) == 4
    assert get_project(db, project_id).name == "S2"
    assert undo(db, project_id, expected_revision=4) == 5
    assert get_project(db, project_id).name == "S1"
    assert get_project(db, project_id).model == model_validator(edited(tiny, "S1"))
    before = snapshot(db, project_id)
    with pytest.raises(NothingToUndo):
        undo(db, project_id)
    assert snapshot(db, project_id) == before

    trail = list_revisions(db, project_id)
    assert [(r.number, r.message, r.name) for r in trail] == [
        (1, "Imported model file", "S1"),
        (2, "edit A", "S2"),
        (3, "edit B", "S3"),
        (4, "Undo: edit B", "S2"),
        (5, "Undo: edit A", "S1"),
    ]


def test_undo_at_revision_one(db, tiny):
    project_id = create_project(db, tiny)
    with pytest.raises(NothingToUndo, match="nothing to undo"):
        undo(db, project_id)
    assert get_project(db, project_id).revision == 1


def test_edit_after_undo_starts_new_chain(db, tiny):
    project_id = create_project(db, edited(tiny, "S1"))
    save_project(db, project_id, edited(tiny, "S2"), 1, "A")
    save_project(db, project_id, edited(tiny, "S3"), 2, "B")
    undo(db, project_id)  # back to S2 (rev 4)
    save_project(db, project_id, edited(tiny, "S4"), 4, "C")  # rev 5
    undo(db, project_id)  # undoes C -> S2
    assert get_project(db, project_id).name == "S2"
    undo(db, project_id)  # undoes A -> S1 (B is off the chain, still in the trail)
    assert get_project(db, project_id).name == "S1"
    with pytest.raises(NothingToUndo):
        undo(db, project_id)
    assert [r.name for r in list_revisions(db, project_id)] == [
        "S1",
        "S2",
        "S3",
        "S2",
        "S4",
        "S2",
        "S1",
    ]


def test_undo_stale_refused(db, tiny):
    project_id = create_project(db, tiny)
    save_project(db, project_id, edited(tiny, "B"), 1, "b")
    with pytest.raises(StaleRevision):
        undo(db, project_id, expected_revision=1)
    assert get_project(db, project_id).revision == 2


def test_restore_revision_and_undo_it(db, tiny):
    project_id = create_project(db, edited(tiny, "S1"))
    save_project(db, project_id, edited(tiny, "S2"), 1, "A")
    save_project(db, project_id, edited(tiny, "S3"), 2, "B")
    assert restore_revision(db, project_id, 1) == 4
    assert get_project(db, project_id).name == "S1"
    assert list_revisions(db, project_id)[-1].message == "Restored revision 1"
    with pytest.raises(StaleRevision):
        restore_revision(db, project_id, 2, expected_revision=3)
    with pytest.raises(RevisionNotFound):
        restore_revision(db, project_id, 99)
    undo(db, project_id)
    assert get_project(db, project_id).name == "S3"
    assert list_revisions(db, project_id)[-1].message == "Undo: Restored revision 1"


def test_revision_trail_complete(db, tiny, model_validator):
    project_id = create_project(db, edited(tiny, "R1"))
    written = [model_validator(edited(tiny, "R1"))]
    for n in range(2, 8):
        model = edited(tiny, f"R{n}", float(n))
        save_project(db, project_id, model, n - 1, f"step {n}")
        written.append(model_validator(model))
    trail = list_revisions(db, project_id)
    assert [r.number for r in trail] == list(range(1, 8))
    assert all(r.created_at for r in trail)
    assert [get_revision(db, project_id, r.number) for r in trail] == written
    with pytest.raises(RevisionNotFound):
        get_revision(db, project_id, 8)


def test_duplicate(db, tiny):
    project_id = create_project(db, tiny)
    save_project(db, project_id, edited(tiny, "Original"), 1, "rename")
    copy_id = duplicate_project(db, project_id)
    stored = get_project(db, copy_id)
    assert copy_id != project_id
    assert stored.name == "Original (copy)" == stored.model["name"]
    assert stored.revision == 1
    assert stored.model == {**get_project(db, project_id).model, "name": "Original (copy)"}
    assert "project" in list_revisions(db, copy_id)[0].message
    with pytest.raises(NothingToUndo):
        undo(db, copy_id)
    named = duplicate_project(db, project_id, new_name="Option B")
    assert get_project(db, named).model["name"] == "Option B"
    # the source is untouched
    assert get_project(db, project_id).revision == 2
    assert len(list_projects(db)) == 3


def test_delete_and_restore(db, tiny):
    keep = create_project(db, edited(tiny, "Keep"))
    project_id = create_project(db, edited(tiny, "Bin me"))
    save_project(db, project_id, edited(tiny, "Bin me too"), 1, "rename")
    delete_project(db, project_id)
    assert [p.id for p in list_projects(db)] == [keep]
    listed = {p.id: p for p in list_projects(db, include_deleted=True)}
    assert listed[project_id].deleted is True
    assert get_project(db, project_id).deleted is True
    assert len(list_revisions(db, project_id)) == 2
    with pytest.raises(ProjectDeleted, match="restore it"):
        save_project(db, project_id, edited(tiny, "x"), 2, "x")
    with pytest.raises(ProjectDeleted):
        undo(db, project_id)
    delete_project(db, project_id)  # again: no-op
    restore_project(db, project_id)
    assert {p.id for p in list_projects(db)} == {keep, project_id}
    stored = get_project(db, project_id)
    assert (stored.revision, stored.name, stored.deleted) == (2, "Bin me too", False)
    assert save_project(db, project_id, edited(tiny, "Back"), 2, "edit") == 3
