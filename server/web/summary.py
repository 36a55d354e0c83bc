"""Small read-only views of a validated model for the overview page (no numerics beyond sums)."""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class BoundaryRow:
    base_of: str
    weight: float
    tolerance_m: float
    depth_min_m: float | None  # sum of the minimum thicknesses down to this boundary
    depth_max_m: float | None  # sum of the maxima


@dataclass(frozen=True)
class LayoutRow:
    name: str
    n_probes: int
    mix: str  # "BH ×2, CPT ×6"


def depth_limits(model: dict[str, Any]) -> dict[str, tuple[float, float]]:
    """Prior hard limits of each boundary (base of unit k): sums of minima and maxima."""
    limits: dict[str, tuple[float, float]] = {}
    low = high = 0.0
    for unit in model.get("units") or []:
        thickness = unit.get("thickness_m")
        if not thickness:
            break  # the basal unit has no base
        if (unit.get("presence") or 1.0) >= 1.0:  # a locally present unit can be 0 m thick
            low += float(thickness["min"])
        high += float(thickness["max"])
        limits[unit["name"]] = (low, high)
    return limits


def boundary_rows(model: dict[str, Any]) -> list[BoundaryRow]:
    limits = depth_limits(model)
    rows = []
    for item in model.get("boundaries_of_interest") or []:
        low, high = limits.get(item["base_of"], (None, None))
        rows.append(
            BoundaryRow(
                base_of=item["base_of"],
                weight=item.get("weight", 1),
                tolerance_m=item.get("tolerance_m"),
                depth_min_m=low,
                depth_max_m=high,
            )
        )
    return rows


def zone_overrides(model: dict[str, Any]) -> list[dict[str, Any]]:
    """One row per (zone, unit) whose thickness range the zone overrides."""
    rows = []
    for zone in model.get("zones") or []:
        for unit_name, override in (zone.get("units") or {}).items():
            thickness = (override or {}).get("thickness_m")
            if thickness:
                rows.append({"zone": zone["name"], "unit": unit_name, "thickness": thickness})
    return rows


def layout_rows(model: dict[str, Any]) -> list[LayoutRow]:
    rows = []
    for layout in model.get("layouts") or []:
        probes = layout.get("probes") or []
        counts = Counter(p["method"] for p in probes)
        mix = ", ".join(f"{method} \u00d7{n}" for method, n in sorted(counts.items()))
        rows.append(LayoutRow(name=layout["name"], n_probes=len(probes), mix=mix))
    return rows


def existing_by_method(model: dict[str, Any]) -> str:
    counts = Counter(p["method"] for p in model.get("existing") or [])
    return ", ".join(f"{method} \u00d7{n}" for method, n in sorted(counts.items()))


@dataclass(frozen=True)
class ResolutionRow:
    method_id: str
    method_name: str
    precisions_m: list[float | None]  # one per boundary, None where not resolved
    cannot_penetrate: list[str]


def boundary_names(model: dict[str, Any]) -> list[str]:
    """Units that have a base (all but the basal unit), top to bottom."""
    return [u["name"] for u in (model.get("units") or [])[:-1]]


def resolution_rows(model: dict[str, Any]) -> list[ResolutionRow]:
    """Which boundary each method reads, with what precision (std, m)."""
    names = boundary_names(model)
    rows = []
    for method in model.get("methods") or []:
        precision = method.get("precision_m") or {}
        rows.append(
            ResolutionRow(
                method_id=method["id"],
                method_name=method.get("name", method["id"]),
                precisions_m=[precision.get(name) for name in names],
                cannot_penetrate=list(method.get("cannot_penetrate") or []),
            )
        )
    return rows


@dataclass(frozen=True)
class ReadinessStep:
    label: str
    done: bool
    page: str  # the workflow page that completes it (slug under /projects/{id}/)
    hint: str


def readiness_steps(model: dict[str, Any]) -> list[ReadinessStep]:
    """What a project still lacks before its options can be compared, in workflow order."""
    units = model.get("units") or []
    placeholders = [
        u["name"] for u in units if str(u.get("description", "")).startswith("Placeholder")
    ]
    interest = {b["base_of"] for b in model.get("boundaries_of_interest") or []}
    reading = [
        m["id"] for m in model.get("methods") or [] if interest & set(m.get("precision_m") or {})
    ]
    probes = [lay for lay in model.get("layouts") or [] if lay.get("probes")]
    return [
        ReadinessStep(
            "Units described",
            len(units) >= 2 and not placeholders,
            "ground",
            "replace the placeholder units: " + ", ".join(placeholders)
            if placeholders
            else "units top to bottom, the last one basal",
        ),
        ReadinessStep(
            "A boundary that matters to design",
            bool(interest),
            "ground",
            "mark the boundaries of interest, with weight and tolerance",
        ),
        ReadinessStep(
            "A method that reads it",
            bool(reading),
            "methods",
            "a method with a precision for a boundary of interest",
        ),
        ReadinessStep(
            "A layout with probes",
            bool(probes),
            "options",
            "draw one, place a guidance grid, or run the optimiser",
        ),
    ]
