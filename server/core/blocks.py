"""Cells as areas: the cell average of every boundary depth (block kriging).

Every cell figure (docs/model.md "Numbers reported for a layout") is the figure of the cell
average of the boundary depth, not of the depth at the cell centre: scored at its centre, a
cell with a probe on it would count as almost exactly known, and a layout's gain would jump
when its probes moved a fraction of a cell. Following Journel and Huijbregts (Mining
Geostatistics, 1978), a cell of side ``g`` is discretised into ``k x k`` sub-points at the
centres of a regular ``k x k`` subdivision (``k = SUBPOINTS_PER_SIDE`` = 4, even, so no
sub-point sits at the centre) and, with ``D_b(cell)`` the mean of ``D_b`` over them:

- block prior mean = mean of the sub-point prior means;
- block prior variance = mean of the prior covariances of all sub-point pairs of the cell;
- covariance of the block with a reading at ``x`` = mean over the sub-points;
- block posterior by the same Gaussian conditioning as a point (``probewise.core.posterior``).

Hard bounds of a cell (for the truncated P5/P95) are those at its centre.

Independent units sum one term per unit (the covariance of boundaries j and k shares units
i <= min(j, k)); correlated thicknesses (a linear model of coregionalisation,
``probewise.core.field.boundary_loadings``) weight each independent field l by the boundary's
loading A_kl at every sub-point instead, so a cell carries ``(q, B, B)`` loadings.

``CellBlocks`` is built once per grid and reused by every state: the baseline and every layout
(``probewise.core.evaluate``) and the optimiser's targets (``probewise.core.optimise``). Covariances
with the sub-points are averaged chunk by chunk so memory stays bounded on large grids.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from probewise.core.correlation import correlate, correlate_unit, pairwise_distance_m
from probewise.core.covariance import distinct_spots
from probewise.core.field import (
    UnitFields,
    boundary_loadings,
    prior_boundary_moments,
    unit_fields,
)
from probewise.core.model import GroundModel
from probewise.core.posterior import PosteriorState, Prediction

SUBPOINTS_PER_SIDE = 4  # k: a cell is k x k sub-points
CHUNK_ENTRIES = 1 << 21  # distances held at once while averaging (16 MiB of float64)


def subpoint_offsets_m(spacing_m: float, per_side: int = SUBPOINTS_PER_SIDE) -> np.ndarray:
    """Offsets of the sub-points from the cell centre: ``(k * k, 2)`` (m).

    Centres of a regular ``k x k`` subdivision of a square cell of side ``spacing_m``.
    """
    if per_side < 1:
        raise ValueError("per_side must be at least 1")
    u = ((np.arange(per_side) + 0.5) / per_side - 0.5) * float(spacing_m)
    gx, gy = np.meshgrid(u, u)
    return np.column_stack([gx.ravel(), gy.ravel()])


@dataclass(frozen=True, eq=False)
class CellBlocks:
    """The cells of a grid as blocks, with their prior moments.

    Attributes
    ----------
    xy : (n, 2) float
        Cell centres, relative to the project origin.
    fields : UnitFields
        Thickness priors at the centres (hard bounds of the cells).
    sub_xy : (n * q, 2) float
        Sub-points, cell by cell (``q = per_side**2`` per cell).
    sub_std_m : (n, q, B) float
        Thickness std of every unit at every sub-point.
    prior_mean_m, prior_var_m2 : (n, B) float
        Block prior mean and variance of every boundary.
    spacing_m : float
        Side of a cell (m).
    per_side : int
    sub_load_m : (n, q, B, B) float or None
        Correlated thicknesses only: loading ``A_kl`` of boundary k on independent field l at
        every sub-point (None for independent units, whose loadings are the stds).
    """

    xy: np.ndarray
    fields: UnitFields
    sub_xy: np.ndarray
    sub_std_m: np.ndarray
    prior_mean_m: np.ndarray
    prior_var_m2: np.ndarray
    spacing_m: float
    per_side: int
    sub_load_m: np.ndarray | None = None

    @property
    def n_cells(self) -> int:
        return int(self.xy.shape[0])

    @property
    def q(self) -> int:
        """Sub-points per cell."""
        return self.per_side * self.per_side


def cell_blocks(
    ground: GroundModel,
    xy: np.ndarray,
    spacing_m: float,
    origin: tuple[float, float],
    per_side: int = SUBPOINTS_PER_SIDE,
) -> CellBlocks:
    """Block prior moments of square cells of side ``spacing_m`` centred on ``xy``.

    Parameters
    ----------
    ground : GroundModel
    xy : (n, 2) float
        Cell centres relative to ``origin``.
    spacing_m : float
        Side of a cell (m).
    origin : (float, float)
        Project coordinates of the local origin (zones are in project coordinates).
    per_side : int
        Sub-points per side of a cell.

    Returns
    -------
    CellBlocks
    """
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    n, B = len(xy), ground.n_boundaries
    offsets = subpoint_offsets_m(spacing_m, per_side)
    q = len(offsets)
    sub_xy = (xy[:, None, :] + offsets[None, :, :]).reshape(-1, 2)
    sub_fields = unit_fields(ground, sub_xy, origin)
    sub_mean, _ = prior_boundary_moments(sub_fields)
    std = sub_fields.std_m.reshape(n, q, B)
    h = pairwise_distance_m(offsets, offsets)  # (q, q), the same in every cell
    load = None
    if sub_fields.coreg is not None:
        load = boundary_loadings(sub_fields).reshape(n, q, B, B)
        prior_var = np.zeros((n, B))
        for i in range(B):
            rho = correlate_unit(ground.units[i].correlation, h)
            # mean over pairs (a, b) of A_ki(a) A_ki(b) rho_i(|a - b|), every boundary k
            spread = np.einsum("nak,ab->nbk", load[:, :, :, i], rho)
            prior_var += np.einsum("nbk,nbk->nk", spread, load[:, :, :, i]) / (q * q)
    else:
        unit_var = np.empty((n, B))
        for i in range(B):
            rho = correlate_unit(ground.units[i].correlation, h)
            # mean over pairs (a, b) of s_i(a) s_i(b) rho_i(|a - b|)
            unit_var[:, i] = np.einsum("na,ab,nb->n", std[:, :, i], rho, std[:, :, i]) / (q * q)
        prior_var = np.cumsum(unit_var, axis=1)
    return CellBlocks(
        xy=xy,
        fields=unit_fields(ground, xy, origin),
        sub_xy=sub_xy,
        sub_std_m=np.ascontiguousarray(std),
        prior_mean_m=sub_mean.reshape(n, q, B).mean(axis=1),
        prior_var_m2=prior_var,
        spacing_m=float(spacing_m),
        per_side=int(per_side),
        sub_load_m=load,
    )


def block_unit_terms(
    ground: GroundModel,
    xy_pts: np.ndarray,
    std_pts: np.ndarray,
    blocks: CellBlocks,
    n_units: int | None = None,
) -> np.ndarray:
    """Per unit, the covariance of a point's thickness with a cell's average thickness.

    Parameters
    ----------
    ground : GroundModel
    xy_pts : (m, 2) float
        Points, same origin as the cells.
    std_pts : (m, B) float
        Thickness std of every unit at the points.
    blocks : CellBlocks
    n_units : int, optional
        Only the first ``n_units`` units (default all).

    Returns
    -------
    (U, m, n) float
        ``out[i, p, c] = s_i(p) * mean over sub-points a of c of s_i(a) rho_i(|p - a|)``; the
        covariance of boundary ``b`` at ``p`` with boundary ``b'`` of cell ``c`` is the sum
        over units ``i <= min(b, b')``.
    """
    xy_pts = np.asarray(xy_pts, dtype=float).reshape(-1, 2)
    m, n, q = len(xy_pts), blocks.n_cells, blocks.q
    units = ground.n_boundaries if n_units is None else int(n_units)
    out = np.empty((units, m, n))
    if m == 0 or n == 0 or units == 0:
        return out
    step = max(1, CHUNK_ENTRIES // (m * q))
    sub = blocks.sub_xy.reshape(n, q, 2)
    for c0 in range(0, n, step):
        c1 = min(n, c0 + step)
        d2 = _squared_distances(xy_pts, sub[c0:c1].reshape(-1, 2))  # (m, (c1 - c0) * q)
        h = np.sqrt(d2)
        rho = np.empty_like(d2)
        for i in range(units):
            corr = ground.units[i].correlation
            _correlate_into(rho, corr.model, h, d2, corr.range_m, corr.nugget)
            # sum over the sub-points of s_i(a) rho_i(|p - a|), one pass
            np.einsum(
                "mcq,cq->mc",
                rho.reshape(m, c1 - c0, q),
                blocks.sub_std_m[c0:c1, :, i],
                out=out[i, :, c0:c1],
            )
    out *= np.asarray(std_pts, dtype=float).T[:units, :, None] / q
    return out


def _squared_distances(xy_a: np.ndarray, xy_b: np.ndarray) -> np.ndarray:
    """``(na, 2), (nb, 2) -> (na, nb)`` squared distances (m2)."""
    d2 = xy_a[:, None, 0] - xy_b[None, :, 0]
    d2 *= d2
    dy = xy_a[:, None, 1] - xy_b[None, :, 1]
    dy *= dy
    d2 += dy
    return d2


def _correlate_into(
    out: np.ndarray, model: str, h: np.ndarray, h2: np.ndarray, range_m: float, nugget: float = 0.0
):
    """``probewise.core.correlation.correlate`` written into ``out``, from the distances ``h``
    and their squares ``h2`` (saves the temporaries of the hottest loop)."""
    if model == "exponential":
        np.multiply(h, -3.0 / range_m, out=out)
        np.exp(out, out=out)
    elif model == "gaussian":
        np.multiply(h2, -3.0 / range_m**2, out=out)
        np.exp(out, out=out)
    elif model == "spherical":
        # 1 - x (1.5 - 0.5 x^2) with x = min(h / r, 1): exactly 0 from the range on
        np.multiply(h, 1.0 / range_m, out=out)
        np.minimum(out, 1.0, out=out)
        poly = out * out
        poly *= -0.5
        poly += 1.5
        poly *= out
        np.subtract(1.0, poly, out=out)
    else:
        out[...] = correlate(model, h, range_m)  # raises on an unknown model
    if nugget:  # only exactly coincident points share the nugget
        out *= 1.0 - nugget
        out += nugget * (h == 0.0)


def block_cross_covariance(
    ground: GroundModel,
    xy_obs: np.ndarray,
    bnd_obs: np.ndarray,
    fields_obs: UnitFields,
    blocks: CellBlocks,
) -> np.ndarray:
    """Covariance of readings with the cell average of every boundary.

    Parameters
    ----------
    ground : GroundModel
    xy_obs : (m, 2) float
        Reading points, same origin as the cells.
    bnd_obs : (m,) int
        Boundary each reading reads.
    fields_obs : UnitFields
        Thickness priors at ``xy_obs``.
    blocks : CellBlocks

    Returns
    -------
    (m, B, n) float
        ``out[j, k, c] = Cov(D_{bnd_obs[j]}(xy_obs[j]), D_k(cell c))`` in m2, laid out as
        ``probewise.core.covariance.cross_covariance_all`` lays out its points.
    """
    bnd_obs = np.asarray(bnd_obs, dtype=int).reshape(-1)
    m, n, B = len(bnd_obs), blocks.n_cells, ground.n_boundaries
    if m == 0:
        return np.empty((0, B, n))
    # a probe reads several boundaries at one spot: average over the sub-points once per spot
    spots, spot_of, first = distinct_spots(xy_obs)
    deepest = int(bnd_obs.max()) + 1  # deeper units never enter these covariances
    if blocks.sub_load_m is not None:
        load_obs = boundary_loadings(fields_obs)[np.arange(m), bnd_obs, :deepest]  # (m, deepest)
        return _block_cross_coregionalised(ground, spots, spot_of, load_obs, blocks)
    terms = block_unit_terms(ground, spots, fields_obs.std_m[first], blocks, deepest)
    cum = np.cumsum(terms, axis=0)  # (deepest, u, n)
    level = np.minimum(bnd_obs[:, None], np.arange(B)[None, :])  # (m, B)
    return cum[level, spot_of[:, None]]


def _block_cross_coregionalised(
    ground: GroundModel,
    spots: np.ndarray,
    spot_of: np.ndarray,
    load_obs: np.ndarray,
    blocks: CellBlocks,
) -> np.ndarray:
    """:func:`block_cross_covariance` for correlated thicknesses: ``(m, B, n)``.

    ``out[j, k, c] = sum_l A_{b_j l}(x_j) * mean over sub-points a of c of A_kl(a) rho_l``,
    with ``load_obs[j, l] = A_{b_j l}(x_j)`` for the fields ``l`` the readings load on.
    """
    m, fields = load_obs.shape
    n, q, B = blocks.n_cells, blocks.q, blocks.sub_load_m.shape[2]
    u = len(spots)
    out = np.zeros((m, B, n))
    step = max(1, CHUNK_ENTRIES // (u * q))
    sub = blocks.sub_xy.reshape(n, q, 2)
    for c0 in range(0, n, step):
        c1 = min(n, c0 + step)
        d2 = _squared_distances(spots, sub[c0:c1].reshape(-1, 2))  # (u, (c1 - c0) * q)
        h = np.sqrt(d2)
        rho = np.empty_like(d2)
        for i in range(fields):
            corr = ground.units[i].correlation
            _correlate_into(rho, corr.model, h, d2, corr.range_m, corr.nugget)
            # mean over the sub-points of A_ki(a) rho_i(|x - a|), every boundary k: (u, B, cc)
            term = np.einsum(
                "ucq,cqk->ukc", rho.reshape(u, c1 - c0, q), blocks.sub_load_m[c0:c1, :, :, i]
            )
            out[:, :, c0:c1] += load_obs[:, i, None, None] * term[spot_of]
    out /= q
    return out


def predict_cells(
    state: PosteriorState, blocks: CellBlocks, base: Prediction | None = None
) -> Prediction:
    """Prior and posterior of the cell average of every boundary.

    Parameters
    ----------
    state : PosteriorState
    blocks : CellBlocks
        Built with the state's ground and origin.
    base : Prediction, optional
        A prediction of the same cells from a state this one extends; its whitened blocks
        are reused and only the new observations are solved.

    Returns
    -------
    Prediction
        ``xy`` and ``fields`` at the cell centres (for the hard bounds); means and variances
        of the cell averages, ``(n, B)``.
    """

    local = getattr(state, "predict_cells", None)  # a local state tiles the cells itself
    if local is not None:
        return local(blocks, base)

    def cross(obs, fields_obs):
        return block_cross_covariance(state.ground, obs.xy, obs.boundary, fields_obs, blocks)

    return state.predict_targets(
        blocks.xy, blocks.fields, blocks.prior_mean_m, blocks.prior_var_m2, cross, base
    )
