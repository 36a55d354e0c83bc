"""What the last stage of fieldwork found against what was predicted before it.

Each reading of the last stage is set against its by-stage prediction (server/app/readings.py:
the model conditioned on the readings of earlier stages only, docs/model.md "Readings against
predictions"): the predicted P5, P50 and P95 of the boundary depth at the probe (the Gaussian
prediction truncated to the hard depth bounds there, as every band the program reports), the
depth found, z and the flag. One sentence per boundary sums the stage up: the share of its
readings within their 90% band (about 90% expected), mean z^2 (about 1 expected) and what that
means. Shown on the schedule of the next stage (templates/_schedule_stage.html).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from probewise.app.readings import ReadingsReport, project_readings
from probewise.core.bounds import depth_bounds, truncated_quantiles
from probewise.core.model import Project
from probewise.core.readings import BoundarySummary, reading_note, summarise_boundary


@dataclass(frozen=True)
class StageReading:
    """One reading of the stage against its prediction from the earlier stages (m)."""

    probe: str
    boundary: str
    found_m: float
    p05_m: float
    p50_m: float
    p95_m: float
    z: float
    flag: bool
    note: str


@dataclass(frozen=True)
class StageReview:
    """The last stage's readings, the stages before it, a summary and a sentence per boundary."""

    stage: str
    earlier: tuple[str, ...]  # stage labels before it (probes without a stage not named)
    unstaged_before: bool  # probes without a stage count as the earliest information
    readings: tuple[StageReading, ...]
    summaries: dict[str, BoundarySummary]
    sentences: tuple[str, ...]

    @property
    def basis(self) -> str:
        """What the predictions were made from, in words."""
        parts = (["the probes without a stage"] if self.unstaged_before else []) + [
            f"stage {s}" for s in self.earlier
        ]
        if not parts:
            return "the conceptual ground model alone (no earlier probes)"
        return "the conceptual ground model and " + _and(parts)


def _and(parts: list[str]) -> str:
    return parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]


def boundary_sentence(name: str, stage: str, s: BoundarySummary) -> str:
    """One sentence on a boundary's readings of the stage."""
    if s.n == 0:
        return f"Base of {name}: stage {stage} gave no reading of it."
    share = f"{100 * s.share_within_90:.0f}%"
    return (
        f"Base of {name}: {s.n} reading{'s' if s.n != 1 else ''} of stage {stage}, {share} "
        f"within the predicted 90% band (about 90% expected), mean z\u00b2 {s.mean_z2:.2f} "
        f"(about 1 expected): {s.verdict}."
    )


def review_last_stage(project: Project, report: ReadingsReport | None = None) -> StageReview | None:
    """The last stage's readings against their earlier-stages predictions; None without stages.

    ``report``: the project's by-stage readings when already computed (they are reused).
    """
    if report is None:
        report = project_readings(project, by_stage=True)
    if not report.stages:
        return None
    last = len(report.stages) - 1
    c = report.checks
    sel = np.flatnonzero(c.stage == last)
    mine = replace(
        c,
        **{
            name: getattr(c, name)[sel]
            for name in (
                "probe",
                "boundary",
                "stage",
                "reading_m",
                "predicted_mean_m",
                "predicted_std_m",
                "prior_std_m",
                "precision_m",
                "z",
            )
        },
    )
    origin = np.asarray(project.origin, dtype=float)
    xy = np.array(
        [(project.existing[p].x, project.existing[p].y) for p in mine.probe], dtype=float
    ).reshape(-1, 2)
    rows = np.arange(len(sel))
    if len(sel):
        lo, hi = depth_bounds(project.ground, xy - origin, project.origin)
        lo, hi = lo[rows, mine.boundary], hi[rows, mine.boundary]
    else:
        lo = hi = np.zeros(0)
    mean, std = mine.predicted_mean_m, mine.predicted_std_m
    p05, p50, p95 = (truncated_quantiles(mean, std, lo, hi, q) for q in (0.05, 0.5, 0.95))
    names = report.boundary_names
    readings = tuple(
        StageReading(
            probe=report.probe_ids[mine.probe[j]],
            boundary=names[mine.boundary[j]],
            found_m=float(mine.reading_m[j]),
            p05_m=float(p05[j]),
            p50_m=float(p50[j]),
            p95_m=float(p95[j]),
            z=float(mine.z[j]),
            flag=bool(mine.flag[j]),
            note=reading_note(mine, j),
        )
        for j in range(len(sel))
    )
    stage = report.stages[last]
    summaries = {
        name: summarise_boundary(mine, k, report.probe_ids) for k, name in enumerate(names)
    }
    sentences = tuple(boundary_sentence(name, stage, s) for name, s in summaries.items() if s.n > 0)
    unstaged = any(p.stage is None for p in project.existing)
    return StageReview(
        stage=stage,
        earlier=report.stages[:last],
        unstaged_before=unstaged,
        readings=readings,
        summaries=summaries,
        sentences=sentences,
    )
