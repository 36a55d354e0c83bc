"""What the pages and the schedule show of the design elements for one option: per element the
cautious (design) level now and expected after, the costs, the saving and the chance of the
cheaper design; and the design depth of every cell an element covers, for its maps
(docs/model.md "The value of an investigation").

The numbers are those of ``probewise.core.value``; this module only gathers them per element,
so the Compare page, the schedule's table and its justification quote one source.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.special import ndtri

from probewise.core.element_average import condition_average
from probewise.core.evaluate import GridEvaluator, LayoutResult
from probewise.core.model import ChoiceConsequence, Project
from probewise.core.options import RankedOption
from probewise.core.value import (
    EmptyElementError,
    ValueEvaluator,
    ValueTotals,
    cheaper_allowed_now,
    design_depth_m,
    design_quantile,
    expected_design_depth_m,
)
from probewise.io.model_elements import no_cell_error


@dataclass(frozen=True)
class ElementFigures:
    """One element for one option. ``level_now_m``/``level_after_m``: the design level the cost
    follows (quantity: the mean over the element's cells of each cell's design depth; choice:
    the cautious level of the element's average depth, the basis of the decision), now and
    expected once the option's readings are in. ``width_now_m``: mean P5-P95 band over the
    element's cells now."""

    name: str
    kind: str  # "quantity" | "choice"
    boundary: str
    adverse: str
    fractile: float
    cells: int
    width_now_m: float
    level_now_m: float
    level_after_m: float
    cost_now: float
    cost_expected: float
    p_cheaper: float | None = None  # choice: chance the readings allow the cheaper design
    cheaper_now: bool | None = None  # choice: allowed on the existing information
    threshold_m: float | None = None
    cheaper_cost: float | None = None
    robust_cost: float | None = None

    @property
    def expected_saving(self) -> float:
        return self.cost_now - self.cost_expected


@dataclass(frozen=True)
class ValueFigures(ValueTotals):
    """An option's design elements, its investigation cost and what it is worth; ``best``:
    the option of highest net value among those compared, with that net value."""

    option: str
    currency: str
    gi_cost: float
    elements: tuple[ElementFigures, ...]
    best: tuple[str, float] | None = None
    n_options: int = 1


def value_evaluator(project: Project, evaluator: GridEvaluator) -> ValueEvaluator:
    """The design elements set up on the evaluation grid (InputError: an element holds no cell)."""
    try:
        return ValueEvaluator(
            project,
            evaluator.grid,
            evaluator.baseline.grid.mean_m,
            evaluator.baseline.grid.std_m,
            evaluator.analysis.baseline,
        )
    except EmptyElementError as exc:
        raise no_cell_error(exc.index, exc.name) from None


def best_option(ranking: Sequence[RankedOption]) -> tuple[str, float] | None:
    """The option of highest net value (the cheaper of equals), None without values."""
    valued = [o for o in ranking if o.net_value is not None]
    if not valued:
        return None
    top = min(valued, key=lambda o: (-o.net_value, o.cost, o.name))
    return top.name, float(top.net_value)


def cell_design_depths(
    values: ValueEvaluator, index: int, result: LayoutResult
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """An element's cells ``(c,)`` and each cell's design depth now and expected after the
    option ``(c,)`` (m), at the element's fractile on the cautious side."""
    setup = values.setups[index]
    e, k, cells = setup.element, setup.element.boundary, setup.cells
    mean0, var0 = values.mean0_m[cells, k], values.var0_m2[cells, k]
    var1 = np.minimum(np.asarray(result.grid.std_m, dtype=float)[cells, k] ** 2, var0)
    now = design_depth_m(mean0, var0, setup.lo_m, setup.hi_m, e.design_fractile, e.adverse)
    after = expected_design_depth_m(
        mean0, var0, var1, setup.lo_m, setup.hi_m, e.design_fractile, e.adverse
    )
    return cells, now, after


def value_figures(
    project: Project,
    evaluator: GridEvaluator,
    values: ValueEvaluator,
    result: LayoutResult,
    ranking: Sequence[RankedOption] = (),
) -> ValueFigures:
    """Every element of the project for one evaluated option (``result``)."""
    layout = next(lay for lay in project.layouts if lay.name == result.name)
    state = evaluator.analysis.layout_state(layout)[0] if values.needs_state else None
    worth = values.layout_value(result.name, result.cost, result.grid.std_m, state)
    names = project.ground.boundary_names
    width = evaluator.baseline.grid.width90_m
    out = []
    for i, (setup, element_value) in enumerate(zip(values.setups, worth.elements, strict=True)):
        e, k = setup.element, setup.element.boundary
        common = {
            "name": e.name,
            "kind": element_value.kind,
            "boundary": names[k],
            "adverse": e.adverse,
            "fractile": e.design_fractile,
            "cells": int(setup.cells.size),
            "width_now_m": float(np.mean(width[setup.cells, k])),
            "cost_now": element_value.cost_now,
            "cost_expected": element_value.cost_expected,
        }
        con = e.consequence
        if isinstance(con, ChoiceConsequence):
            z = float(ndtri(design_quantile(e.design_fractile, e.adverse)))
            _, var1 = condition_average(state, setup.average, setup.known_cov)
            var1 = min(var1, setup.var0_m2)
            out.append(
                ElementFigures(
                    **common,
                    level_now_m=setup.mean0_m + z * float(np.sqrt(setup.var0_m2)),
                    level_after_m=setup.mean0_m + z * float(np.sqrt(max(var1, 0.0))),
                    p_cheaper=element_value.p_cheaper_allowed,
                    cheaper_now=cheaper_allowed_now(
                        setup.mean0_m,
                        setup.var0_m2,
                        e.design_fractile,
                        e.adverse,
                        con.threshold_depth_m,
                    ),  # fmt: skip
                    threshold_m=con.threshold_depth_m,
                    cheaper_cost=con.cheaper_cost,
                    robust_cost=con.robust_cost,
                )
            )
            continue
        _, now, after = cell_design_depths(values, i, result)
        out.append(
            ElementFigures(
                **common, level_now_m=float(np.mean(now)), level_after_m=float(np.mean(after))
            )
        )
    return ValueFigures(
        option=result.name,
        currency=project.currency,
        gi_cost=float(result.cost),
        elements=tuple(out),
        best=best_option(ranking),
        n_options=max(len(ranking), 1),
    )


def choice_decisions_now(values: ValueEvaluator) -> dict[str, bool]:
    """Each choice element's decision on the existing information: True when the cheaper
    design is acceptable now."""
    out = {}
    for s in values.setups:
        con = s.element.consequence
        if isinstance(con, ChoiceConsequence):
            out[s.element.name] = cheaper_allowed_now(
                s.mean0_m, s.var0_m2, s.element.design_fractile, s.element.adverse,
                con.threshold_depth_m,
            )  # fmt: skip
    return out
