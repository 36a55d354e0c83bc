"""Cost and programme of a layout: the one place either is computed (docs/model.md "Cost"
and "Programme").

Every figure here is linear in the probes except the calendar days, so the optimiser can
price a candidate exactly as evaluation and the schedule price a layout:

- rig-days of a probe = the method's move and set-up days + metres pushed / metres per day
  + metres pre-drilled / pre-drilling rate;
- cost of a probe = per location + service clearance + reinstatement + per metre x metres
  pushed + pre-drilling per metre x metres pre-drilled + (traffic management + supervision
  and logging) per day x its rig-days;
- fixed cost of a method used = its rigs x (mobilisation + standing time per day x standing
  days per rig);
- fixed cost of the project = reporting;
- total = (1 + contingency / 100) x (project + methods used + probes).

Programme: a method's rigs work side by side, each probe on one rig; probes go longest first
to the rig with the least work so far (the longest-processing-time rule, Graham, "Bounds on
multiprocessing timing anomalies", 1969), and the method's line lasts as long as its busiest
rig. Methods run side by side too, so the calendar days are those of the longest line.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from probewise.core.model import CostItems, Method
from probewise.core.planning import ProbePlan, refusal_outcomes

COST_ITEMS = (
    "mobilisation",
    "standing_time",
    "locations",
    "service_clearance",
    "reinstatement",
    "metres",
    "predrilling",
    "traffic_management",
    "supervision",
    "reporting",
    "contingency",
)


def contingency_factor(items: CostItems) -> float:
    """1 + contingency / 100."""
    return 1.0 + items.contingency_percent / 100.0


def predrill_rates(method: Method) -> tuple[float, float]:
    """(cost per metre, metres per day) of the method's pre-drilling; when several rules
    pre-drill, the dearest and slowest (one pre-drilling rig per method)."""
    rules = refusal_outcomes(method).predrill
    if not rules:
        return 0.0, np.inf
    return (
        max(r.predrill_per_metre or 0.0 for r in rules),
        min(r.predrill_metres_per_day for r in rules),
    )


def probe_rig_days(method: Method, depth_m: float, predrill_m: float) -> float:
    """Days one rig spends on a probe, moving and setting up included."""
    rate = predrill_rates(method)[1]
    pushed = max(depth_m - predrill_m, 0.0)
    return method.move_days + pushed / method.metres_per_day + predrill_m / rate


def probe_cost_items(
    method: Method, depth_m: float, predrill_m: float, items: CostItems
) -> dict[str, float]:
    """A probe's cost by item (before contingency; names of ``COST_ITEMS``)."""
    days = probe_rig_days(method, depth_m, predrill_m)
    return {
        "locations": method.per_location,
        "service_clearance": items.service_clearance_per_location,
        "reinstatement": items.reinstatement_per_location,
        "metres": method.per_metre * max(depth_m - predrill_m, 0.0),
        "predrilling": predrill_rates(method)[0] * predrill_m,
        "traffic_management": items.traffic_management_per_day * days,
        "supervision": items.supervision_per_day * days,
    }


def probe_cost(method: Method, depth_m: float, predrill_m: float, items: CostItems) -> float:
    """A probe's cost, contingency included (what the optimiser prices a candidate at)."""
    return contingency_factor(items) * sum(
        probe_cost_items(method, depth_m, predrill_m, items).values()
    )


def method_fixed_items(method: Method, items: CostItems) -> dict[str, float]:
    """What using a method costs whatever its probes: mobilisation and standing time per rig."""
    return {
        "mobilisation": method.rigs * method.mobilisation,
        "standing_time": method.rigs * items.standing_per_day * items.standing_days_per_rig,
    }


def method_fixed_cost(method: Method, items: CostItems) -> float:
    """``method_fixed_items`` summed, contingency included."""
    return contingency_factor(items) * sum(method_fixed_items(method, items).values())


def project_fixed_cost(items: CostItems) -> float:
    """Reporting, contingency included: paid by any layout with a probe."""
    return contingency_factor(items) * items.reporting


def rig_loads(durations_days: Sequence[float], rigs: int) -> np.ndarray:
    """Days of work of each rig when probes go longest first to the least loaded rig.

    Parameters
    ----------
    durations_days : sequence of float, length n
        Rig-days of each probe.
    rigs : int
        Rigs working side by side (>= 1).

    Returns
    -------
    (rigs,) float
        Work of each rig (days).
    """
    loads = np.zeros(max(int(rigs), 1))
    for d in sorted(durations_days, reverse=True):
        loads[int(np.argmin(loads))] += d
    return loads


@dataclass(frozen=True)
class MethodLine:
    """One method's part of the programme and cost (costs before contingency)."""

    method: str
    count: int
    metres: float
    predrill_m: float
    rigs: int
    rig_days: float
    line_days: float  # its busiest rig
    items: dict[str, float]

    @property
    def cost(self) -> float:
        return float(sum(self.items.values()))


@dataclass(frozen=True)
class Programme:
    """Cost and programme of planned probes.

    ``items`` are the totals by item (``COST_ITEMS``, contingency and reporting included);
    ``cost`` their sum; ``rig_days`` the sum over methods; ``calendar_days`` the longest
    method line (rigs and methods side by side).
    """

    lines: tuple[MethodLine, ...]
    items: dict[str, float]
    cost: float
    metres: float
    rig_days: float
    calendar_days: float


def layout_programme(
    plans: Sequence[ProbePlan], methods: dict[str, Method], items: CostItems
) -> Programme:
    """Cost by item and programme of a layout's planned probes (module docstring).

    A layout with no probe costs nothing (no reporting either).
    """
    lines = []
    for method_id in dict.fromkeys(p.probe.method for p in plans):
        m = methods[method_id]
        mine = [p for p in plans if p.probe.method == method_id]
        line_items = dict(method_fixed_items(m, items))
        days = []
        for p in mine:
            for key, value in probe_cost_items(m, p.depth_m, p.predrill_m, items).items():
                line_items[key] = line_items.get(key, 0.0) + value
            days.append(probe_rig_days(m, p.depth_m, p.predrill_m))
        lines.append(
            MethodLine(
                method=method_id,
                count=len(mine),
                metres=float(sum(p.depth_m for p in mine)),
                predrill_m=float(sum(p.predrill_m for p in mine)),
                rigs=m.rigs,
                rig_days=float(sum(days)),
                line_days=float(rig_loads(days, m.rigs).max()),
                items=line_items,
            )
        )
    totals = dict.fromkeys(COST_ITEMS, 0.0)
    for line in lines:
        for key, value in line.items.items():
            totals[key] += value
    if lines:
        totals["reporting"] = items.reporting
    totals["contingency"] = (contingency_factor(items) - 1.0) * sum(totals.values())
    return Programme(
        lines=tuple(lines),
        items=totals,
        cost=float(sum(totals.values())),
        metres=float(sum(line.metres for line in lines)),
        rig_days=float(sum(line.rig_days for line in lines)),
        calendar_days=float(max((line.line_days for line in lines), default=0.0)),
    )
