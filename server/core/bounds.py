"""Hard bounds on boundary depths and quantiles of the truncated Gaussian posterior.

Bounds (docs/model.md "Probability model"): D_k(x) lies in [sum of unit minima, sum of unit maxima]
of units 1..k (zone overrides applied), intersected with every user bound on boundary k that
applies at x (everywhere, or inside its polygon). Should a user bound not overlap the range
from the thicknesses at all, the user bound is kept: it is the engineer's explicit statement
about that boundary.
"""

from __future__ import annotations

import numpy as np
from scipy.special import log_ndtr, ndtri_exp

from server.core.field import UnitFields, unit_fields
from server.core.geometry import points_in_polygon
from server.core.model import GroundModel


def depth_bounds(
    ground: GroundModel,
    xy: np.ndarray,
    origin: tuple[float, float] = (0.0, 0.0),
    fields: UnitFields | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Hard lower and upper bounds on every boundary depth at points.

    Parameters
    ----------
    ground : GroundModel
    xy : (n, 2) float
        Points relative to ``origin``.
    origin : (float, float)
        Project coordinates of the local origin (bound polygons are in project coordinates).
    fields : UnitFields, optional
        Thickness priors at ``xy`` if already computed.

    Returns
    -------
    (lo, hi) : ((n, B) float, (n, B) float)
        Depths (m), ``lo <= hi``.
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    if fields is None:
        fields = unit_fields(ground, xy, origin)
    lo = np.cumsum(fields.min_m, axis=1)
    hi = np.cumsum(fields.max_m, axis=1)
    for bound in ground.bounds:
        k = bound.boundary
        where = (
            np.ones(len(xy), dtype=bool)
            if bound.polygon is None
            else points_in_polygon(xy, bound.polygon, origin)
        )
        new_lo = np.maximum(lo[:, k], bound.min_depth_m)
        new_hi = np.minimum(hi[:, k], bound.max_depth_m)
        disjoint = new_lo > new_hi
        new_lo = np.where(disjoint, bound.min_depth_m, new_lo)
        new_hi = np.where(disjoint, bound.max_depth_m, new_hi)
        lo[:, k] = np.where(where, new_lo, lo[:, k])
        hi[:, k] = np.where(where, new_hi, hi[:, k])
    return lo, hi


def truncated_quantiles(
    mean: np.ndarray, std: np.ndarray, lo: np.ndarray, hi: np.ndarray, q: float
) -> np.ndarray:
    """Quantile ``q`` of N(mean, std^2) truncated to [lo, hi], elementwise.

    Parameters
    ----------
    mean, std, lo, hi : array of float, broadcastable
        ``std >= 0``, ``lo <= hi`` (infinite bounds allowed).
    q : float
        Probability in (0, 1).

    Returns
    -------
    array of float
        The quantile, inside [lo, hi]. Where ``std == 0`` it is ``clip(mean, lo, hi)``.

    Notes
    -----
    With a = (lo - mean)/std and b = (hi - mean)/std the quantile is
    mean + std Phi^-1(q Phi(b) + (1 - q) Phi(a)). It is evaluated in log space,
    log p = log Phi(b) + log(q + (1 - q) exp(log Phi(a) - log Phi(b))), inverted with
    ``ndtri_exp``, so an interval far in a tail (mean far outside the bounds) stays exact.
    When the interval lies mostly above the mean (a + b > 0) the problem is mirrored
    (x -> -x, q -> 1 - q) so the lower tail is always the one used.
    """
    mean, std, lo, hi = np.broadcast_arrays(
        *(np.asarray(v, dtype=float) for v in (mean, std, lo, hi))
    )
    out = np.array(np.clip(mean, lo, hi), dtype=float)
    live = (std > 0) & (lo < hi)
    if not live.any():
        return out
    m, s = mean[live], std[live]
    a, b = (lo[live] - m) / s, (hi[live] - m) / s
    with np.errstate(invalid="ignore"):  # -inf + inf (no bounds): no mirror
        mirror = (a + b) > 0
    a2 = np.where(mirror, -b, a)
    b2 = np.where(mirror, -a, b)
    q2 = np.where(mirror, 1.0 - q, q)
    log_pa, log_pb = log_ndtr(a2), log_ndtr(b2)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        ratio = np.exp(log_pa - log_pb)  # in [0, 1] since a2 <= b2
        log_p = log_pb + np.log(q2 + (1.0 - q2) * ratio)
    z = ndtri_exp(log_p)
    z = np.where(mirror, -z, z)
    out[live] = np.clip(m + s * z, lo[live], hi[live])
    return out
