"""Per-hole instructions of the schedule: the target depth and why, what ends the hole, what
to do when the ground is not as predicted (docs/model.md "Programme": instructions).

"Unexpected" is a boundary met outside its current P5-P95 band at the hole (the existing
probes only): the driller or logger stops and calls the engineer, since the layout was
planned on that band. Sampling and in-situ testing intervals belong to the testing
requirements; ``HoleInstruction.sampling`` is where they go (None: not set here).
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
    sampling: str | None = None  # testing requirements, when a module provides them


def _m(value: float) -> str:
    return f"{value:.1f} m"


def hole_instruction(
    project: Project, plan: ProbePlan, p05_m: np.ndarray, p95_m: np.ndarray
) -> HoleInstruction:
    """One hole's instruction from its plan and the current P5/P95 ``(B,)`` at the hole."""
    method = project.methods[plan.probe.method]
    names = project.ground.boundary_names
    units = [u.name for u in project.ground.units]
    if plan.probe.depth_m is not None:
        why = "Depth set by hand on the Options page."
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
        plan.probe.id, plan.probe.method, plan.depth_m, why, ends, bands, unexpected
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
