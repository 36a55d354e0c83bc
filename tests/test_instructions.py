"""Per-hole instructions (server/app/instructions.py): what the method delivers, in the units
the hole is expected to reach, with the intervals, quality classes and sampling categories of
its ``delivers`` (docs/model-file.md "What a method delivers"). Expected text written by hand
from the invented deliveries of tests/core/test_requirements.py ``add_requirements``."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

from probewise.app.instructions import hole_instructions
from probewise.app.to_core import to_core
from probewise.core.analysis import ProjectAnalysis

sys.path.insert(0, str(Path(__file__).resolve().parent / "core"))
from core_helpers import tiny_dict  # noqa: E402
from test_requirements import add_requirements  # noqa: E402

CLAY = "Thin-wall tube (quality class 1, category A): one every 1 m in Alluvial clay"
GRAVEL = "Bulk bag (quality class 3, category B): one every 1.5 m in River gravel"


def test_sampling_lists_each_delivery_in_the_units_the_hole_reaches():
    model = tiny_dict()
    layout_doc = next(lay for lay in model["layouts"] if lay["name"] == "Four boreholes")
    layout_doc["probes"][0]["depth_m"] = 1.0  # a shallow hole: stops above the gravel
    project = to_core(add_requirements(model, "Alluvial clay", "River gravel"))
    analysis = ProjectAnalysis(project)
    layout = next(lay for lay in project.layouts if lay.name == "Four boreholes")
    plans = analysis.plan(layout)
    at = analysis.at_points(np.array([[p.probe.x, p.probe.y] for p in plans]))
    told = hole_instructions(project, plans, analysis)
    gravel_reached = []
    for plan, hole, p05 in zip(plans, told, at.p05_m, strict=True):
        # a unit is reached when its top (the base of the unit above) has P5 above the depth
        clay, gravel = bool(p05[0] < plan.depth_m), bool(p05[1] < plan.depth_m)
        text = hole.sampling or ""
        assert (CLAY in text) == clay and (GRAVEL in text) == gravel, (plan.probe.id, text)
        if clay and gravel:
            assert text == f"{CLAY}; {GRAVEL}."
        gravel_reached.append(gravel)
    assert not all(gravel_reached) and any(gravel_reached)  # both cases are exercised


def test_a_method_that_delivers_nothing_says_nothing():
    project = to_core(add_requirements(tiny_dict(), "Alluvial clay", "River gravel"))
    analysis = ProjectAnalysis(project)
    layout = next(lay for lay in project.layouts if lay.name == "Two boreholes and six CPTs")
    plans = [p for p in analysis.plan(layout) if p.probe.method == "CPT"]
    assert plans
    assert all(i.sampling is None for i in hole_instructions(project, plans, analysis))
