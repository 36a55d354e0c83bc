"""The scoping schedule of one layout, built from the numbers: shared by the web page and the CLI.

docs/model.md workflow step 7. From a core Project and its evaluation results: the probe list
(target depth, the boundaries each probe is expected to reveal, its cost), the cost and
duration by method, the totals, and the justification written from the numbers
(``probewise.app.justification``). Nothing here knows of a database, a request or a template:
``build_schedule`` takes the project and, optionally, results already computed (the web
passes its per-revision cache; the CLI lets it compute them).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from probewise.app.design_value import ValueFigures, value_evaluator, value_figures
from probewise.app.instructions import HoleInstruction, hole_instructions
from probewise.app.justification import MainBoundary, OptionFigures, justification, value_letter
from probewise.app.levels import history_paragraphs, probe_ground_levels
from probewise.app.probe_warnings import probe_warnings
from probewise.app.programme import ProgrammeView, programme_json, programme_view
from probewise.app.project import find_layout
from probewise.app.schedule_warnings import placement_warnings
from probewise.caution import CAUTION_LINE
from probewise.core.analysis import ProjectAnalysis
from probewise.core.evaluate import GridEvaluator, LayoutResult, with_pareto
from probewise.core.grid import EmptyGridError
from probewise.core.levels import level_of_depth
from probewise.core.model import Project
from probewise.core.options import RankedOption, rank_options
from probewise.core.planning import ProbePlan
from probewise.core.programme import probe_cost
from probewise.errors import InputError
from probewise.io.exports import schedule_rows


@dataclass(frozen=True)
class MethodRow:
    """One method's share of the layout: probes, metres, the cost split and the days."""

    id: str
    name: str
    kind: str
    count: int
    metres: float
    mobilisation: float
    locations_cost: float  # per location x probes
    metres_cost: float  # per metre x metres
    cost: float
    duration_days: float
    metres_per_day: float


@dataclass(frozen=True)
class Totals:
    """The layout as a whole; ``cost`` includes every method's mobilisation once."""

    probes: int
    metres: float
    cost: float
    duration_days: float
    mobilisation: float
    locations_cost: float
    metres_cost: float
    information_gain_bits: float
    gain_per_cost: float | None
    pareto: bool


@dataclass(frozen=True)
class Schedule:
    """The scoping schedule of one layout.

    ``probes`` are the rows ``probewise.io.exports`` writes (``schedule_rows``: id, method,
    method_name, kind, x, y, depth_m, target ("" when none), observes, cost without
    mobilisation); ``refusals`` the ids of probes expected to stop on a unit they cannot
    penetrate; ``main_boundary`` the boundary of interest the justification speaks of.
    """

    project_name: str
    currency: str
    crs: str | None
    layout_name: str
    probes: tuple[dict[str, Any], ...]
    refusals: frozenset[str]
    methods: tuple[MethodRow, ...]
    totals: Totals
    main_boundary: str | None
    justification: tuple[str, ...]
    caution: str = CAUTION_LINE
    value: ValueFigures | None = None  # with design elements: what the option is worth
    programme: ProgrammeView | None = None  # cost by item and the rigs' programme
    instructions: tuple[HoleInstruction, ...] = ()  # per hole, in layout order


# ---------------------------------------------------------------- parts


def main_boundary_index(project: Project) -> int | None:
    """The boundary of interest with the greatest weight (the first such, top down)."""
    boi = project.ground.boundaries_of_interest
    if not boi:
        return None
    return max(boi, key=lambda b: (b.weight, -b.boundary)).boundary


def probe_dicts(project: Project, plans: Sequence[ProbePlan]) -> list[dict[str, Any]]:
    """Planned probes as ``evaluate --json`` prints them, with their target."""
    names = project.ground.boundary_names
    return [
        {
            "id": plan.probe.id,
            "method": plan.probe.method,
            "x": plan.probe.x,
            "y": plan.probe.y,
            "depth_m": plan.depth_m,
            "observes": [names[k] for k in plan.observes],
            "target": names[plan.target] if plan.target is not None else None,
        }
        for plan in plans
    ]


def methods_document(project: Project) -> dict[str, Any]:
    """The project's methods in the model file's shape, as ``schedule_rows`` reads them."""
    return {
        "methods": [
            {
                "id": m.id,
                "name": m.name,
                "kind": m.kind,
                "cost": {"per_location": m.per_location, "per_metre": m.per_metre},
            }
            for m in project.methods.values()
        ]
    }


