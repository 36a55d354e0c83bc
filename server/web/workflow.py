"""The project's workflow steps, in order: the one list the navigation bar is drawn from.

To add a page, give its step a ``path`` (a URL template with ``{project_id}``) once the route
exists. A step without a path shows in the bar as plain text, never as a link that could fail.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class WorkflowStep:
    key: str
    label: str
    path: str | None = None  # "/projects/{project_id}/..." once the page is built
    hint: str = ""


@dataclass(frozen=True)
class NavItem:
    key: str
    label: str
    href: str | None
    current: bool
    hint: str


WORKFLOW_STEPS: tuple[WorkflowStep, ...] = (
    WorkflowStep("overview", "Overview", "/projects/{project_id}", "Summary and revision trail"),
    WorkflowStep(
        "site",
        "Site",
        "/projects/{project_id}/site",
        "Outline, zones, areas of interest, exclusions",
    ),
    WorkflowStep(
        "ground",
        "Ground model",
        "/projects/{project_id}/ground",
        "Units, thickness ranges, correlation",
    ),
    WorkflowStep(
        "existing",
        "Existing",
        "/projects/{project_id}/existing",
        "Earlier probes and what they found",
    ),
    WorkflowStep(
        "readings",
        "Readings",
        "/projects/{project_id}/readings",
        "Each reading against what the other probes predicted",
    ),
    WorkflowStep(
        "behaviour",
        "Behaviour check",
        "/projects/{project_id}/behaviour",
        "Does the potential band behave like the fill or the natural ground?",
    ),
    WorkflowStep(
        "methods",
        "Methods",
        "/projects/{project_id}/methods",
        "Investigation methods, rates and precision",
    ),
    WorkflowStep(
        "elements",
        "Design elements",
        "/projects/{project_id}/elements",
        "Parts of the works whose cost follows a boundary",
    ),
    WorkflowStep(
        "options",
        "Options",
        "/projects/{project_id}/options",
        "Layouts by hand, by grid and by the optimiser",
    ),
    WorkflowStep(
        "compare", "Compare", "/projects/{project_id}/compare", "Cost against information gained"
    ),
    WorkflowStep(
        "schedule", "Schedule", "/projects/{project_id}/schedule", "The printable scoping schedule"
    ),
)


def nav_items(project_id: int, current_key: str) -> list[NavItem]:
    """The navigation bar of one project, with the current step marked."""
    return [
        NavItem(
            key=step.key,
            label=step.label,
            href=step.path.format(project_id=project_id) if step.path else None,
            current=step.key == current_key,
            hint=step.hint if step.path else f"{step.hint} (not available yet)",
        )
        for step in WORKFLOW_STEPS
    ]


def project_context(project: Any, step_key: str) -> dict[str, Any]:
    """What every project page's template needs: the project, its model and the nav bar.

    ``project`` is a probewise.store.StoredProject. ``deleted`` projects are read-only: pages
    should hide their edit controls (the store refuses changes anyway). ``can_undo`` is False
    when undo has nothing to take back: the undo buttons are then disabled.
    """
    model = project.model
    return {
        "project": project,
        "model": model,
        "deleted": project.deleted,
        "can_undo": project.can_undo,
        "currency": model.get("currency") or "",
        "nav": nav_items(project.id, step_key),
    }
