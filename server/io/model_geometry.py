"""Geometry and CRS checks of the model file: GeoJSON polygons and a projected CRS in metres.

Each check raises ``ProblemError`` (a sub-path and a plain message) inside a pydantic
validator; ``probewise.io.model_checks`` turns it into ``InputError(field, problem)``.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

import numpy as np
import shapely
import shapely.geometry
from pyproj import CRS

from probewise.io.model_common import (
    MAX_COORD_M,
    MAX_POSITIONS,
    ProblemError,
    is_number,
    show_value,
)


def _check_position(pos: object, sub: str) -> tuple[float, float]:
    if not isinstance(pos, list) or len(pos) not in (2, 3) or not all(map(is_number, pos)):
        raise ProblemError(sub, f"a position must be [x, y] numbers, not {show_value(pos)}")
    for v in pos:
        if isinstance(v, int) and abs(v) > MAX_COORD_M:
            raise ProblemError(sub, f"coordinates must be within +/-{MAX_COORD_M:g} m")
    x, y = float(pos[0]), float(pos[1])
    if not (math.isfinite(x) and math.isfinite(y)):
        raise ProblemError(sub, "coordinates must be finite numbers (not NaN or Infinity)")
    if abs(x) > MAX_COORD_M or abs(y) > MAX_COORD_M:
        raise ProblemError(sub, f"coordinates must be within +/-{MAX_COORD_M:g} m")
    return x, y


def _check_rings(rings: object, sub: str) -> list[list[list[float]]]:
    """The rings of one GeoJSON Polygon: closed, at least 4 positions each, finite."""
    if not isinstance(rings, list) or not rings:
        raise ProblemError(sub, "a polygon needs a list of rings (outer ring first)")
    out = []
    for r, ring in enumerate(rings):
        rsub = f"{sub}[{r}]"
        if not isinstance(ring, list):
            raise ProblemError(rsub, "a ring must be a list of [x, y] positions")
        if len(ring) < 4:
            raise ProblemError(rsub, f"a ring needs at least 4 positions (has {len(ring)})")
        pts = [_check_position(p, f"{rsub}[{i}]") for i, p in enumerate(ring)]
        if pts[0] != pts[-1]:
            raise ProblemError(rsub, "ring is not closed: the last position must equal the first")
        out.append([list(p) for p in pts])
    return out


def _count_positions(coords: object, depth: int) -> int:
    """Positions in a coordinates array nested ``depth`` list levels deep (best effort)."""
    if depth == 0 or not isinstance(coords, list):
        return 1
    return sum(_count_positions(c, depth - 1) for c in coords)


def _explain_invalid(geom: shapely.Geometry) -> str:
    reason = shapely.is_valid_reason(geom)
    match = re.match(r"\s*([^\[]*)\[([-\d.eE+]+) ([-\d.eE+]+)", reason)
    if not match:
        return f"is not a valid polygon: {reason.lower()}"
    what, x, y = match.groups()
    return f"is not a valid polygon: {what.strip().lower()} near ({float(x):g}, {float(y):g})"


def _check_geometry(value: dict, allowed: tuple[str, ...]) -> dict:
    """Check a GeoJSON Polygon (or MultiPolygon) geometry; return it with float positions."""
    kind = value.get("type")
    if kind not in allowed:
        expected = " or ".join(f'"{a}"' for a in allowed)
        raise ProblemError("type", f"must be {expected}, not {show_value(kind)}")
    if "coordinates" not in value:
        raise ProblemError("coordinates", "is required")
    coords = value["coordinates"]
    depth = 2 if kind == "Polygon" else 3  # list levels down to a position
    if _count_positions(coords, depth) > MAX_POSITIONS:
        raise ProblemError("coordinates", f"has more than {MAX_POSITIONS} positions")
    if kind == "Polygon":
        parts = [_check_rings(coords, "coordinates")]
    else:
        if not isinstance(coords, list) or not coords:
            raise ProblemError("coordinates", "a MultiPolygon needs a list of polygons")
        parts = [_check_rings(p, f"coordinates[{i}]") for i, p in enumerate(coords)]
    polys = [
        shapely.Polygon(np.asarray(rings[0])[:, :2], [np.asarray(h)[:, :2] for h in rings[1:]])
        for rings in parts
    ]
    geom = polys[0] if kind == "Polygon" else shapely.MultiPolygon(polys)
    if not shapely.is_valid(geom):
        raise ProblemError("coordinates", _explain_invalid(geom))
    if not geom.area > 0:
        raise ProblemError("coordinates", "has zero area")
    out = dict(value)
    out["coordinates"] = parts[0] if kind == "Polygon" else parts
    return out


def check_polygon(value: dict) -> dict:
    return _check_geometry(value, ("Polygon",))


def check_site_geometry(value: dict) -> dict:
    return _check_geometry(value, ("Polygon", "MultiPolygon"))


def to_shapely(geometry: dict) -> shapely.Geometry:
    """A validated GeoJSON Polygon/MultiPolygon as a shapely geometry."""
    return shapely.geometry.shape(geometry)


@lru_cache(maxsize=64)
def _crs_problem(text: str) -> str | None:
    """Why ``text`` is not a usable project CRS, or None when it is (cached: parsing costs)."""
    shown = show_value(text, 60)
    if not text.strip():
        return 'must be a CRS such as "EPSG:27700", or null for a local site grid'
    if len(text) > 20_000:
        return "is too long to be a CRS definition"
    try:
        crs = CRS.from_user_input(text)
    except Exception:  # pyproj raises CRSError and, for odd input, others
        return f'{shown} is not a CRS that pyproj recognises; write it as "EPSG:NNNN"'
    label = text.strip() if len(text) <= 40 else "this CRS"
    if crs.is_geographic:
        return (
            f"{label} is geographic (degrees); use a projected CRS in metres such as the "
            "local UTM zone"
        )
    if not crs.is_projected:
        return f"{label} is a {crs.type_name}, not a projected CRS in metres"
    if "pseudo-mercator" in crs.name.lower():
        return (
            f"{label} (Web Mercator) distorts distances; use a projected CRS in metres such "
            "as the local UTM zone"
        )
    units = {a.unit_name for a in crs.axis_info[:2]}
    if not units <= {"metre", "meter", "m"}:
        return f"{label} is in {', '.join(sorted(units))}; use a projected CRS in metres"
    return None


def check_crs(value: object) -> object:
    if value is None:
        return None
    if not isinstance(value, str):
        raise ProblemError("", f'must be text like "EPSG:27700" or null, not {show_value(value)}')
    problem = _crs_problem(value)
    if problem:
        raise ProblemError("", problem)
    return value
