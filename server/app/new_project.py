"""A new project from nothing: a name, a coordinate system, an outline and a starting point.

A starting point is either blank (two placeholder units, no methods) or a template for a kind
of structure with a typical ground model and a catalogue of methods. Every unit, thickness and
rate in the templates is invented: a place to start editing, not data.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from probewise.errors import InputError

SCHEMA = "probewise/1"
DEFAULT_SIDE_M = 100.0  # the square outline used until the real one is drawn or imported
TARGET_CELLS = 2_500  # evaluation cells a new project starts with


def _unit(name: str, description: str, thickness=None, range_m: float = 50.0) -> dict[str, Any]:
    unit: dict[str, Any] = {"name": name, "description": description}
    if thickness is not None:
        a, b, c = thickness
        unit["thickness_m"] = {"min": a, "likely": b, "max": c, "shape": "pert"}
        unit["correlation"] = {"model": "exponential", "range_m": range_m}
    return unit


def _method(mid, name, kind, cost, per_day, max_depth, embed, refuse, precision) -> dict:
    mob, loc, metre = cost
    return {
        "id": mid,
        "name": name,
        "kind": kind,
        "cost": {"mobilisation": mob, "per_location": loc, "per_metre": metre},
        "metres_per_day": per_day,
        "max_depth_m": max_depth,
        "embedment_m": embed,
        "cannot_penetrate": list(refuse),
        "precision_m": dict(precision),
    }


@dataclass(frozen=True)
class StartingPoint:
    """What a new project holds besides its site: units, boundaries that matter, methods."""

    label: str
    description: str
    units: tuple[dict, ...]
    boundaries_of_interest: tuple[dict, ...] = ()
    methods: tuple[dict, ...] = field(default=())


_EMBANKMENT_UNITS = (
    _unit("Topsoil and made ground", "Placeholder (invented)", (0.2, 0.6, 1.5), 30.0),
    _unit(
        "Soft alluvial clay",
        "Placeholder: soft compressible clay (invented)",
        (1.0, 4.0, 9.0),
        60.0,
    ),
    _unit(
        "Sand and gravel", "Placeholder: medium dense to dense (invented)", (0.5, 2.0, 5.0), 80.0
    ),
    _unit("Mudstone", "Placeholder: basal unit (invented)"),
)
_BUILDING_UNITS = (
    _unit("Made ground", "Placeholder: mixed fill (invented)", (0.5, 1.5, 4.0), 25.0),
    _unit("Firm to stiff clay", "Placeholder (invented)", (2.0, 6.0, 12.0), 70.0),
    _unit("Sandstone", "Placeholder: basal unit (invented)"),
)

STARTING_POINTS: dict[str, StartingPoint] = {
    "blank": StartingPoint(
        "Blank",
        "Two placeholder units and no methods: describe the ground and the methods yourself.",
        (
            _unit(
                "Superficial deposits",
                "Placeholder: replace with the site's units",
                (0.5, 3.0, 8.0),
            ),
            _unit("Bedrock", "Placeholder: the basal unit"),
        ),
    ),
    "embankment": StartingPoint(
        "Road embankment on soft ground",
        "Fill and soft clay over gravel and rock; CPTu, cable percussive and rotary boreholes "
        "and trial pits at invented rates.",
        _EMBANKMENT_UNITS,
        (
            {"base_of": "Soft alluvial clay", "weight": 2.0, "tolerance_m": 0.5},
            {"base_of": "Sand and gravel", "weight": 1.0, "tolerance_m": 1.0},
        ),
        (
            _method(
                "CPTU",
                "Piezocone (CPTu)",
                "cpt",
                (1500, 150, 18),
                120,
                30,
                0.5,
                ["Mudstone"],
                {"Topsoil and made ground": 0.2, "Soft alluvial clay": 0.1, "Sand and gravel": 0.3},
            ),
            _method(
                "CP",
                "Cable percussive borehole",
                "borehole",
                (2500, 400, 95),
                12,
                30,
                1.5,
                ["Mudstone"],
                {
                    "Topsoil and made ground": 0.15,
                    "Soft alluvial clay": 0.25,
                    "Sand and gravel": 0.3,
                },
            ),
            _method(
                "RC",
                "Rotary cored borehole",
                "borehole",
                (4000, 600, 160),
                8,
                50,
                3.0,
                [],
                {
                    "Topsoil and made ground": 0.15,
                    "Soft alluvial clay": 0.2,
                    "Sand and gravel": 0.1,
                },
            ),
            _method(
                "TP",
                "Machine-dug trial pit (no entry)",
                "trial_pit",
                (500, 250, 0),
                30,
                4.5,
                0.3,
                [],
                {"Topsoil and made ground": 0.05, "Soft alluvial clay": 0.1},
            ),
        ),
    ),
    "building": StartingPoint(
        "Building on a brownfield plot",
        "Made ground over clay over rock; boreholes, CPT and trial pits at invented rates.",
        _BUILDING_UNITS,
        (
            {"base_of": "Made ground", "weight": 1.0, "tolerance_m": 0.3},
            {"base_of": "Firm to stiff clay", "weight": 2.0, "tolerance_m": 0.5},
        ),
        (
            _method(
                "BH",
                "Cable percussive borehole",
                "borehole",
                (2500, 400, 95),
                12,
                30,
                1.5,
                ["Sandstone"],
                {"Made ground": 0.15, "Firm to stiff clay": 0.25},
            ),
            _method(
                "CPT",
                "Cone penetration test",
                "cpt",
                (1500, 150, 18),
                120,
                25,
                0.5,
                ["Sandstone"],
                {"Made ground": 0.2, "Firm to stiff clay": 0.15},
            ),
            _method(
                "TP",
                "Machine-dug trial pit (no entry)",
                "trial_pit",
                (500, 250, 0),
                30,
                4.5,
                0.3,
                [],
                {"Made ground": 0.05},
            ),
        ),
    ),
}


def square_outline(x0: float = 0.0, y0: float = 0.0, side_m: float = DEFAULT_SIDE_M) -> dict:
    """A square GeoJSON Polygon with its lower left corner at (x0, y0)."""
    ring = [[x0, y0], [x0 + side_m, y0], [x0 + side_m, y0 + side_m], [x0, y0 + side_m], [x0, y0]]
    return {"type": "Polygon", "coordinates": [ring]}


def starting_spacing_m(area_m2: float, cells: int = TARGET_CELLS) -> float:
    """A round grid spacing (1, 2 or 5 x 10^k m) giving about ``cells`` cells over the area."""
    raw = math.sqrt(max(area_m2, 1e-6) / cells)
    exponent = math.floor(math.log10(raw))
    for step in (1.0, 2.0, 5.0, 10.0):
        spacing = step * 10.0**exponent
        if spacing >= raw:
            return spacing
    return 10.0 ** (exponent + 1)  # pragma: no cover - the loop always returns


def new_model(
    name: str,
    *,
    crs: str | None = None,
    currency: str = "",
    outline: dict | None = None,
    start: str = "blank",
) -> dict[str, Any]:
    """A validated model document for a new project; InputError names the field at fault."""
    from shapely.geometry import shape

    from probewise.io.model_file import validate_model

    if not name or not name.strip():
        raise InputError("name", "is required")
    if start not in STARTING_POINTS:
        known = ", ".join(STARTING_POINTS)
        raise InputError("start", f"unknown starting point {start!r}; choose one of {known}")
    site = outline or square_outline()
    try:
        area = float(shape(site).area)
    except (ValueError, TypeError, AttributeError, KeyError):
        raise InputError("site", "is not a polygon") from None
    point = STARTING_POINTS[start]
    model = {
        "schema": SCHEMA,
        "name": name.strip(),
        "crs": (crs or "").strip() or None,
        "currency": currency.strip(),
        "site": site,
        "grid_spacing_m": starting_spacing_m(area),
        "units": [dict(u) for u in point.units],
        "boundaries_of_interest": [dict(b) for b in point.boundaries_of_interest],
        "methods": [dict(m) for m in point.methods],
        "existing": [],
        "layouts": [],
    }
    return validate_model(model)
