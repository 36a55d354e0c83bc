"""The value of a project's layouts in money, shared by the command line and the web
(docs/model.md "The value of an investigation")."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from probewise.core.analysis import ProjectAnalysis
from probewise.core.evaluate import Evaluation, evaluate_project
from probewise.core.grid import EmptyGridError
from probewise.core.model import Layout, Project
from probewise.core.value import EmptyElementError, LayoutValue, ValueEvaluator, layout_values
from probewise.errors import InputError
from probewise.io.model_elements import no_cell_error


@dataclass(frozen=True)
class ValueReport:
    """Every element's cost now and each layout's value."""

    currency: str
    elements: tuple[tuple[str, int, float], ...]  # (name, cells, cost now)
    layouts: tuple[LayoutValue, ...]
    grid_notice: str | None = None


def values_of_evaluation(
    project: Project, evaluation: Evaluation, layouts: Sequence[Layout] | None = None
) -> ValueReport:
    """The value of the evaluated layouts (``layouts``: those evaluated, in order; default
    the project's). InputError when an element holds no evaluation cell."""
    chosen = project.layouts if layouts is None else tuple(layouts)
    analysis = ProjectAnalysis(project)
    try:
        values = ValueEvaluator(
            project,
            evaluation.grid,
            evaluation.baseline.grid.mean_m,
            evaluation.baseline.grid.std_m,
            analysis.baseline,
        )
        by_layout = layout_values(values, analysis, chosen, evaluation.layouts)
    except EmptyElementError as exc:
        raise no_cell_error(exc.index, exc.name) from None
    return ValueReport(
        project.currency,
        tuple(values.element_costs_now()),
        by_layout,
        evaluation.grid_notice,
    )


def project_values(project: Project, layouts: Sequence[Layout] | None = None) -> ValueReport:
    """Evaluate the layouts (default: every layout of the project) and value them."""
    if not project.elements:
        raise InputError("elements", "the model has no design elements to value")
    chosen = project.layouts if layouts is None else tuple(layouts)
    try:
        evaluation = evaluate_project(project, chosen)
    except EmptyGridError as exc:
        raise InputError("grid_spacing_m", str(exc)) from None
    return values_of_evaluation(project, evaluation, chosen)
