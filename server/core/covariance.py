"""Covariance of boundary depths built unit by unit from independent thicknesses.

With D_k(x) = T_1(x) + ... + T_k(x) and independent units,

    Cov(D_j(x), D_k(y)) = sum over units i <= min(j, k) of s_i(x) s_i(y) rho_i(|x - y|)

(DESIGN.md "Probability model"). Indices here are 0-based: boundary k is the base of unit k
and sums units 0..k. Both functions build the sum one unit at a time, so the cost is one
correlation evaluation per unit and pair of points, whatever the number of boundaries.
"""

from __future__ import annotations

import numpy as np

from server.core.correlation import correlate, pairwise_distance_m
from server.core.field import UnitFields
from server.core.model import GroundModel


def boundary_covariance(
    ground: GroundModel,
    xy_a: np.ndarray,
    bnd_a: np.ndarray,
    fields_a: UnitFields,
    xy_b: np.ndarray,
    bnd_b: np.ndarray,
    fields_b: UnitFields,
) -> np.ndarray:
    """Covariance between boundary depths at two lists of (point, boundary) pairs.

    Parameters
    ----------
    ground : GroundModel
        Supplies each unit's correlation model and practical range.
    xy_a : (na, 2) float
        Points of the first list (m, any common origin).
    bnd_a : (na,) int
        Boundary index of each entry of the first list.
    fields_a : UnitFields
        Thickness priors at ``xy_a`` (``n_points == na``).
    xy_b, bnd_b, fields_b
        The same for the second list (``nb`` entries).

    Returns
    -------
    (na, nb) float
        ``Cov(D_{bnd_a[i]}(xy_a[i]), D_{bnd_b[j]}(xy_b[j]))`` in m2.
    """
    bnd_a = np.asarray(bnd_a, dtype=int).reshape(-1)
    bnd_b = np.asarray(bnd_b, dtype=int).reshape(-1)
    h = pairwise_distance_m(xy_a, xy_b)
    shallower = np.minimum(bnd_a[:, None], bnd_b[None, :])
    out = np.zeros(h.shape)
    for i in range(ground.n_boundaries):
        active = shallower >= i
        if not active.any():
            break
        corr = ground.units[i].correlation
        term = np.outer(fields_a.std_m[:, i], fields_b.std_m[:, i]) * correlate(
            corr.model, h, corr.range_m
        )
        out += np.where(active, term, 0.0)
    return out


def cross_covariance_all(
    ground: GroundModel,
    xy_obs: np.ndarray,
    bnd_obs: np.ndarray,
    fields_obs: UnitFields,
    xy_pts: np.ndarray,
    fields_pts: UnitFields,
) -> np.ndarray:
    """Covariance of observed depths with every boundary depth at many points.

    Parameters
    ----------
    ground : GroundModel
    xy_obs : (m, 2) float
        Observation points.
    bnd_obs : (m,) int
        Boundary each observation reads.
    fields_obs : UnitFields
        Thickness priors at ``xy_obs``.
    xy_pts : (n, 2) float
        Prediction points (same origin as ``xy_obs``).
    fields_pts : UnitFields
        Thickness priors at ``xy_pts``.

    Returns
    -------
    (m, B, n) float
        ``out[j, k, p] = Cov(D_{bnd_obs[j]}(xy_obs[j]), D_k(xy_pts[p]))`` in m2; the layout
        puts the observation axis first so that ``out.reshape(m, -1)`` is the right-hand side
        of a triangular solve.
    """
    bnd_obs = np.asarray(bnd_obs, dtype=int).reshape(-1)
    m, n, B = len(bnd_obs), fields_pts.n_points, ground.n_boundaries
    out = np.empty((m, B, n))
    if m == 0:
        return out
    h = pairwise_distance_m(xy_obs, xy_pts)  # (m, n)
    acc = np.zeros((m, n))
    for i in range(B):
        corr = ground.units[i].correlation
        # Unit i adds to the covariance of an observation of boundary j only when i <= j.
        s_obs = np.where(bnd_obs >= i, fields_obs.std_m[:, i], 0.0)
        if s_obs.any():
            rho = correlate(corr.model, h, corr.range_m)
            rho *= s_obs[:, None]
            rho *= fields_pts.std_m[None, :, i]
            acc += rho
        out[:, i, :] = acc
    return out
