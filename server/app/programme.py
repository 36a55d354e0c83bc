"""The schedule's cost breakdown and programme of a layout, in words, from the one pricing
(``probewise.core.programme``; docs/model.md "Cost" and "Programme")."""

from __future__ import annotations

from dataclasses import dataclass

from probewise.core.evaluate import LayoutResult
from probewise.core.model import Project
from probewise.core.programme import layout_programme

ITEM_LABELS = {
    "mobilisation": "Mobilisation (per rig)",
    "standing_time": "Standing time allowance (per rig)",
    "locations": "Set-up per location",
    "service_clearance": "Service clearance (scan and inspection pit)",
    "reinstatement": "Reinstatement",
    "metres": "Probing per metre",
    "predrilling": "Pre-drilling",
    "traffic_management": "Traffic management (per rig-day)",
    "supervision": "Supervision and logging (per rig-day)",
    "reporting": "Reporting",
    "contingency": "Contingency",
}


@dataclass(frozen=True)
class CostRow:
    key: str
    label: str
    amount: float


@dataclass(frozen=True)
class LineRow:
    """One method's line of the programme."""

    method: str
    name: str
    probes: int
    rigs: int
    move_days: float
    predrill_m: float
    rig_days: float
    line_days: float


@dataclass(frozen=True)
class ProgrammeView:
    """What the schedule shows of the cost and the programme; ``cost`` equals the layout's."""

    costs: tuple[CostRow, ...]
    cost: float
    contingency_percent: float
    lines: tuple[LineRow, ...]
    rig_days: float
    calendar_days: float


def programme_view(project: Project, result: LayoutResult) -> ProgrammeView:
    """Cost by item (items of zero left out) and the method lines of a layout's result."""
    prog = result.programme or layout_programme(result.plans, project.methods, project.costs)
    costs = tuple(
        CostRow(key, ITEM_LABELS[key], amount) for key, amount in prog.items.items() if amount
    )
    lines = tuple(
        LineRow(
            line.method,
            project.methods[line.method].name,
            line.count,
            line.rigs,
            project.methods[line.method].move_days,
            line.predrill_m,
            line.rig_days,
            line.line_days,
        )
        for line in prog.lines
    )
    return ProgrammeView(
        costs,
        prog.cost,
        project.costs.contingency_percent,
        lines,
        prog.rig_days,
        prog.calendar_days,
    )


def programme_json(view: ProgrammeView) -> dict:
    """The programme as the schedule's JSON carries it."""
    return {
        "cost_items": {row.key: row.amount for row in view.costs},
        "cost": view.cost,
        "rig_days": view.rig_days,
        "calendar_days": view.calendar_days,
        "lines": [
            {
                "method": line.method,
                "probes": line.probes,
                "rigs": line.rigs,
                "move_days": line.move_days,
                "predrill_m": line.predrill_m,
                "rig_days": line.rig_days,
                "line_days": line.line_days,
            }
            for line in view.lines
        ],
    }
