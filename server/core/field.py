"""Unit thickness priors at points: mean, std, min and max with zone overrides.

A point takes the first zone (in order) that contains it; a unit that zone overrides takes
the zone's range there, every other unit its default range (docs/model.md "Probability
model"). A unit with a presence p < 1 takes the moments of the mixture "absent with 1 - p,
else the range" (probewise.core.priors.presence_moments) and a minimum of 0.
A unit's ``spread_multiplier`` scales its std and its ``mean_shift_m`` moves its mean,
minimum (clamped at 0) and maximum, in every zone (an adopted fit); presence applies after.

Correlated thicknesses (a linear model of coregionalisation, docs/model.md): with C the lag-0
correlation between unit thicknesses and L = chol(C), T_i(x) - mu_i(x) = s_i(x) sum_{l<=i}
L_il Z_l(x) for independent unit-variance fields Z_l, so boundary k loads on field l with
A_kl(x) = sum_{i=l..k} s_i(x) L_il (:func:`boundary_loadings`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from probewise.core.geometry import distance_to_edge_m, points_in_polygon
from probewise.core.model import GroundModel, ThicknessRange, Unit
from probewise.core.priors import presence_moments, thickness_moments


@dataclass(frozen=True, eq=False)
class UnitFields:
    """Thickness prior of each non-basal unit at ``n`` points; arrays ``(n, U-1)`` in m.

    ``zone`` is ``(n,)`` int: index of the zone each point takes, -1 for none.
    ``coreg`` is the lower Cholesky factor ``(U-1, U-1)`` of the lag-0 correlation between
    unit thicknesses, or None when the units are independent.
    """

    mean_m: np.ndarray
    std_m: np.ndarray
    min_m: np.ndarray
    max_m: np.ndarray
    zone: np.ndarray
    coreg: np.ndarray | None = None

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
            self.coreg,
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


def _range_row(rng: ThicknessRange, unit: Unit) -> tuple[float, float, float, float]:
    """(mean, std, min, max) of a unit's range: an adopted fit's shift and spread multiplier
    first, then the presence mixture (a unit present with probability < 1 can be 0 thick)."""
    mean, std = thickness_moments(rng)
    shift = unit.mean_shift_m
    low = max(float(rng.min_m) + shift, 0.0)
    mean, std = mean + shift, std * unit.spread_multiplier
    mean, std = presence_moments(mean, std, unit.presence)
    return mean, std, (low if unit.presence >= 1.0 else 0.0), float(rng.max_m) + shift


def lag0_correlation(ground: GroundModel) -> np.ndarray:
    """Lag-0 correlation matrix C between the thicknesses of the non-basal units: ``(B, B)``.

    Identity but for the model's pairs.
    """
    c = np.eye(ground.n_boundaries)
    for i, j, rho in ground.thickness_correlation:
        c[i, j] = c[j, i] = rho
    return c


def coregionalisation_factor(ground: GroundModel) -> np.ndarray | None:
    """Lower Cholesky factor L of :func:`lag0_correlation`, or None for independent units.

    Raises ValueError when C is not positive definite.
    """
    if not ground.thickness_correlation:
        return None
    try:
        return np.linalg.cholesky(lag0_correlation(ground))
    except np.linalg.LinAlgError:
        raise ValueError("thickness correlation matrix is not positive definite") from None


def boundary_loadings(fields: UnitFields) -> np.ndarray:
    """Loadings of every boundary depth on the independent unit fields: ``(n, B, B)``.

    ``out[p, k, l] = sum_{i=l..k} s_i(x_p) L_il`` (L the identity for independent units,
    giving ``s_l(x_p)`` for ``l <= k`` and 0 above), so that
    ``Cov(D_j(x), D_k(y)) = sum_l out[x, j, l] out[y, k, l] rho_l(|x - y|)``.
    """
    n, B = fields.std_m.shape
    low = fields.coreg if fields.coreg is not None else np.eye(B)
    return np.cumsum(fields.std_m[:, :, None] * low[None, :, :], axis=1)


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
        table[0, i] = _range_row(ground.units[i].thickness, ground.units[i])
    for z, spec in enumerate(ground.zones):
        table[z + 1] = table[0]
        for i, rng in spec.thickness.items():
            if 0 <= i < n_thick:  # a zone's range applies where the unit is present
                table[z + 1, i] = _range_row(rng, ground.units[i])
    rows = table[zone + 1]  # (n, U-1, 4)
    if any(spec.transition_m > 0 for spec in ground.zones):
        rows = blend_zone_edges(ground, xy, origin, zone, table, rows)
    return UnitFields(
        mean_m=np.ascontiguousarray(rows[..., 0]),
        std_m=np.ascontiguousarray(rows[..., 1]),
        min_m=np.ascontiguousarray(rows[..., 2]),
        max_m=np.ascontiguousarray(rows[..., 3]),
        zone=zone,
        coreg=coregionalisation_factor(ground),
    )


def blend_zone_edges(
    ground: GroundModel,
    xy: np.ndarray,
    origin: tuple[float, float],
    zone: np.ndarray,
    table: np.ndarray,
    rows: np.ndarray,
) -> np.ndarray:
    """Thickness rows with the zones' transition bands blended (docs/model.md "Zone transitions").

    Within w/2 of the edge of a zone with transition width w, a point's mean and std are
    t x (zone's) + (1 - t) x (what the point takes without that zone), t = 1/2 + d/w with d
    the distance to the edge, positive inside; min and max take the wider of the two, so the
    hard bounds never cut into the blend. A point inside an earlier zone keeps that zone.

    Parameters
    ----------
    xy : (n, 2) float
        Points relative to ``origin``.
    zone : (n,) int
        First zone containing each point, -1 for none.
    table : (Z + 1, U - 1, 4) float
        (mean, std, min, max) per zone + 1 (row 0: defaults) and unit.
    rows : (n, U - 1, 4) float
        The rows the points take with sharp edges.

    Returns
    -------
    (n, U - 1, 4) float
    """
    rows = rows.copy()
    for z, spec in enumerate(ground.zones):
        half = 0.5 * spec.transition_m
        if half <= 0:
            continue
        near = (zone < 0) | (zone >= z)
        near[near] = distance_to_edge_m(xy[near], spec.polygon, origin) < half
        idx = np.flatnonzero(near)
        if not idx.size:
            continue
        d = distance_to_edge_m(xy[idx], spec.polygon, origin)
        inside = zone[idx] == z
        t = 0.5 + np.where(inside, d, -d) / spec.transition_m  # (m,)
        # what the inside points take without this zone: the next zone containing them
        other = rows[idx].copy()
        if inside.any():
            later = GroundModel(ground.units, ground.zones[z + 1 :])
            nxt = zone_of_points(later, xy[idx[inside]], origin)
            other[inside] = table[np.where(nxt >= 0, nxt + z + 2, 0)]
        own = np.broadcast_to(table[z + 1], other.shape)
        blended = other.copy()
        w = t[:, None]
        blended[..., 0] = w * own[..., 0] + (1 - w) * other[..., 0]
        blended[..., 1] = w * own[..., 1] + (1 - w) * other[..., 1]
        blended[..., 2] = np.minimum(own[..., 2], other[..., 2])
        blended[..., 3] = np.maximum(own[..., 3], other[..., 3])
        rows[idx] = blended
    return rows


def prior_boundary_moments(fields: UnitFields) -> tuple[np.ndarray, np.ndarray]:
    """Prior mean and variance of every boundary depth: ``(n, B)`` each (m, m2).

    D_k = T_1 + ... + T_k: the mean is a cumulative sum; so is the variance with independent
    thicknesses, else the sum of squared loadings (:func:`boundary_loadings`).
    """
    mean = np.cumsum(fields.mean_m, axis=1)
    if fields.coreg is None:
        return mean, np.cumsum(fields.std_m**2, axis=1)
    return mean, np.einsum("nkl,nkl->nk", *(boundary_loadings(fields),) * 2)
