"""What the last stage of fieldwork found against its prediction, for the Schedule page
(``templates/_schedule_stage.html``; server/app/stage_review.py). The by-stage readings are
the ones the Readings page computes, shared through the revision's results."""

from __future__ import annotations

from typing import Any

from probewise.app.readings import project_readings
from probewise.app.results import ProjectResults
from probewise.app.stage_review import review_last_stage


def stage_context(entry: ProjectResults) -> dict[str, Any]:
    """``{"stage_review": StageReview or None}`` of the revision (None without stages)."""

    def review():
        report = entry.memo(
            ("readings", True), lambda: project_readings(entry.project, by_stage=True)
        )
        return review_last_stage(entry.project, report)

    return {"stage_review": entry.memo(("stage-review",), review)}
