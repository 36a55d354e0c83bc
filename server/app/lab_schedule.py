"""The laboratory testing schedule of a layout for the schedule page and its CSV
(``probewise.core.lab_schedule``)."""

from __future__ import annotations

import numpy as np

from probewise.core.lab_schedule import LabNeed, lab_schedule
from probewise.core.requirements import existing_test_counts

LAB_COLUMNS = (
    "unit",
    "parameter",
    "test",
    "probe",
    "method",
    "samples",
    "target_depths_m",
    "band_top_m",
    "band_base_m",
    "band",
)


def lab_needs(analysis, plans) -> tuple[LabNeed, ...]:
    """The lab schedule of a layout's plans against the project's test requirements."""
    project = analysis.project
    req = project.requirements
    if req is None or not req.tests:
        return ()
    counts = np.zeros(len(req.tests), dtype=int)
    if project.existing:
        xy = np.array([(p.x, p.y) for p in project.existing])
        counts = existing_test_counts(
            project, analysis.baseline.predict(analysis.to_local(xy)).mean_m
        )
    return lab_schedule(analysis, plans, counts)


def lab_rows(needs) -> list[dict]:
    """One row per (test, hole), ready for the CSV; a test still short gets a row saying so."""
    rows = []
    for need in needs:
        for row in need.rows:
            rows.append(
                {
                    "unit": need.unit,
                    "parameter": need.parameter,
                    "test": need.test,
                    "probe": row.probe,
                    "method": row.method,
                    "samples": row.samples,
                    "target_depths_m": [round(d, 2) for d in row.depths_m],
                    "band_top_m": round(row.band_top_m, 2),
                    "band_base_m": round(row.band_base_m, 2),
                    "band": "sure (P95 top to P5 base)" if row.sure_band else "expected (means)",
                }
            )
        if need.short:
            rows.append(
                {
                    "unit": need.unit,
                    "parameter": need.parameter,
                    "test": need.test,
                    "probe": "",
                    "method": "",
                    "samples": "",
                    "target_depths_m": [],
                    "band_top_m": "",
                    "band_base_m": "",
                    "band": f"short by {need.short}: no hole of this layout gives more",
                }
            )
    return rows
