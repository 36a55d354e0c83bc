"""A section line across the site: its default along the site's long axis, or two typed ends."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import shapely

from probewise.errors import InputError
from probewise.io.model_file import to_shapely
from probewise.numbers import read_number

MIN_SECTION_M = 1.0


@dataclass(frozen=True)
class SectionLine:
    x1: float
    y1: float
    x2: float
    y2: float

    @property
    def length_m(self) -> float:
        return math.hypot(self.x2 - self.x1, self.y2 - self.y1)

    def query(self) -> dict[str, str]:
        return {k: f"{getattr(self, k):.2f}" for k in ("x1", "y1", "x2", "y2")}


def default_section(model: dict[str, Any]) -> SectionLine:
    """Along the site's long axis, through its centre, clipped to the outline."""
    site = to_shapely(model["site"])
    rect = site.minimum_rotated_rectangle
    coords = np.asarray(rect.exterior.coords)[:4] if rect.geom_type == "Polygon" else None
    centre = site.representative_point()
    if coords is None:
        minx, miny, maxx, maxy = site.bounds
        return SectionLine(minx, (miny + maxy) / 2, maxx, (miny + maxy) / 2)
    edges = [coords[(i + 1) % 4] - coords[i] for i in range(4)]
    long_edge = max(edges, key=lambda e: float(np.hypot(*e)))
    direction = long_edge / max(float(np.hypot(*long_edge)), 1e-9)
    reach = float(np.hypot(*long_edge))
    a = np.array([centre.x, centre.y]) - direction * reach
    b = np.array([centre.x, centre.y]) + direction * reach
    clipped = site.intersection(shapely.LineString([a, b]))
    parts = getattr(clipped, "geoms", [clipped])
    longest = max(parts, key=lambda g: g.length, default=None)
    if longest is None or longest.is_empty or longest.length < MIN_SECTION_M:
        minx, miny, maxx, maxy = site.bounds
        return SectionLine(minx, (miny + maxy) / 2, maxx, (miny + maxy) / 2)
    (x1, y1), (x2, y2) = longest.coords[0], longest.coords[-1]
    if x2 < x1:  # read west to east
        x1, y1, x2, y2 = x2, y2, x1, y1
    return SectionLine(round(x1, 1), round(y1, 1), round(x2, 1), round(y2, 1))


def read_section(params: dict[str, str], model: dict[str, Any]) -> SectionLine:
    """The line from query parameters (all four or none: the default line)."""
    keys = ("x1", "y1", "x2", "y2")
    given = {k: (params.get(k) or "").strip() for k in keys}
    if not any(given.values()):
        return default_section(model)
    values = {}
    for k in keys:
        values[k] = read_number(given[k], k)
    line = SectionLine(**values)
    if line.length_m < MIN_SECTION_M:
        raise InputError("section", f"the two ends must be at least {MIN_SECTION_M:g} m apart")
    return line
