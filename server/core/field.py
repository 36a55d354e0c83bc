"""Unit thickness priors at points: mean, std, min and max with zone overrides.

A point takes the first zone (in order) that contains it; a unit that zone overrides takes
the zone's range there, every other unit its default range (docs/model.md "Probability model").
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from server.core.geometry import points_in_polygon
from server.core.model import GroundModel, ThicknessRange
from server.core.priors import thickness_moments


@dataclass(frozen=True, eq=False)
class UnitFields:
    """Thickness prior of each non-basal unit at ``n`` points; arrays ``(n, U-1)`` in m.

    ``zone`` is ``(n,)`` int: index of the zone each point takes, -1 for none.
    """

    mean_m: np.ndarray
    std_m: np.ndarray
    min_m: np.ndarray
    max_m: np.ndarray
    zone: np.ndarray

    @property
    def n_points(self) -> int:
        return self.mean_m.shape[0]

    def take(self, index: np.ndarray) -> UnitFields:
        """The fields at a subset (or repetition) of the points."""
        return UnitFields(
            self.mean_m[index],
            self.std_m[index],
            self.min_m[index],
            self.max_m[index],
            self.zone[index],
        )


def zone_of_points(
    ground: GroundModel, xy: np.ndarray, origin: tuple[float, float] = (0.0, 0.0)
) -> np.ndarray:
    """Index of the first zone containing each point, -1 where none: ``(n, 2) -> (n,)``."""
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    zone = np.full(len(xy), -1, dtype=int)
    for z, spec in enumerate(ground.zones):
        free = zone < 0
        if not free.any():
            break
        hit = np.zeros(len(xy), dtype=bool)
        hit[free] = points_in_polygon(xy[free], spec.polygon, origin)
        zone[hit] = z
    return zone


def _range_row(rng: ThicknessRange) -> tuple[float, float, float, float]:
    mean, std = thickness_moments(rng)
    return mean, std, float(rng.min_m), float(rng.max_m)


def unit_fields(
    ground: GroundModel, xy: np.ndarray, origin: tuple[float, float] = (0.0, 0.0)
) -> UnitFields:
    """Thickness prior of every non-basal unit at points, zone overrides applied.

    Parameters
    ----------
    ground : GroundModel
    xy : (n, 2) float
        Points relative to ``origin`` (m).
    origin : (2,) float
        Project coordinates of the local origin (zone polygons are in project coordinates).

    Returns
    -------
    UnitFields
        Arrays of shape ``(n, U-1)``.
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    n_thick = ground.n_boundaries
    zone = zone_of_points(ground, xy, origin)
    # Table of (mean, std, min, max) per (zone + 1, unit); row 0 = defaults.
    table = np.empty((len(ground.zones) + 1, n_thick, 4))
    for i in range(n_thick):
        table[0, i] = _range_row(ground.units[i].thickness)
    for z, spec in enumerate(ground.zones):
        table[z + 1] = table[0]
        for i, rng in spec.thickness.items():
            if 0 <= i < n_thick:
                table[z + 1, i] = _range_row(rng)
    rows = table[zone + 1]  # (n, U-1, 4)
    return UnitFields(
        mean_m=np.ascontiguousarray(rows[..., 0]),
        std_m=np.ascontiguousarray(rows[..., 1]),
        min_m=np.ascontiguousarray(rows[..., 2]),
        max_m=np.ascontiguousarray(rows[..., 3]),
        zone=zone,
    )


def prior_boundary_moments(fields: UnitFields) -> tuple[np.ndarray, np.ndarray]:
    """Prior mean and variance of every boundary depth: ``(n, B)`` each (m, m2).

    D_k = T_1 + ... + T_k with independent thicknesses, so both are cumulative sums.
    """
    return np.cumsum(fields.mean_m, axis=1), np.cumsum(fields.std_m**2, axis=1)
