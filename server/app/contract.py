"""The JSON documents the command line prints and the web serves (docs/model-file.md, "CLI
output contract"), and the one model-file entry of an optimised layout, whichever door made it."""

from __future__ import annotations

import dataclasses
from typing import Any

MAX_CURVE_POINTS = 400  # points of the cost-gain curve kept with an optimised layout


def metrics_json(boundaries: dict) -> dict:
    return {
        "boundaries": {
            name: {
                "std_mean_m": m.std_mean_m,
                "width90_mean_m": m.width90_mean_m,
                "uncertain_volume_m3": m.uncertain_volume_m3,
                "confident_fraction": m.confident_fraction,
            }
            for name, m in boundaries.items()
        }
    }


def layout_json(result, boundary_names: tuple[str, ...]) -> dict:
    """One entry of evaluate's ``layouts`` (also used by the optimiser's output)."""
    out = {"name": result.name}
    out.update(metrics_json(result.boundaries))
    out.update(
        cost=result.cost,
        metres=result.metres,
        duration_days=result.duration_days,
        rig_days=result.rig_days,
        information_gain_bits=result.information_gain_bits,
        gain_per_cost=result.gain_per_cost,
        pareto=result.pareto,
        probes=[
            {
                "id": p.probe.id,
                "method": p.probe.method,
                "x": p.probe.x,
                "y": p.probe.y,
                "depth_m": p.depth_m,
                "observes": [boundary_names[k] for k in p.observes],
            }
            for p in result.plans
        ],
    )
    return out


def evaluation_json(evaluation, values=None) -> dict:
    """The ``--json`` document; ``notice`` only when the grid was coarsened; with ``values``
    (a ``ValueReport`` of the same layouts, when the model has design elements) each layout
    also carries ``expected_saving`` and ``net_value``."""
    names = evaluation.boundary_names
    layouts = [layout_json(r, names) for r in evaluation.layouts]
    if values is not None:
        for entry, value in zip(layouts, values.layouts, strict=True):
            entry.update(expected_saving=value.expected_saving, net_value=value.net_value)
    out = {"baseline": metrics_json(evaluation.baseline.boundaries), "layouts": layouts}
    notice = getattr(evaluation, "grid_notice", None)
    if notice:
        out["notice"] = notice
    conditioning = getattr(evaluation, "conditioning", None)
    if conditioning is not None:  # exact or local (docs/model.md "Many readings")
        out["conditioning"] = dataclasses.asdict(conditioning)
    return out


def value_json(report) -> dict:
    """The ``probewise value --json`` document (``p_cheaper_allowed`` on choice elements
    only); ``notice`` only when the grid was coarsened."""
    out = {
        "currency": report.currency,
        "elements": [
            {"name": name, "cells": cells, "cost_now": cost}
            for name, cells, cost in report.elements
        ],
        "layouts": [layout_value_json(v) for v in report.layouts],
    }
    if report.grid_notice:
        out["notice"] = report.grid_notice
    return out


def layout_value_json(v) -> dict:
    """One layout's value (``LayoutValue``) as ``probewise value --json`` gives it."""
    return {
        "name": v.name,
        "gi_cost": v.gi_cost,
        "design_cost_now": v.design_cost_now,
        "design_cost_expected": v.design_cost_expected,
        "expected_saving": v.expected_saving,
        "net_value": v.net_value,
        "elements": [
            {
                "name": e.name,
                "cost_now": e.cost_now,
                "cost_expected": e.cost_expected,
                "expected_saving": e.expected_saving,
            }
            | ({} if e.p_cheaper_allowed is None else {"p_cheaper_allowed": e.p_cheaper_allowed})
            for e in v.elements
        ],
    }


def value_curve_json(points) -> list[dict]:
    """The net-value optimiser's saving-cost curve (``ValuePoint``s) as JSON points."""
    return [
        {
            "cost": p.cost,
            "expected_saving": p.expected_saving,
            "net_value": p.net_value,
            "probes": p.probes,
            "optimum": p.optimum,
        }
        for p in points
    ]


def search_json(out) -> dict:
    """How the search ran (the ``"optimisation"`` object of ``optimise --json``)."""
    return {
        "cells": out.optimisation_cells,
        "spacing_m": out.optimisation_spacing_m,
        "candidate_locations": int(len(out.candidates.xy)),
        "candidate_spacing_m": out.candidate_spacing_m,
        "min_spacing_m": out.min_spacing_m,
        "runs": len(out.runs),
        "seconds": out.seconds,
    }


