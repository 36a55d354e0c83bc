"""The optimiser's start beyond exact conditioning: covariances explained by many readings,
tile by tile.

The greedy search (``probewise.core.greedy``) starts from the posterior given the existing
readings: the covariance of every candidate location-boundary with every target cell average,
the targets' variances, and the covariance among the candidates. Exactly, all three come from
whitening against the Cholesky factor of *all* readings. Beyond the thresholds of
``probewise.core.local_conditioning`` the same local conditioning as the evaluation is used:

- a target cell's variance and its covariance with every candidate are conditioned on the
  readings of the cell's tile (its ``nearest_spots`` nearest existing spots);
- a candidate's covariance with every other candidate is conditioned on the readings of the
  candidate's own tile, then the matrix is made symmetric.

Each is a Gaussian conditioned on a subset of the readings (screening effect; Vecchia 1988,
Katzfuss and Guinness 2021; docs/model.md "Many readings"), so the explained covariance is
never more than the exact one on the diagonal. The symmetric matrix of explained covariance
among candidates is factored by its eigenvalues (negative ones, from tiles that disagree,
dropped) into the low-rank factor the greedy keeps.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.linalg import solve_triangular

from probewise.core.blocks import CellBlocks, block_cross_covariance
from probewise.core.covariance import cross_covariance_all
from probewise.core.field import UnitFields
from probewise.core.local_conditioning import (
    MAX_TILE_TARGETS,
    LocalState,
    group_tiles,
    one_blas_thread,
    take_blocks,
)
from probewise.core.posterior import PosteriorState

EIGEN_FLOOR = 1e-10  # eigenvalues below this share of the largest are dropped from the factor


@dataclass(frozen=True, eq=False)
class LocalExplained:
    """What the existing readings explain, conditioned tile by tile.

    Attributes
    ----------
    cand_cells : (L, B, C, B) float
        Explained covariance of candidate location-boundary ``(l, b)`` with the cell average
        ``(c, k)`` (m2).
    cell_var_m2 : (C, B) float
        Posterior variance of the cell averages.
    cand_factor : (L, B, R) float
        ``F`` with ``F F^T`` the explained covariance among candidate location-boundaries
        (index ``l B + b``), ``R`` at most ``L B``.
    """

    cand_cells: np.ndarray
    cell_var_m2: np.ndarray
    cand_factor: np.ndarray


def whiten(state_t: PosteriorState, cross: np.ndarray) -> np.ndarray:
    """``L^-1 cross`` for a cross-covariance ``(r, B, n)`` of the state's readings."""
    r = cross.shape[0]
    flat = solve_triangular(state_t.chol, cross.reshape(r, -1), lower=True, check_finite=False)
    return flat.reshape(cross.shape)


def explain_locally(
    state: LocalState,
    cand_xy: np.ndarray,
    cand_fields: UnitFields,
    blocks: CellBlocks,
    on_progress: Callable[[float], None] | None = None,
) -> LocalExplained:
    """Covariances the existing readings explain among candidates and target cells.

    Parameters
    ----------
    state : LocalState
        The existing readings, conditioned on locally.
    cand_xy : (L, 2) float
        Candidate locations (local coordinates).
    cand_fields : UnitFields
        Thickness priors at ``cand_xy``.
    blocks : CellBlocks
        The target cells (``C``).
    on_progress : callable(float), optional
        Share of tiles done.

    Returns
    -------
    LocalExplained
    """
    with one_blas_thread():
        return _explain(state, cand_xy, cand_fields, blocks, on_progress)


def _explain(state, cand_xy, cand_fields, blocks, on_progress) -> LocalExplained:
    """:func:`explain_locally`, on the current BLAS threads."""
    ground = state.ground
    L, B, C = len(cand_xy), ground.n_boundaries, blocks.n_cells
    cand_cells = np.zeros((L, B, C, B))
    cell_var = blocks.prior_var_m2.copy()
    cells = group_tiles(blocks.xy, state.tile_m, MAX_TILE_TARGETS)
    cands = group_tiles(cand_xy, state.tile_m, MAX_TILE_TARGETS)
    total, done = len(cells) + len(cands), 0

    def cand_white(state_t):
        obs, f_obs = state_t.observations[0], state_t.fields[0]
        cross = cross_covariance_all(ground, obs.xy, obs.boundary, f_obs, cand_xy, cand_fields)
        return whiten(state_t, cross)  # (r, B, L)

    half = 0.5 * blocks.spacing_m
    for idx in cells:
        tile = take_blocks(blocks, idx)
        state_t = state.exact_near(tile.xy.min(axis=0) - half, tile.xy.max(axis=0) + half)
        obs, f_obs = state_t.observations[0], state_t.fields[0]
        w_t = whiten(state_t, block_cross_covariance(ground, obs.xy, obs.boundary, f_obs, tile))
        w_c = cand_white(state_t)
        r, n = w_t.shape[0], len(idx)
        explained = (w_c.reshape(r, B * L).T @ w_t.reshape(r, B * n)).reshape(B, L, B, n)
        cand_cells[:, :, idx, :] = explained.transpose(1, 0, 3, 2)
        cell_var[idx] -= np.einsum("rbn,rbn->nb", w_t, w_t)
        done += 1
        if on_progress is not None:
            on_progress(done / total)
    among = np.zeros((L * B, L * B))
    for idx in cands:
        state_t = state.exact_near(cand_xy[idx].min(axis=0), cand_xy[idx].max(axis=0))
        w = cand_white(state_t).transpose(0, 2, 1).reshape(-1, L * B)  # index l B + b
        rows = (idx[:, None] * B + np.arange(B)[None, :]).reshape(-1)
        among[rows] = w[:, rows].T @ w
        done += 1
        if on_progress is not None:
            on_progress(done / total)
    return LocalExplained(
        cand_cells, np.maximum(cell_var, 0.0), factor_symmetric(among).reshape(L, B, -1)
    )


def factor_symmetric(a: np.ndarray) -> np.ndarray:
    """``F (n, R)`` with ``F F^T`` the positive part of the symmetric part of ``a (n, n)``."""
    sym = 0.5 * (a + a.T)
    if sym.size == 0:
        return np.zeros((len(a), 0))
    values, vectors = np.linalg.eigh(sym)
    keep = values > EIGEN_FLOOR * max(float(values[-1]), 0.0)
    return vectors[:, keep] * np.sqrt(values[keep])[None, :]
