"""What the Behaviour check page and the schedule's appendix share: the check of the current
revision (cached with its other results) and the context its templates read."""

from __future__ import annotations

from typing import Any
from urllib.parse import urlencode

from probewise.app.behaviour import (
    BehaviourReport,
    behaviour_json,
    behaviour_report,
    more_tests_where,
)
from probewise.app.results import ProjectResults
from probewise.core import behaviour as core


def history_boundaries(model: dict) -> list[str]:
    """Boundaries a history rule bounds, in rule order, each once."""
    return list(dict.fromkeys(r["base_of"] for r in model.get("history") or []))


def behaviour_of(entry: ProjectResults, base_of: str | None) -> BehaviourReport:
    """The check of the current revision, cached with its other results."""
    return entry.memo(
        ("behaviour", base_of),
        lambda: behaviour_report(entry.model, entry.project, base_of, field="base_of"),
    )


def behaviour_view(entry: ProjectResults, base_of: str | None = None) -> dict[str, Any] | None:
    """What the page and the schedule's appendix show; None without a history rule."""
    if not history_boundaries(entry.model):
        return None
    report = behaviour_of(entry, base_of)
    query = {"base_of": report.boundary, "rev": str(entry.revision)}
    return {
        "report": report,
        "doc": behaviour_json(report),
        "more": more_tests_where(report),
        "strips_src": f"/projects/{entry.project_id}/behaviour/strips.svg?{urlencode(query)}",
        "domains": core.DOMAINS,
    }


def schedule_behaviour(entry: ProjectResults) -> dict[str, Any] | None:
    """The schedule's appendix: the check of the first history rule's boundary, when the
    project has test results (None otherwise, and the appendix is left out)."""
    if not any(p.get("tests") for p in entry.model.get("existing") or []):
        return None
    return behaviour_view(entry)
