"""Random sequences of edits never lose a revision and always show the last written state.

A reference model runs beside the store: per project, the list of every revision's content
(the trail) and an editor-style undo stack (save and restore push, undo pops). Undo in the
store must land where popping the stack lands.
"""

import copy
import json
import shutil
import tempfile
import threading
from pathlib import Path

import hypothesis.strategies as st
from hypothesis import HealthCheck, settings
from hypothesis.stateful import RuleBasedStateMachine, invariant, precondition, rule

from probewise.store import (
    NothingToUndo,
    ProjectDeleted,
    StaleRevision,
    create_project,
    delete_project,
    duplicate_project,
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

TINY = json.loads((Path(__file__).resolve().parents[1] / "data" / "tiny-model.json").read_text())


def variant(name: str, spacing_m: float, n_layouts: int) -> dict:
    model = copy.deepcopy(TINY)
    model["name"] = name
    model["grid_spacing_m"] = spacing_m
    model["layouts"] = model["layouts"][:n_layouts]
    return model


models = st.builds(
    variant,
    name=st.text(st.characters(codec="utf-8", exclude_categories=["Cs", "Cc"]), min_size=1)
    .map(str.strip)
    .filter(bool),
    spacing_m=st.sampled_from([2.5, 5.0, 10.0, 20.0]),
    n_layouts=st.integers(0, 2),
)


class StoreMachine(RuleBasedStateMachine):
    def __init__(self):
        super().__init__()
        from probewise.io.model_file import validate_model  # stand-in via conftest until it exists

        self.validate = validate_model
        self.folder = tempfile.mkdtemp(prefix="probewise-store-")
        self.db = open_db(Path(self.folder) / "p.db")
        self.trail: dict[int, list[dict]] = {}  # every revision's content, in order
        self.stack: dict[int, list[dict]] = {}  # the undo chain
        self.deleted: dict[int, bool] = {}
        self.writes = 0

    def teardown(self):
        self.db.close()
        shutil.rmtree(self.folder, ignore_errors=True)

    def _write(self, project_id: int, content: dict, push: bool = True) -> None:
        self.trail[project_id].append(content)
        if push:
            self.stack[project_id].append(content)
        self.writes += 1

    def _current(self, project_id: int) -> int:
        return len(self.trail[project_id])

    @rule(model=models)
    def create(self, model):
        project_id = create_project(self.db, model)
        content = self.validate(model)
        self.trail[project_id], self.stack[project_id] = [], []
        self.deleted[project_id] = False
        self._write(project_id, content)

    @precondition(lambda self: self.trail)
    @rule(data=st.data(), model=models, stale=st.booleans())
    def save(self, data, model, stale):
        project_id = data.draw(st.sampled_from(sorted(self.trail)))
        expected = self._current(project_id) - (1 if stale else 0)
        try:
            number = save_project(self.db, project_id, model, expected, "edit")
        except StaleRevision:
            assert stale
            return
        except ProjectDeleted:
            assert self.deleted[project_id]
            return
        assert not stale and not self.deleted[project_id]
        self._write(project_id, self.validate(model))
        assert number == self._current(project_id)

    @precondition(lambda self: self.trail)
    @rule(data=st.data())
    def undo(self, data):
        project_id = data.draw(st.sampled_from(sorted(self.trail)))
        try:
            undo(self.db, project_id, expected_revision=self._current(project_id))
        except NothingToUndo:
            assert len(self.stack[project_id]) == 1
            return
        except ProjectDeleted:
            assert self.deleted[project_id]
            return
        assert not self.deleted[project_id]
        self.stack[project_id].pop()
        self._write(project_id, self.stack[project_id][-1], push=False)

    @precondition(lambda self: self.trail)
    @rule(data=st.data())
    def restore_revision(self, data):
        project_id = data.draw(st.sampled_from(sorted(self.trail)))
        number = data.draw(st.integers(1, self._current(project_id)))
        try:
            restore_revision(self.db, project_id, number)
        except ProjectDeleted:
            assert self.deleted[project_id]
            return
        self._write(project_id, self.trail[project_id][number - 1])

    @precondition(lambda self: self.trail)
    @rule(data=st.data())
    def duplicate(self, data):
        source = data.draw(st.sampled_from(sorted(self.trail)))
        project_id = duplicate_project(self.db, source)
        content = copy.deepcopy(self.trail[source][-1])
        content["name"] = f"{content['name']} (copy)"
        self.trail[project_id], self.stack[project_id] = [], []
        self.deleted[project_id] = False
        self._write(project_id, self.validate(content))

    @precondition(lambda self: self.trail)
    @rule(data=st.data())
    def delete_or_restore(self, data):
        project_id = data.draw(st.sampled_from(sorted(self.trail)))
        if self.deleted[project_id]:
            restore_project(self.db, project_id)
        else:
            delete_project(self.db, project_id)
        self.deleted[project_id] = not self.deleted[project_id]

    @invariant()
    def nothing_lost(self):
        assert self.db["revisions"].count == self.writes
        listed = {p.id: p for p in list_projects(self.db, include_deleted=True)}
        assert set(listed) == set(self.trail)
        visible = {p.id for p in list_projects(self.db)}
        assert visible == {i for i, gone in self.deleted.items() if not gone}
        for project_id, trail in self.trail.items():
            stored = get_project(self.db, project_id)
            assert stored.revision == len(trail) == listed[project_id].revision
            assert stored.model == trail[-1] == self.stack[project_id][-1]
            assert stored.name == trail[-1]["name"]
            assert listed[project_id].n_layouts == len(trail[-1]["layouts"])
            assert [r.number for r in list_revisions(self.db, project_id)] == list(
                range(1, len(trail) + 1)
            )
        # spot-check stored contents of every revision (cheap: documents are small)
        for project_id, trail in self.trail.items():
            for number, content in enumerate(trail, start=1):
                assert get_revision(self.db, project_id, number) == content


StoreMachine.TestCase.settings = settings(
    max_examples=40,
    stateful_step_count=25,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)
TestStoreSequences = StoreMachine.TestCase


def test_threads_share_one_connection(db, tiny):
    """Web worker threads save concurrently through one handle; every success is kept."""
    project_id = create_project(db, tiny)
    successes = []
    errors = []

    def worker(name: str) -> None:
        for i in range(15):
            while True:
                current = get_project(db, project_id).revision
                model = {**tiny, "name": f"{name}-{i}"}
                try:
                    successes.append(save_project(db, project_id, model, current, name))
                    break
                except StaleRevision:
                    continue
                except Exception as exc:  # pragma: no cover - reported below
                    errors.append(exc)
                    return

    threads = [threading.Thread(target=worker, args=(f"t{k}",)) for k in range(4)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert errors == []
    assert sorted(successes) == list(range(2, 2 + 4 * 15))
    assert [r.number for r in list_revisions(db, project_id)] == list(range(1, 2 + 4 * 15))
