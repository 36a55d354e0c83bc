"""Core results shared by the decision pages (Options, Compare, Schedule), per project revision.

A revision never changes once stored, so everything computed from it (the core Project, the
baseline on the evaluation grid, each layout's LayoutResult, figures drawn from them) can be
kept and reused until the project moves on. The cache holds a few revisions (LRU), each
computed lazily under its own lock: two requests that need the same numbers wait for one
computation instead of doing it twice, while other projects are served meanwhile. A page load
does not wait for a slow evaluator: it is computed in the background with progress
(``probewise.app.evaluation_jobs``).
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable, Sequence
from typing import Any, TypeVar

import sqlite_utils

from probewise.app.evaluation_jobs import defer_if_slow
from probewise.app.layouts import layout_kind
from probewise.app.project import find_layout
from probewise.app.schedule import default_layout_name
from probewise.app.to_core import to_core
from probewise.core.evaluate import GridEvaluator, LayoutResult, with_pareto
from probewise.core.grid import EmptyGridError
from probewise.core.model import Layout, Project
from probewise.core.options import RankedOption, rank_options
from probewise.core.value import EmptyElementError
from probewise.errors import InputError
from probewise.io.model_elements import no_cell_error
from probewise.store import StoredProject, get_project

MAX_ENTRIES = 16  # project revisions kept (a few MB each on the demo)
MAX_MEMO = 96  # figures and other derived values kept per revision

T = TypeVar("T")


class ProjectResults:
    """The core's view of one stored revision, computed on first use.

    Attributes
    ----------
    project_id, revision : int
    model : dict
        The validated model-file document of that revision (do not change it).
    project : Project
        ``to_core(model)``.
    """

    def __init__(self, stored: StoredProject):
        self.project_id = stored.id
        self.revision = stored.revision
        self.model = stored.model
        self.project: Project = to_core(stored.model)
        self._lock = threading.RLock()
        self._evaluator: GridEvaluator | None = None
        self._evaluator_error: InputError | None = None
        self._results: dict[str, LayoutResult] = {}
        self._ranked: tuple[LayoutResult, ...] | None = None
        self._ranking: list[RankedOption] | None = None
        self._memo: OrderedDict[tuple, Any] = OrderedDict()
        self._computing: dict[tuple, threading.Lock] = {}  # one computation per key at a time

    @property
    def evaluator(self) -> GridEvaluator:
        """The baseline solved on the evaluation grid (InputError when the grid is empty).

        A page request may not wait for a slow one: it is then computed in the background and
        EvaluationPending raised (``probewise.app.evaluation_jobs``)."""
        if not self.evaluator_done:  # read without the lock: a background job may hold it
            defer_if_slow(self)
        return self.compute_evaluator()

    @property
    def evaluator_done(self) -> bool:
        """True once the evaluator is computed or known to fail with an InputError."""
        return self._evaluator is not None or self._evaluator_error is not None

    def compute_evaluator(
        self, on_progress: Callable[[float], None] | None = None
    ) -> GridEvaluator:
        """The evaluator, computed here when not yet done (``on_progress``: share of tiles)."""
        with self._lock:
            if self._evaluator is None and self._evaluator_error is None:
                try:
                    self._evaluator = GridEvaluator(
                        self.project, layouts=self.project.layouts, on_progress=on_progress
                    )
                except EmptyGridError as exc:
                    # a revision never changes: its input error is kept, not computed again
                    self._evaluator_error = InputError("grid_spacing_m", str(exc))
                except InputError as exc:
                    self._evaluator_error = exc
            if self._evaluator_error is not None:
                error = self._evaluator_error
                raise InputError(error.field, error.problem) from None
            assert self._evaluator is not None
            return self._evaluator

    @property
    def layout_names(self) -> list[str]:
        return [layout.name for layout in self.project.layouts]

    def core_layout(self, name: str) -> Layout:
        return find_layout(self.project, name, "layout")

    def layout_result(self, name: str) -> LayoutResult:
        """One layout's numbers (its ``pareto`` flag is provisional; see ``results``)."""
        evaluator = self.evaluator  # before the lock, which a background evaluation holds
        with self._lock:
            if name not in self._results:
                self._results[name] = evaluator.evaluate_layout(self.core_layout(name))
            return self._results[name]

    def results(self) -> tuple[LayoutResult, ...]:
        """Every layout's numbers, in the model's order, with Pareto flags set among them."""
        _ = self.evaluator  # before the lock, which a background evaluation holds
        with self._lock:
            if self._ranked is None:
                self._ranked = with_pareto([self.layout_result(n) for n in self.layout_names])
            return self._ranked

    def result_named(self, name: str) -> LayoutResult:
        """A layout's numbers with its Pareto flag set against the other layouts."""
        find_layout(self.project, name, "layout")  # InputError naming the known layouts
        return next(result for result in self.results() if result.name == name)

    def kinds(self) -> dict[str, str]:
        """Kind of every layout for the ranking: "hand", "guidance" or "optimised"."""
        return {layout["name"]: layout_kind(layout) for layout in self.model.get("layouts") or []}

    def ranking(self) -> list[RankedOption]:
        """Every layout ranked (sorted by cost; Pareto flags over all of them)."""
        evaluator = self.evaluator  # before the lock, which a background evaluation holds
        with self._lock:
            if self._ranking is None:
                known = {r.name: r for r in self.results()}
                try:
                    self._ranking = rank_options(
                        self.project,
                        self.project.layouts,
                        self.kinds(),
                        evaluator=evaluator,
                        known=known,
                    )
                except EmptyElementError as exc:  # a grid coarsened past an element
                    raise no_cell_error(exc.index, exc.name) from None
            return self._ranking

    def default_layout(self) -> str | None:
        """The option a page shows first (the same rule as the command-line schedule)."""
        return default_layout_name(self.project, self.ranking())

    def memo(self, key: Sequence[Any], compute: Callable[[], T]) -> T:
        """A value derived from this revision (a figure, a table), computed once per key."""
        key = tuple(key)
        with self._lock:
            if key in self._memo:
                self._memo.move_to_end(key)
                return self._memo[key]
            busy = self._computing.setdefault(key, threading.Lock())
        # Figures of one revision draw side by side, but a page asking for several figures that
        # share one costly value (the design elements' set-up) must not compute it once each.
        with busy:
            with self._lock:
                if key in self._memo:
                    return self._memo[key]
            value = compute()
            with self._lock:
                self._memo[key] = value
                self._memo.move_to_end(key)
                while len(self._memo) > MAX_MEMO:
                    self._memo.popitem(last=False)
                self._computing.pop(key, None)
        return value


_cache: OrderedDict[tuple, ProjectResults] = OrderedDict()
_cache_lock = threading.Lock()


def cache_key(db: sqlite_utils.Database, stored: StoredProject) -> tuple:
    # The connection identifies the database (tests open many); updated_at guards against a
    # recycled id() of a closed connection.
    return (id(db), stored.id, stored.revision, stored.updated_at)


def results_of(db: sqlite_utils.Database, stored: StoredProject) -> ProjectResults:
    """The shared results of a stored project's current revision."""
    key = cache_key(db, stored)
    with _cache_lock:
        entry = _cache.get(key)
        if entry is not None:
            _cache.move_to_end(key)
            return entry
    entry = ProjectResults(stored)  # to_core is cheap; the heavy parts are lazy
    with _cache_lock:
        entry = _cache.setdefault(key, entry)
        _cache.move_to_end(key)
        while len(_cache) > MAX_ENTRIES:
            _cache.popitem(last=False)
    return entry


def project_results(db: sqlite_utils.Database, project_id: int) -> ProjectResults:
    """Read the project's current revision and return its shared results."""
    return results_of(db, get_project(db, project_id))


def clear() -> None:
    """Forget everything (tests)."""
    with _cache_lock:
        _cache.clear()