def probe_rows(
    project: Project, plans: Sequence[ProbePlan], analysis: ProjectAnalysis | None = None
) -> list[dict[str, Any]]:
    """The schedule rows of planned probes (what the CSV, GeoJSON and GeoPackage exports hold).

    ``cost`` is the probe's own cost as the layout is priced (``probewise.core.programme``);
    ``warnings`` what the probe may meet in the field (``probewise.app.probe_warnings``) then
    where it stands (``probewise.app.schedule_warnings``). With a ground level, each row also
    holds the ground level at the probe and the level of its target depth (ground level minus
    depth), project datum (docs/model.md "Levels and site history")."""
    rows = schedule_rows(probe_dicts(project, plans), methods_document(project))
    for row, plan in zip(rows, plans, strict=True):
        method = project.methods[plan.probe.method]
        row["cost"] = probe_cost(method, plan.depth_m, plan.predrill_m, project.costs)
    xy = np.array([(r["x"], r["y"]) for r in rows], dtype=float).reshape(-1, 2)
    gl = probe_ground_levels(project, xy) if rows else None
    if gl is not None:
        depth = np.array([r["depth_m"] for r in rows], dtype=float)
        for row, ground, target in zip(rows, gl, level_of_depth(gl, depth), strict=True):
            row["ground_level_m"] = float(ground)
            row["target_level_m"] = float(target)
    in_field = probe_warnings(project, plans, analysis)
    for row in rows:
        row["warnings"] = in_field.get(row["id"], [])
    placed = placement_warnings(project, rows)
    return [{**row, "warnings": w} for row, w in zip(rows, placed, strict=True)]


def method_rows(project: Project, result: LayoutResult) -> list[MethodRow]:
    """Cost and duration by method, in the order the methods first appear in the layout."""
    rows = []
    lines = {line.method: line for line in result.programme.lines} if result.programme else {}
    for method_id, totals in result.by_method.items():
        m = project.methods[method_id]
        items = lines[method_id].items if method_id in lines else {}
        rows.append(
            MethodRow(
                id=method_id,
                name=m.name,
                kind=m.kind,
                count=totals.count,
                metres=totals.metres,
                mobilisation=items.get("mobilisation", m.mobilisation),
                locations_cost=items.get("locations", m.per_location * totals.count),
                metres_cost=items.get("metres", m.per_metre * totals.metres),
                cost=totals.cost,
                duration_days=totals.duration_days,
                metres_per_day=m.metres_per_day,
            )
        )
    return rows


def totals_of(result: LayoutResult, methods: Sequence[MethodRow]) -> Totals:
    return Totals(
        probes=len(result.plans),
        metres=result.metres,
        cost=result.cost,
        duration_days=result.duration_days,
        mobilisation=sum(m.mobilisation for m in methods),
        locations_cost=sum(m.locations_cost for m in methods),
        metres_cost=sum(m.metres_cost for m in methods),
        information_gain_bits=result.information_gain_bits,
        gain_per_cost=result.gain_per_cost,
        pareto=result.pareto,
    )


def figures_of(project: Project, result: LayoutResult, main: int | None) -> OptionFigures:
    """What the justification needs of one option."""
    metrics = None
    if main is not None:
        metrics = result.boundaries[project.ground.boundary_names[main]]
    return OptionFigures(
        name=result.name,
        cost=result.cost,
        duration_days=result.duration_days,
        n_probes=len(result.plans),
        metres=result.metres,
        gain_bits=result.information_gain_bits,
        width_m=metrics.width90_mean_m if metrics else None,
        confident=metrics.confident_fraction if metrics else None,
    )


def justification_of(
    project: Project,
    evaluator: GridEvaluator,
    results: Sequence[LayoutResult],
    chosen: str,
) -> list[str]:
    """The justification of ``chosen`` against the existing probes and the other layouts."""
    main = main_boundary_index(project)
    main_info = None
    if main is not None:
        name = project.ground.boundary_names[main]
        base = evaluator.baseline.boundaries[name]
        tolerance = next(
            b.tolerance_m for b in project.ground.boundaries_of_interest if b.boundary == main
        )
        main_info = MainBoundary(name, tolerance, base.width90_mean_m, base.confident_fraction)
    by_name = {r.name: r for r in results}
    others = [figures_of(project, r, main) for r in results if r.name != chosen]
    return justification(
        figures_of(project, by_name[chosen], main), main_info, others, project.currency
    )


def default_layout_name(project: Project, ranking: Sequence[RankedOption]) -> str | None:
    """The option shown first: with design elements, the one of highest net value (money leads);
    else the Pareto-efficient one that buys the most information per unit cost (the cheapest of
    equals); else the first layout; None without layouts."""
    if not project.layouts:
        return None
    valued = [o for o in ranking if o.net_value is not None]
    if valued:
        return max(valued, key=lambda o: o.net_value).name
    efficient = [o for o in ranking if o.pareto and o.gain_per_cost is not None]
    if efficient:
        return max(efficient, key=lambda o: o.gain_per_cost).name
    return project.layouts[0].name


