"""What each planned probe may meet in the field: refusal, pre-drilling, its depth limit and,
for trial pits, entry, stability and groundwater (docs/model.md "Refusal and pre-drilling").

``probe_warnings`` gives, per probe id, the warnings in words; the schedule shows them with
each probe (``warnings`` of a schedule row).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from probewise.core.analysis import ProjectAnalysis
from probewise.core.model import Project
from probewise.core.planning import ProbePlan, refusal_outcomes

# A standard wheeled or tracked excavator digs to about 4.5 m (common practice, no source).
TRIAL_PIT_REACH_M = 4.5
# Nobody enters an unsupported pit deeper than 1.2 m (common practice in the UK; BS 5930:2015
# advises against entry into unsupported excavations, from memory).
PERSON_ENTRY_M = 1.2


def _m(value: float) -> str:
    return f"{value:.1f} m"


def plan_warnings(
    project: Project, plan: ProbePlan, p05_m: np.ndarray, p95_m: np.ndarray
) -> list[str]:
    """Warnings of one planned probe; ``p05_m``, ``p95_m`` ``(B,)``: the current P5 and P95
    depth of every boundary at the probe."""
    method = project.methods[plan.probe.method]
    units = [u.name for u in project.ground.units]
    out = []

    def top(unit: int) -> str:
        if unit == 0:
            return "at ground level"
        return f"at {_m(p05_m[unit - 1])} to {_m(p95_m[unit - 1])} (P5-P95)"

    if plan.refuses and plan.refusal_unit is not None:
        u = plan.refusal_unit
        outcome = refusal_outcomes(method)
        proven = u == 0 or u != outcome.stop_unit or outcome.stop_reads_top
        text = f"Expected to stop on {units[u]}, whose top is {top(u)}."
        if not proven:
            text += (
                f" A stop there does not prove the top of {units[u]} (an obstruction such as"
                " a boulder stops it too): it is not counted as a reading; prove it with a"
                " cored hole nearby."
            )
        out.append(text)
    for u in plan.predrilled:
        out.append(
            f"Pre-drilled through {units[u]} (top {top(u)}): about {_m(plan.predrill_m)} of"
            f" pre-drilling priced; the {method.kind.upper().replace('_', ' ')} does not read"
            f" the base of {units[u]}."
        )
    for u, chance in plan.risks:
        rule = next(r for r in method.refusals if r.unit == u)
        then = (
            "pre-drill through it and resume"
            if rule.predrills
            else "record the depth, move 1-2 m and try again once, then call the engineer"
        )
        out.append(
            f"About {100 * chance:.0f}% chance of refusal in {units[u]} (top {top(u)}): if"
            f" it refuses, {then}; that cost is not in the estimate (contingency)."
        )
    if ends_at_max_depth(project, plan, p95_m):
        out.append(
            f"Ends at the method's maximum depth ({_m(method.max_depth_m)}) before the depth"
            " its target asks for."
        )
    if method.kind == "trial_pit":
        out.extend(trial_pit_warnings(plan.depth_m))
    return out


def ends_at_max_depth(project: Project, plan: ProbePlan, p95_m: np.ndarray) -> bool:
    """True when the method's maximum depth, not its target or a refusal, ends the probe."""
    method = project.methods[plan.probe.method]
    if plan.refuses or plan.probe.depth_m is not None:
        return False
    if plan.depth_m < method.max_depth_m - 1e-9:
        return False
    return plan.target is None or p95_m[plan.target] + method.embedment_m > method.max_depth_m


def trial_pit_warnings(depth_m: float) -> list[str]:
    """Entry, reach, stability and groundwater of a trial pit of a planned depth (m)."""
    out = []
    if depth_m > TRIAL_PIT_REACH_M:
        out.append(
            f"Deeper than a standard excavator reaches (about {_m(TRIAL_PIT_REACH_M)}): needs a"
            " long-reach machine and a stepped or battered pit, or a borehole instead."
        )
    if depth_m > PERSON_ENTRY_M:
        out.append(
            f"No person entry below {_m(PERSON_ENTRY_M)}: log and sample from the surface or"
            " the bucket."
        )
    out.append(
        "Sides may collapse in soft or granular soil and below groundwater: keep people and"
        " plant back from the edge; record any groundwater inflow (depth, rate, level after"
        " 20 minutes) and stop if the sides run."
    )
    return out


def probe_warnings(
    project: Project, plans: Sequence[ProbePlan], analysis: ProjectAnalysis | None = None
) -> dict[str, list[str]]:
    """Warnings of every planned probe, by probe id (empty lists where none)."""
    if not plans:
        return {}
    analysis = analysis if analysis is not None else ProjectAnalysis(project)
    at = analysis.at_points(np.array([(p.probe.x, p.probe.y) for p in plans]))
    return {
        plan.probe.id: plan_warnings(project, plan, at.p05_m[j], at.p95_m[j])
        for j, plan in enumerate(plans)
    }
