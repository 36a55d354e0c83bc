"""Plane geometry the core needs: point-in-polygon (even-odd) and polygon area.

Polygons (``probewise.core.model.Polygon``) hold their rings in project coordinates; the core
works in coordinates relative to the project origin, so every function here takes that
``origin`` and shifts the rings, never the points, before testing.
"""

from __future__ import annotations

import numpy as np

from probewise.core.model import Polygon

# A point this close to an edge (m) counts as on it, hence inside.
_EDGE_TOL_M = 1e-9


def local_rings(polygon: Polygon, origin: tuple[float, float] = (0.0, 0.0)) -> list[np.ndarray]:
    """The polygon's rings shifted by ``-origin``, each an ``(n, 2)`` float array."""
    o = np.asarray(origin, dtype=float)
    return [np.asarray(r, dtype=float).reshape(-1, 2) - o for r in polygon.rings]


def points_in_polygon(
    xy: np.ndarray, polygon: Polygon, origin: tuple[float, float] = (0.0, 0.0)
) -> np.ndarray:
    """Which points lie inside a polygon (even-odd rule over all rings).

    Parameters
    ----------
    xy : (n, 2) float
        Points, relative to ``origin``.
    polygon : Polygon
        Rings in project coordinates; a point inside an odd number of rings is inside, which
        covers holes and multipolygons.
    origin : (2,) float
        Origin of ``xy`` in project coordinates.

    Returns
    -------
    (n,) bool
        True inside; points on an edge or vertex count as inside.
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    x, y = xy[:, 0], xy[:, 1]
    inside = np.zeros(len(xy), dtype=bool)
    on_edge = np.zeros(len(xy), dtype=bool)
    for ring in local_rings(polygon, origin):
        if len(ring) < 3:
            continue
        x1, y1 = ring[:-1, 0], ring[:-1, 1]
        x2, y2 = ring[1:, 0], ring[1:, 1]
        if not np.array_equal(ring[0], ring[-1]):  # tolerate an unclosed ring
            x1, y1 = np.append(x1, ring[-1, 0]), np.append(y1, ring[-1, 1])
            x2, y2 = np.append(x2, ring[0, 0]), np.append(y2, ring[0, 1])
        for ax, ay, bx, by in zip(x1, y1, x2, y2, strict=True):
            # Crossing test of a ray to +x (half-open in y so a vertex counts once).
            straddles = (ay > y) != (by > y)
            if by != ay:
                x_cross = ax + (y - ay) * (bx - ax) / (by - ay)
                inside ^= straddles & (x < x_cross)
            # Distance to the segment, for points on the edge.
            dx, dy = bx - ax, by - ay
            seg2 = dx * dx + dy * dy
            if seg2 == 0.0:
                d2 = (x - ax) ** 2 + (y - ay) ** 2
            else:
                t = np.clip(((x - ax) * dx + (y - ay) * dy) / seg2, 0.0, 1.0)
                d2 = (x - ax - t * dx) ** 2 + (y - ay - t * dy) ** 2
            on_edge |= d2 <= _EDGE_TOL_M**2
    return inside | on_edge


def distance_to_edge_m(
    xy: np.ndarray, polygon: Polygon, origin: tuple[float, float] = (0.0, 0.0)
) -> np.ndarray:
    """Distance (m) from points to the nearest edge of any of a polygon's rings.

    Parameters
    ----------
    xy : (n, 2) float
        Points, relative to ``origin``.
    polygon : Polygon
    origin : (2,) float

    Returns
    -------
    (n,) float
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    best = np.full(len(xy), np.inf)
    for ring in local_rings(polygon, origin):
        a = ring[:-1] if np.array_equal(ring[0], ring[-1]) else ring
        b = np.roll(a, -1, axis=0)
        for (ax, ay), (bx, by) in zip(a, b, strict=True):
            dx, dy = bx - ax, by - ay
            seg2 = dx * dx + dy * dy
            t = (
                0.0
                if seg2 == 0.0
                else np.clip(((xy[:, 0] - ax) * dx + (xy[:, 1] - ay) * dy) / seg2, 0.0, 1.0)
            )
            d2 = (xy[:, 0] - ax - t * dx) ** 2 + (xy[:, 1] - ay - t * dy) ** 2
            best = np.minimum(best, d2)
    return np.sqrt(best)


def polygon_area_m2(polygon: Polygon) -> float:
    """Area of a polygon under the even-odd rule, assuming rings do not cross (m2).

    Rings nested an even number of times add, odd times subtract; computed from each ring's
    absolute shoelace area and its nesting depth (a vertex tested against the other rings).
    """
    rings = local_rings(polygon, tuple(np.vstack(polygon.rings).mean(axis=0)))
    total = 0.0
    for i, ring in enumerate(rings):
        xr, yr = ring[:, 0], ring[:, 1]
        area = 0.5 * abs(np.dot(xr, np.roll(yr, -1)) - np.dot(yr, np.roll(xr, -1)))
        depth = sum(
            bool(points_in_polygon(ring[:1], Polygon((other,)))[0])
            for j, other in enumerate(rings)
            if j != i
        )
        total += area if depth % 2 == 0 else -area
    return float(total)
