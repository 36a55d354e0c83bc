"""The laboratory testing schedule of the Schedule page (``templates/_schedule_lab.html``)
and its CSV (``routes_schedule_lab.py``), from the revision's cached results."""

from __future__ import annotations

from typing import Any
from urllib.parse import urlencode

from probewise.app.lab_schedule import lab_needs
from probewise.app.results import ProjectResults


def lab_of(entry: ProjectResults, chosen: str):
    """The lab schedule of one layout (built once per layout and revision)."""
    return entry.memo(
        ("lab", chosen),
        lambda: lab_needs(entry.evaluator.analysis, entry.result_named(chosen).plans),
    )


def lab_context(entry: ProjectResults, chosen: str, project_id: int) -> dict[str, Any]:
    """Template context of the lab fragment: ``lab`` (empty without test requirements) and
    the CSV link."""
    needs = lab_of(entry, chosen)
    query = urlencode({"layout": chosen})
    return {"lab": needs, "lab_csv": f"/projects/{project_id}/schedule-lab.csv?{query}"}
