"""Per-hole instructions of the schedule: the target depth and why, what ends the hole, what
to do when the ground is not as predicted (docs/model.md "Programme": instructions).

"Unexpected" is a boundary met outside its current P5-P95 band at the hole (the existing
probes only): the driller or logger stops and calls the engineer, since the layout was
planned on that band. Sampling, in-situ testing and installations are what the method
delivers (``Method.delivers``, docs/model-file.md "What a method delivers"), in the units the
hole is expected to reach.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from probewise.app.probe_warnings import ends_at_max_depth
from probewise.core.analysis import ProjectAnalysis
from probewise.core.model import Project
from probewise.core.planning import ProbePlan


@dataclass(frozen=True)
class BoundaryBand:
    """Where the base of a unit is expected at the hole: P5 and P95 depth (m)."""

    boundary: str
    p05_m: float
    p95_m: float


@dataclass(frozen=True)
class HoleInstruction:
    """What the driller and logger are told for one hole."""

    id: str
    method: str
    depth_m: float
    why: str
    ends: str
    bands: tuple[BoundaryBand, ...]
    unexpected: str
    sampling: str | None = None  # what the method delivers in the units reached (None: nothing)


def _m(value: float) -> str:
    return f"{value:.1f} m"


def _how_many(delivery) -> str:
    if delivery.every_m is not None:
        return f"one every {delivery.every_m:g} m"
    if delivery.per_unit is not None:
        return f"{delivery.per_unit} in each unit"
    if delivery.per_probe is not None:
        return f"{delivery.per_probe} in the hole"
    return "a continuous profile"


def sampling_text(project: Project, plan: ProbePlan, p05_m: np.ndarray) -> str | None:
    """What the hole's method delivers in the units it is expected to reach, in words: each
    sample, in-situ test, installation or log with its interval, quality class and sampling
    category (EN 1997-2, EN ISO 22475-1) and its units; None when the method lists nothing."""
    method = project.methods[plan.probe.method]
    units = [u.name for u in project.ground.units]
    # a unit is reached when its top (the base of the unit above) is likely above the depth
    reached = [i for i in range(len(units)) if i == 0 or p05_m[i - 1] < plan.depth_m]
    parts = []
    for d in method.delivers:
        where = [units[i] for i in (d.units or reached) if i in reached]
        if not where:
            continue
        grade = []
        if d.quality_class is not None:
            grade.append(f"quality class {d.quality_class}")
        if d.category is not None:
            grade.append(f"category {d.category}")
        extra = f" ({', '.join(grade)})" if grade else ""
        parts.append(f"{d.name}{extra}: {_how_many(d)} in {', '.join(where)}")
    return "; ".join(parts) + "." if parts else None


def hole_instruction(
    project: Project, plan: ProbePlan, p05_m: np.ndarray, p95_m: np.ndarray
) -> HoleInstruction:
    """One hole's instruction from its plan and the current P5/P95 ``(B,)`` at the hole."""
    method = project.methods[plan.probe.method]
    names = project.ground.boundary_names
    units = [u.name for u in project.ground.units]
    if plan.probe.depth_m is not None:
        why = "Depth set by hand for this probe."
    elif plan.target is not None:
        why = f"To reach the base of {names[plan.target]} (P95 {_m(p95_m[plan.target])} here)"
        if plan.depth_m >= p95_m[plan.target] + method.embedment_m - 1e-9:
            why += f" and pass it by the method's embedment of {_m(method.embedment_m)}."
        elif plan.refuses and plan.refusal_unit is not None:
            why += f", where it is expected to stop on {units[plan.refusal_unit]}."
        else:
            why += f", capped at the method's maximum depth of {_m(method.max_depth_m)}."
    else:
        why = "No boundary it reads is within reach: to the method's maximum depth."
    if plan.refuses and plan.refusal_unit is not None:
        ends = f"Refusal on {units[plan.refusal_unit]} (expected); record the depth and the cause."
    elif ends_at_max_depth(project, plan, p95_m):
        ends = f"The method's maximum depth, {_m(method.max_depth_m)}."
    else:
        ends = (
            f"Target depth {_m(plan.depth_m)} reached; or refusal (record the depth and the"
            " cause); or the method's maximum depth"
            f" {_m(method.max_depth_m)}."
        )
    deepest = [k for k in range(len(names)) if p05_m[k] < plan.depth_m]
    bands = tuple(BoundaryBand(names[k], float(p05_m[k]), float(p95_m[k])) for k in deepest)
    unexpected = (
        "If a unit's base is met outside its band below, or a unit not in the model is met,"
        " stop and call the engineer before going on: the layout was planned on these bands."
    )
    return HoleInstruction(
        plan.probe.id,
        plan.probe.method,
        plan.depth_m,
        why,
        ends,
        bands,
        unexpected,
        sampling_text(project, plan, p05_m),
    )


def hole_instructions(
    project: Project, plans: Sequence[ProbePlan], analysis: ProjectAnalysis | None = None
) -> list[HoleInstruction]:
    """Instructions of every planned probe, in layout order."""
    if not plans:
        return []
    analysis = analysis if analysis is not None else ProjectAnalysis(project)
    at = analysis.at_points(np.array([(p.probe.x, p.probe.y) for p in plans]))
    return [
        hole_instruction(project, plan, at.p05_m[j], at.p95_m[j]) for j, plan in enumerate(plans)
    ]
