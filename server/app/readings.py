"""Readings against predictions for a project: stages ranked, every reading checked, each
boundary summed up, and the JSON document of ``probewise readings`` (docs/model-file.md)."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from probewise.core.analysis import existing_observations
from probewise.core.model import Project
from probewise.core.readings import (
    BoundarySummary,
    ReadingChecks,
    check_readings,
    reading_note,
    summarise_boundary,
)


@dataclass(frozen=True)
class ReadingsReport:
    """Checks of every existing reading, the stage labels in order, a summary per boundary."""

    checks: ReadingChecks
    stages: tuple[str, ...]
    summaries: dict[str, BoundarySummary]
    probe_ids: tuple[str, ...]
    boundary_names: tuple[str, ...]
    by_stage: bool


def stage_labels(project: Project) -> tuple[str, ...]:
    """Stage labels of the existing probes, in the order first met in the file."""
    seen: dict[str, None] = {}
    for probe in project.existing:
        if probe.stage is not None:
            seen.setdefault(probe.stage, None)
    return tuple(seen)


def project_readings(project: Project, by_stage: bool = False) -> ReadingsReport:
    """Every existing reading against its leave-one-probe-out (or earlier-stages) prediction.

    Probes without a stage count as the earliest information when ``by_stage``.
    """
    origin = project.origin
    obs = existing_observations(project.existing, project.methods, origin)
    labels = stage_labels(project)
    rank = {label: i for i, label in enumerate(labels)}
    probe_stage = np.array([rank.get(p.stage, -1) for p in project.existing], dtype=int)
    stage = probe_stage[obs.probe] if by_stage else None
    checks = check_readings(project.ground, origin, obs, stage)
    if not by_stage:  # report each probe's stage even when predictions ignore stages
        checks = ReadingChecks(**{**checks.__dict__, "stage": probe_stage[obs.probe]})
    ids = tuple(p.id for p in project.existing)
    names = project.ground.boundary_names
    summaries = {name: summarise_boundary(checks, k, ids) for k, name in enumerate(names)}
    return ReadingsReport(checks, labels, summaries, ids, names, by_stage)


def _num(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def readings_json(report: ReadingsReport) -> dict:
    """``{"readings": [...], "boundaries": {...}}`` of ``probewise readings --json``."""
    c = report.checks
    readings = [
        {
            "probe": report.probe_ids[c.probe[j]],
            "stage": report.stages[c.stage[j]] if c.stage[j] >= 0 else None,
            "boundary": report.boundary_names[c.boundary[j]],
            "reading_m": float(c.reading_m[j]),
            "predicted_mean_m": float(c.predicted_mean_m[j]),
            "predicted_std_m": float(c.predicted_std_m[j]),
            "precision_m": float(c.precision_m[j]),
            "z": _num(c.z[j]),
            "flag": bool(c.flag[j]),
        }
        for j in range(len(c.z))
    ]
    boundaries = {
        name: {
            "n": s.n,
            "share_within_90": s.share_within_90,
            "mean_z2": None if s.mean_z2 is None else _num(s.mean_z2),
            "verdict": s.verdict,
        }
        for name, s in report.summaries.items()
    }
    return {"readings": readings, "boundaries": boundaries}


def reading_notes(report: ReadingsReport) -> list[str]:
    """One note per flagged reading, for the text output and the page."""
    return [reading_note(report.checks, j) for j in range(len(report.checks.z))]