def evaluator_of(project: Project) -> GridEvaluator:
    """The baseline on the evaluation grid; an empty grid is bad input (InputError)."""
    try:
        return GridEvaluator(project)
    except EmptyGridError as exc:
        raise InputError("grid_spacing_m", str(exc)) from None


# ---------------------------------------------------------------- the schedule


def build_schedule(
    project: Project,
    layout_name: str | None = None,
    evaluator: GridEvaluator | None = None,
    ranking: Sequence[RankedOption] | None = None,
    results: Sequence[LayoutResult] | None = None,
) -> Schedule:
    """The scoping schedule of one of the project's layouts.

    Parameters
    ----------
    project : Project
    layout_name : str, optional
        The layout to schedule; default ``default_layout_name`` (the best value).
    evaluator : GridEvaluator, optional
        The project's baseline on its grid, reused when given.
    ranking : sequence of RankedOption, optional
        The project's layouts ranked (``rank_options``), reused when given; only needed to
        choose the default layout.
    results : sequence of LayoutResult, optional
        Every layout's results with Pareto flags set among them (``with_pareto``), reused
        when given; the justification compares the layout with all the others.

    Raises
    ------
    InputError
        No layout, no layout of that name, or an empty evaluation grid.
    """
    if not project.layouts:
        raise InputError("layout", "the project has no layout to schedule")
    names = [layout.name for layout in project.layouts]
    if layout_name is not None:
        find_layout(project, layout_name, "layout")  # InputError naming the known layouts
    if evaluator is None:
        evaluator = evaluator_of(project)
    if results is None:
        results = with_pareto([evaluator.evaluate_layout(lay) for lay in project.layouts])
    if ranking is None and (layout_name is None or project.elements):
        ranking = rank_options(
            project,
            project.layouts,
            dict.fromkeys(names, "hand"),  # kinds do not enter the choice
            evaluator=evaluator,
            known={r.name: r for r in results},
        )
    if layout_name is None:
        layout_name = default_layout_name(project, ranking)
    result = next(r for r in results if r.name == layout_name)
    methods = method_rows(project, result)
    main = main_boundary_index(project)
    value = None
    if project.elements:  # money leads (docs/model.md "The value of an investigation")
        values = value_evaluator(project, evaluator)
        value = value_figures(project, evaluator, values, result, ranking or ())
    rows = probe_rows(project, result.plans, evaluator.analysis)
    return Schedule(
        project_name=project.name,
        currency=project.currency,
        crs=project.crs,
        layout_name=result.name,
        probes=tuple(rows),
        refusals=frozenset(plan.probe.id for plan in result.plans if plan.refuses),
        methods=tuple(methods),
        totals=totals_of(result, methods),
        main_boundary=project.ground.boundary_names[main] if main is not None else None,
        justification=(tuple(value_letter(value)) if value else ())
        + tuple(justification_of(project, evaluator, results, result.name))
        + tuple(history_paragraphs(project, result.plans)),  # levels and site history
        value=value,
        programme=programme_view(project, result),
        instructions=tuple(hole_instructions(project, result.plans, evaluator.analysis)),
    )


def schedule_json(schedule: Schedule) -> dict[str, Any]:
    """The schedule as a JSON document (``probewise schedule --format json``).

    ``probes`` carry evaluate's fields (id, method, x, y, depth_m, observes) plus target
    (None when none), method_name, kind, cost (mobilisation excluded) and refuses.
    """
    probes = []
    for row in schedule.probes:
        probe = dict(row, target=row.get("target") or None)
        probe["observes"] = list(row["observes"])
        probe["refuses"] = row["id"] in schedule.refusals
        probes.append(probe)
    t = schedule.totals
    return {
        "project": schedule.project_name,
        "layout": schedule.layout_name,
        "currency": schedule.currency,
        "crs": schedule.crs,
        "probes": probes,
        "by_method": [
            {
                "id": m.id,
                "name": m.name,
                "kind": m.kind,
                "probes": m.count,
                "metres": m.metres,
                "mobilisation": m.mobilisation,
                "locations_cost": m.locations_cost,
                "metres_cost": m.metres_cost,
                "cost": m.cost,
                "duration_days": m.duration_days,
                "metres_per_day": m.metres_per_day,
            }
            for m in schedule.methods
        ],
        "totals": {
            "probes": t.probes,
            "metres": t.metres,
            "cost": t.cost,
            "duration_days": t.duration_days,
            "mobilisation": t.mobilisation,
            "locations_cost": t.locations_cost,
            "metres_cost": t.metres_cost,
            "information_gain_bits": t.information_gain_bits,
            "gain_per_cost": t.gain_per_cost,
            "pareto": t.pareto,
        },
        "main_boundary": schedule.main_boundary,
        "programme": programme_json(schedule.programme) if schedule.programme else None,
        "instructions": [dataclasses.asdict(i) for i in schedule.instructions],
        "justification": list(schedule.justification),
        "caution": schedule.caution,
    }
