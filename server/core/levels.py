"""Ground level and levels of boundaries (docs/model.md "Levels and site history").

Ground level GL(x) in the project datum is a constant, or surveyed points interpolated
linearly on their Delaunay triangulation, taking the nearest surveyed point outside the
triangulation's hull. The level of a boundary is GL - depth.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy.interpolate import LinearNDInterpolator
from scipy.spatial import cKDTree

from probewise.core.model import GroundLevel


class GroundSurface:
    """A ground level ready to be evaluated: the interpolator and nearest-point tree.

    Surveyed points are shifted to their own centroid first, so that the triangulation of
    points with large project coordinates (UTM northings) keeps its precision.
    """

    def __init__(self, ground_level: GroundLevel):
        self.constant_m = ground_level.level_m
        self.centre = np.zeros(2)
        self.linear = None
        self.tree = None
        if ground_level.points is not None:
            pts = np.asarray(ground_level.points, dtype=float).reshape(-1, 3)
            self.centre = pts[:, :2].mean(axis=0)
            xy = pts[:, :2] - self.centre
            self.levels_m = pts[:, 2]
            self.linear = LinearNDInterpolator(xy, self.levels_m)
            self.tree = cKDTree(xy)

    def level_at(self, xy: np.ndarray) -> np.ndarray:
        """Ground level (m) at points in project coordinates: ``(n, 2) -> (n,)``."""
        xy = np.asarray(xy, dtype=float).reshape(-1, 2)
        if self.linear is None:
            return np.full(len(xy), float(self.constant_m))
        local = xy - self.centre
        out = np.asarray(self.linear(local), dtype=float).reshape(-1)
        outside = ~np.isfinite(out)
        if outside.any():
            _, nearest = self.tree.query(local[outside])
            out[outside] = self.levels_m[nearest]
        return out


@lru_cache(maxsize=16)
def ground_surface(ground_level: GroundLevel) -> GroundSurface:
    """The (cached) evaluable surface of a ground level; keyed by the object itself."""
    return GroundSurface(ground_level)


def ground_level_at(
    ground_level: GroundLevel, xy: np.ndarray, origin: tuple[float, float] = (0.0, 0.0)
) -> np.ndarray:
    """Ground level (m, project datum) at points.

    Parameters
    ----------
    ground_level : GroundLevel
    xy : (n, 2) float
        Points relative to ``origin``.
    origin : (2,) float
        Project coordinates of the local origin.

    Returns
    -------
    (n,) float
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    return ground_surface(ground_level).level_at(xy + np.asarray(origin, dtype=float))


def level_of_depth(ground_level_m: np.ndarray, depth_m: np.ndarray) -> np.ndarray:
    """Level (m, project datum) of a depth below ground: GL - depth (broadcast)."""
    return np.asarray(ground_level_m, dtype=float) - np.asarray(depth_m, dtype=float)