def net_value_json(out, boundary_names, currency: str, budget, notice=None) -> dict:
    """The ``optimise --objective net-value --json`` document: the layout (as one entry of
    evaluate's layouts, with its expected saving and net value), its value per element, the
    saving-cost curve of its greedy run and how the search ran; ``budget`` null when none."""
    v = out.value
    layout = layout_json(out.result, boundary_names)
    layout["expected_saving"] = v.expected_saving
    layout["net_value"] = v.net_value
    doc = {
        "objective": "net-value",
        "currency": currency,
        "budget": budget,
        "layout": layout,
        "value": layout_value_json(v),
        "curve": value_curve_json(out.value_curve),
        "optimisation": search_json(out),
    }
    if notice:
        doc["notice"] = notice
    return doc


def optimise_json(out, boundary_names, notice: str | None = None) -> dict:
    """The ``--json`` document of one optimisation."""
    doc = {
        "layout": layout_json(out.result, boundary_names),
        "curve": [{"cost": c, "information_gain_bits": g} for c, g in out.curve],
        "optimisation": search_json(out),
    }
    r = out.refinement
    if r is not None:
        doc["refinement"] = {
            "greedy_gain_bits": r.greedy_gain_bits,
            "refined_gain_bits": r.refined_gain_bits,
            "moves": r.moves,
            "sweeps": r.sweeps,
            "candidate_locations": r.candidate_locations,
            "seconds": r.seconds,
        }
    if notice:
        doc["notice"] = notice
    return doc


def thin_curve(curve, limit: int = MAX_CURVE_POINTS) -> list[dict[str, float]]:
    """The cost-gain curve as JSON points, thinned evenly to at most ``limit`` (ends kept)."""
    points = [(float(c), float(g)) for c, g in curve]
    if len(points) > limit:
        step = (len(points) - 1) / (limit - 1)
        points = [points[round(i * step)] for i in range(limit)]
    return [{"cost": round(c, 2), "information_gain_bits": round(g, 6)} for c, g in points]


def thin_value_curve(points, limit: int = MAX_CURVE_POINTS) -> list[dict[str, Any]]:
    """The net-value curve as model-file points (``cost``, ``expected_saving``,
    ``net_value``; ``optimum`` true on the prefix returned), thinned evenly to at most
    ``limit`` with both ends and the optimum kept."""
    pts = list(points)
    if len(pts) > limit:
        step = (len(pts) - 1) / (limit - 2)
        keep = {round(i * step) for i in range(limit - 1)} | {
            i for i, p in enumerate(pts) if p.optimum
        }
        pts = [pts[i] for i in sorted(keep)]
    return [
        {
            "cost": round(p.cost, 2),
            "expected_saving": round(p.expected_saving, 2),
            "net_value": round(p.net_value, 2),
        }
        | ({"optimum": True} if p.optimum else {})
        for p in pts
    ]


def optimised_layout_entry(
    out, name: str, budget: float | None, methods: tuple[str, ...] | None = None
) -> dict[str, Any]:
    """The model-file entry of an optimised layout: probes (coordinates to 0.01 m, depth
    overrides kept), where it came from, the budget (when one capped it) and the curve
    (cost-gain, or saving-cost for the net-value objective)."""
    with_methods = f" with {', '.join(methods)}" if methods else ""
    capped = budget is not None and budget != float("inf")
    if getattr(out, "objective", "gain") == "net-value":
        description = "Proposed by the optimiser for the most net value" + (
            f" within a budget of {budget:,.0f}" if capped else ""
        )
        curve = thin_value_curve(out.value_curve)
    else:
        description = f"Proposed by the optimiser for a budget of {budget:,.0f}"
        curve = thin_curve(out.curve)
    return {
        "name": name,
        "origin": "optimised",
        "description": description + with_methods,
        **({"budget": float(budget)} if capped else {}),
        "optimiser_curve": curve,
        "probes": [
            {"id": p.id, "method": p.method, "x": round(p.x, 2), "y": round(p.y, 2)}
            | ({} if p.depth_m is None else {"depth_m": p.depth_m})
            for p in out.layout.probes
        ],
    }
