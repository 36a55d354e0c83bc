"""A revision's evaluation grid computed in a background thread, with progress, for pages.

Evaluating a project with thousands of existing readings, or a corridor-length site, takes
from seconds to a minute (the baseline and every layout conditioned tile by tile:
``probewise.core.local_conditioning``). A page request must not wait that long without a
word, so while ``deferring_slow_evaluations`` is in effect (the web app sets it for a
browser's GET of a page or an htmx fragment) asking a revision for its evaluator when it is not
computed yet and would be slow starts (or finds) its job here and raises
:class:`EvaluationPending`; the page answers with a progress bar and loads itself again when
the job is done. Everything else (form posts, the API, images, the command line) computes in
place as before.

"Would be slow" is the core's own rule, decided before computing: the evaluation conditions
locally (``use_local``) on the readings of the existing probes over the site's estimated
cells. Below it (the demos) nothing changes. One job runs per revision at a time; it holds the
revision's lock (``ProjectResults.compute_evaluator``), so a request that does wait waits for
the same computation. A job started for a newer revision stops the project's older ones at
their next progress report (pages show the current revision only). A job that failed on bad
input keeps that InputError in the revision (the page then shows it as it always did); any
other failure is kept in the job and reported.
"""

from __future__ import annotations

import logging
import threading
import weakref
from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from typing import TYPE_CHECKING

from probewise.core.local_conditioning import estimated_cells, use_local
from probewise.core.model import Project
from probewise.errors import InputError

if TYPE_CHECKING:
    from probewise.app.results import ProjectResults

log = logging.getLogger(__name__)

_deferring: ContextVar[bool] = ContextVar("probewise_defer_slow_evaluations", default=False)
_jobs: weakref.WeakKeyDictionary[ProjectResults, EvaluationJob] = weakref.WeakKeyDictionary()
_jobs_lock = threading.Lock()

UNEXPECTED = "the server met an unexpected error; its log has the details"
SUPERSEDED = "a newer revision of the project replaced it"


class EvaluationSuperseded(Exception):  # noqa: N818 - a stop, not a fault
    """Raised in a job's progress report to stop it: its revision is no longer current."""


class EvaluationPending(Exception):  # noqa: N818 - not an error: the answer comes later
    """The evaluator a page asked for is being computed in the background (``job``)."""

    def __init__(self, job: EvaluationJob):
        super().__init__(f"project {job.project_id} revision {job.revision} is evaluating")
        self.job = job


def existing_readings(project: Project) -> int:
    """Readings of the existing probes: one per recorded boundary depth (as the core counts)."""
    return sum(len(probe.observed) for probe in project.existing)


def evaluation_is_slow(project: Project) -> bool:
    """True when evaluating the project conditions locally, tile by tile (the slow path)."""
    return use_local(existing_readings(project), estimated_cells(project.site))


class EvaluationJob:
    """One revision's evaluator being computed in a daemon thread.

    ``fraction`` is the share of the grid's tiles conditioned (0..1); ``phrase`` says what is
    being done. ``error`` is the problem when it failed (an InputError's ``field: problem``
    or a plain message), None otherwise.
    """

    def __init__(self, entry: ProjectResults):
        self.project_id = entry.project_id
        self.revision = entry.revision
        self.n_readings = existing_readings(entry.project)
        self.fraction = 0.0
        self.stage = "preparing"  # preparing, conditioning, summarising, done, failed
        self.error: str | None = None
        self.input_error = False  # the failure is the revision's InputError (kept there)
        self._ended = threading.Event()
        self._stop = threading.Event()

    @property
    def finished(self) -> bool:
        return self._ended.is_set()

    @property
    def failed(self) -> bool:
        return self.stage == "failed"

    @property
    def phrase(self) -> str:
        if self.stage == "preparing":
            return f"Preparing the evaluation grid and {self.n_readings:,} existing readings"
        if self.stage == "conditioning":
            percent = round(100 * self.fraction)
            return f"Conditioning the grid on {self.n_readings:,} existing readings: {percent}%"
        if self.stage == "summarising":
            return "Summarising the evaluation grid"
        if self.stage == "done":
            return "Evaluation done"
        return f"Evaluation failed: {self.error}"

    def wait(self, timeout_s: float | None = None) -> bool:
        """Block until the job ends (tests, shutdown); True when it has."""
        return self._ended.wait(timeout_s)

    def stop(self) -> None:
        """Ask the job to end at its next progress report (a newer revision is current)."""
        self._stop.set()

    def report(self, fraction: float) -> None:
        if self._stop.is_set():
            raise EvaluationSuperseded
        self.fraction = min(max(float(fraction), 0.0), 1.0)
        self.stage = "summarising" if self.fraction >= 1.0 else "conditioning"

    def run(self, entry: ProjectResults) -> None:
        try:
            entry.compute_evaluator(on_progress=self.report)
            self.fraction, self.stage = 1.0, "done"
        except EvaluationSuperseded:  # nobody waits for it; asked again, it starts anew
            self.error, self.stage = SUPERSEDED, "failed"
        except InputError as exc:  # kept in the revision too: its page shows it
            self.error, self.input_error, self.stage = str(exc), True, "failed"
        except Exception:  # noqa: BLE001 - the job must end with a status whatever happened
            log.exception("evaluation of project %s failed", self.project_id)
            self.error, self.stage = UNEXPECTED, "failed"
        finally:
            self._ended.set()


def evaluation_job(entry: ProjectResults) -> EvaluationJob | None:
    """The revision's latest job in this process, if any."""
    with _jobs_lock:
        return _jobs.get(entry)


def start_evaluation(entry: ProjectResults, *, retry_failed: bool = True) -> EvaluationJob:
    """The revision's running or finished job; a new one when there is none (or, with
    ``retry_failed``, when the last one failed on something other than bad input)."""
    with _jobs_lock:
        job = _jobs.get(entry)
        stale = job is not None and job.failed and not job.input_error and retry_failed
        if job is not None and not stale:
            return job
        job = EvaluationJob(entry)
        # the project's older revisions are no longer shown: their jobs would only take the CPU
        for other, older in _jobs.items():
            same = other.project_id == entry.project_id
            if same and older.revision < entry.revision and not older.finished:
                older.stop()
        _jobs[entry] = job
    thread = threading.Thread(
        target=job.run,
        args=(entry,),
        name=f"evaluate-{entry.project_id}-r{entry.revision}",
        daemon=True,
    )
    thread.start()
    return job


@contextmanager
def deferring_slow_evaluations() -> Iterator[None]:
    """Within it, a slow evaluator not yet computed raises EvaluationPending (page loads)."""
    token = _deferring.set(True)
    try:
        yield
    finally:
        _deferring.reset(token)


def defer_if_slow(entry: ProjectResults) -> None:
    """Raise EvaluationPending when a page may not wait and the evaluation would be slow."""
    if not _deferring.get() or not evaluation_is_slow(entry.project):
        return
    job = start_evaluation(entry)
    if job.finished and entry.evaluator_done:
        return  # ended meanwhile: the caller takes the result (or the InputError)
    raise EvaluationPending(job)
