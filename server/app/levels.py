"""Levels and hard bounds at points for both doors (docs/model-file.md "CLI output
contract": ``probewise bounds`` and the level fields of ``probewise posterior``)."""

from __future__ import annotations

import numpy as np

from probewise.core.bounds import BoundsConflictError, BoundsReport, bounds_report
from probewise.core.history import NO_BOUND, OUTSIDE
from probewise.core.levels import ground_level_at
from probewise.core.model import Project
from probewise.errors import InputError


def ground_levels(project: Project, xy: np.ndarray) -> np.ndarray | None:
    """Ground level (m, project datum) at points in project coordinates, or None when the
    model has no ground level: ``(n, 2) -> (n,)``."""
    if project.ground.ground_level is None:
        return None
    return ground_level_at(project.ground.ground_level, np.asarray(xy, float).reshape(-1, 2))


def probe_ground_levels(project: Project, xy: np.ndarray) -> np.ndarray | None:
    """Ground level (m, project datum) at planned probes (project coordinates), or None when
    the model has no ground level: the surface's level, except where an existing probe that
    carries its own surveyed level stands on the same spot (to the centimetre), whose level is
    taken instead: ``(n, 2) -> (n,)``."""
    xy = np.asarray(xy, float).reshape(-1, 2)
    gl = ground_levels(project, xy)
    if gl is None:
        return None
    own = {
        (round(p.x, 2), round(p.y, 2)): p.ground_level_m
        for p in project.existing
        if p.ground_level_m is not None
    }
    for i, (x, y) in enumerate(xy):
        level = own.get((round(float(x), 2), round(float(y), 2)))
        if level is not None:
            gl[i] = level
    return gl


def report_at(project: Project, xy: np.ndarray) -> BoundsReport:
    """The bounds and their sources at points in project coordinates; a history conflict
    there is an InputError naming the rule."""
    origin = np.asarray(project.origin)
    try:
        return bounds_report(project.ground, np.asarray(xy, float) - origin, project.origin)
    except BoundsConflictError as exc:
        raise InputError(exc.field, exc.problem) from None


def _sources(project: Project, report: BoundsReport, i: int, k: int) -> list[str]:
    ground = project.ground
    out = ["unit thickness ranges"]
    for b, bound in enumerate(ground.bounds):
        if bound.boundary == k and report.user_applies[b][i]:
            where = "inside its polygon" if bound.polygon is not None else "everywhere"
            out.append(f"bounds[{b}] ({where})")
    for r, rule in enumerate(ground.history):
        env = int(report.bands[r].environment[i]) if rule.boundary == k else NO_BOUND
        if env == NO_BOUND:
            continue
        what = (
            "outside the mapped environments"
            if env == OUTSIDE
            else f"environment {rule.environments[env].name!r}"
        )
        out.append(f"history[{r}] {rule.name!r}: {what}")
    return out


def _num(value: float) -> float | None:
    return float(value) if np.isfinite(value) else None


def bounds_json(project: Project, xy: np.ndarray) -> dict:
    """The ``probewise bounds --json`` document at points (project coordinates)."""
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    report = report_at(project, xy)
    gl = ground_levels(project, xy)
    ground = project.ground
    points = []
    for i, (x, y) in enumerate(xy):
        boundaries = {}
        for k, name in enumerate(ground.boundary_names):
            entry = {
                "min_depth_m": float(report.lo[i, k]),
                "max_depth_m": float(report.hi[i, k]),
                "sources": _sources(project, report, i, k),
            }
            if gl is not None:
                entry["max_level_m"] = float(gl[i] - report.lo[i, k])
                entry["min_level_m"] = float(gl[i] - report.hi[i, k])
            rules = [r for r, rule in enumerate(ground.history) if rule.boundary == k]
            if rules:
                # the first rule that bounds this point; nulls where none does
                hit = [r for r in rules if report.bands[r].bounded[i]]
                band = report.bands[hit[0] if hit else rules[0]]
                entry.update(
                    former_level_min_m=_num(band.former_min_m[i]),
                    former_level_max_m=_num(band.former_max_m[i]),
                    settlement_min_m=_num(band.settlement_min_m[i]),
                    settlement_max_m=_num(band.settlement_max_m[i]),
                )
            boundaries[name] = entry
        point = {"x": float(x), "y": float(y), "boundaries": boundaries}
        if gl is not None:
            point["ground_level_m"] = float(gl[i])
        points.append(point)
    return {"points": points}


def history_limits(project: Project, xy: np.ndarray) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    """Depth bounds (m) that history rules put on their boundaries at points (project
    coordinates): boundary index -> (min depth, max depth), each ``(n,)`` with ``nan`` where no
    rule bounds that point. These are the maximum and minimum potential levels as depths, after
    every other bound (docs/model.md "Levels and site history")."""
    ground = project.ground
    if not ground.history:
        return {}
    report = report_at(project, xy)
    out = {}
    for rule, band in zip(ground.history, report.bands, strict=True):
        k = rule.boundary
        lo, hi = out.get(k, (np.full(len(band.bounded), np.nan),) * 2)
        lo, hi = lo.copy(), hi.copy()
        lo[band.bounded] = report.lo[band.bounded, k]
        hi[band.bounded] = report.hi[band.bounded, k]
        out[k] = (lo, hi)
    return out


def history_paragraphs(project: Project, plans) -> list[str]:
    """Sentences for the schedule on each boundary a history rule bounds: the band between
    its maximum and minimum potential levels at the planned probes, and which probes are
    planned to pass below it (``plans``: the layout's ProbePlan sequence)."""
    if not project.ground.history or not plans:
        return []
    xy = np.array([(p.probe.x, p.probe.y) for p in plans], dtype=float)
    depth = np.array([p.depth_m for p in plans], dtype=float)
    gl = ground_levels(project, xy)
    out = []
    for k, (lo, hi) in sorted(history_limits(project, xy).items()):
        name = project.ground.boundary_names[k]
        inside = np.isfinite(lo)
        if not inside.any():
            continue
        thick = hi[inside] - lo[inside]
        short = [plans[i].probe.id for i in np.flatnonzero(inside & (depth < hi))]
        text = (
            f"Site history bounds the base of {name} at {int(inside.sum())} of the "
            f"{len(plans)} planned probes: it lies between its maximum and minimum potential "
            f"levels, a band {thick.min():.1f} to {thick.max():.1f} m thick there"
        )
        if gl is not None:
            text += (
                f" (levels {np.min(gl[inside] - hi[inside]):.2f} to "
                f"{np.max(gl[inside] - lo[inside]):.2f} m)"
            )
        text += (
            ". Every one of them is planned to pass below the band."
            if not short
            else f". Planned to stop above the band's base: {', '.join(short)}."
        )
        out.append(text)
    return out
