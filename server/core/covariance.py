"""Covariance of boundary depths built unit by unit from independent thicknesses.

With D_k(x) = T_1(x) + ... + T_k(x) and independent units,

    Cov(D_j(x), D_k(y)) = sum over units i <= min(j, k) of s_i(x) s_i(y) rho_i(|x - y|)

(docs/model.md "Probability model"). Indices here are 0-based: boundary k is the base of unit k
and sums units 0..k. Both functions build the sum one unit at a time, so the cost is one
correlation evaluation per unit and pair of points, whatever the number of boundaries.

Correlated thicknesses (``GroundModel.thickness_correlation``) take the general form of a
linear model of coregionalisation, Cov(D_j(x), D_k(y)) = sum_l A_jl(x) A_kl(y) rho_l(|x-y|)
with the loadings of ``probewise.core.field.boundary_loadings``; independent units keep the
sum above unchanged. Each rho_i includes the unit's nugget (``correlate_unit``).
"""

from __future__ import annotations

import numpy as np

from probewise.core.correlation import correlate_unit, pairwise_distance_m
from probewise.core.field import UnitFields, boundary_loadings
from probewise.core.model import GroundModel


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
    if fields_a.coreg is not None:
        h = pairwise_distance_m(xy_a, xy_b)
        load_a = boundary_loadings(fields_a)[np.arange(len(bnd_a)), bnd_a]  # (na, B)
        load_b = boundary_loadings(fields_b)[np.arange(len(bnd_b)), bnd_b]
        out = np.zeros(h.shape)
        for i in range(ground.n_boundaries):
            out += np.outer(load_a[:, i], load_b[:, i]) * correlate_unit(
                ground.units[i].correlation, h
            )
        return out
    # A probe reads several boundaries at one spot: correlate each pair of distinct spots
    # once. cum[i, s, t] = sum over units i' <= i of s_i'(s) s_i'(t) rho_i'(|s - t|); a pair of
    # readings of boundaries j and k then has covariance cum[min(j, k), s, t].
    spots_a, spot_a, first_a = distinct_spots(xy_a)
    spots_b, spot_b, first_b = distinct_spots(xy_b)
    levels = min(int(bnd_a.max(initial=-1)), int(bnd_b.max(initial=-1))) + 1
    if levels <= 0:
        return np.zeros((len(bnd_a), len(bnd_b)))
    h_spots = pairwise_distance_m(spots_a, spots_b)  # (ua, ub)
    s_a, s_b = fields_a.std_m[first_a], fields_b.std_m[first_b]
    cum = cumulative_unit_covariance(ground, h_spots, s_a, s_b, levels)
    ua, ub = h_spots.shape
    flat = np.minimum(bnd_a[:, None], bnd_b[None, :]) * (ua * ub)
    flat += (spot_a * ub)[:, None]
    flat += spot_b[None, :]
    return cum.reshape(-1).take(flat)


def cumulative_unit_covariance(
    ground: GroundModel, h_m: np.ndarray, std_a: np.ndarray, std_b: np.ndarray, levels: int
) -> np.ndarray:
    """Covariance of boundary ``i`` at one set of places with boundary ``i`` at another, for
    the shallowest ``levels`` boundaries, built one unit at a time.

    Parameters
    ----------
    h_m : (na, nb) float
        Distances between the places.
    std_a, std_b : (na, B), (nb, B) float
        Thickness std of every unit at each place.
    levels : int
        Boundaries wanted (0..levels-1).

    Returns
    -------
    (levels, na, nb) float
        ``cum[i] = sum over units i' <= i of s_i'(a) s_i'(b) rho_i'(h)``: the covariance of
        boundaries j and k is ``cum[min(j, k)]``.
    """
    cum = np.empty((levels, *h_m.shape))
    acc = np.zeros(h_m.shape)
    for i in range(levels):
        rho = correlate_unit(ground.units[i].correlation, h_m)
        rho *= std_a[:, i, None]
        rho *= std_b[None, :, i]
        acc += rho
        cum[i] = acc
    return cum


def distinct_spots(xy_obs: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The distinct places of readings: a probe reads several boundaries at one spot.

    Parameters
    ----------
    xy_obs : (m, 2) float
        Reading points.

    Returns
    -------
    spots : (u, 2) float
        Distinct points.
    spot_of : (m,) int
        Spot of each reading.
    first : (u,) int
        One reading at each spot (for the fields, which depend on the spot only).
    """
    spots, spot_of = np.unique(
        np.asarray(xy_obs, float).reshape(-1, 2), axis=0, return_inverse=True
    )
    spot_of = spot_of.reshape(-1)
    first = np.zeros(len(spots), dtype=int)
    first[spot_of] = np.arange(len(spot_of))
    return spots, spot_of, first


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
    if m == 0:
        return np.empty((0, B, n))
    # A probe reads several boundaries at one spot: correlate each distinct spot once; a
    # reading of boundary j has covariance cum[min(j, k), s] with boundary k at the points.
    spots, spot_of, first = distinct_spots(xy_obs)
    s_spot = fields_obs.std_m[first]  # (u, B); fields depend on the spot only
    h = pairwise_distance_m(spots, xy_pts)  # (u, n)
    if fields_obs.coreg is not None:
        return _cross_coregionalised(ground, bnd_obs, spot_of, fields_obs, h, fields_pts)
    # level min(j, k) <= j never passes the deepest boundary read
    cum = cumulative_unit_covariance(ground, h, s_spot, fields_pts.std_m, int(bnd_obs.max()) + 1)
    level = np.minimum(bnd_obs[:, None], np.arange(B)[None, :])  # (m, B)
    return cum[level, spot_of[:, None]]


def _cross_coregionalised(ground, bnd_obs, spot_of, fields_obs, h, fields_pts):
    """:func:`cross_covariance_all` for correlated thicknesses: ``(m, B, n)``."""
    load_obs = boundary_loadings(fields_obs)[np.arange(len(bnd_obs)), bnd_obs]  # (m, B)
    load_pts = boundary_loadings(fields_pts)  # (n, B, B)
    out = np.zeros((len(bnd_obs), ground.n_boundaries, h.shape[1]))
    for i in range(ground.n_boundaries):
        rho = correlate_unit(ground.units[i].correlation, h)[spot_of]  # (m, n)
        out += (
            load_obs[:, i, None, None]
            * rho[:, None, :]
            * load_pts[None, :, :, i].transpose(0, 2, 1)
        )
    return out
