"""Brute-force greedy: the reference the fast optimiser is checked against.

For every candidate at every step it extends the posterior state by the candidate's readings
(a block Cholesky update against all readings so far) and predicts every target again, with
none of the cached cross-covariances of ``probewise.core.optimise``. Slow by design; used by the
tests and by ``benchmarks/optimise.py`` only.

A target is the average of a boundary over a cell (docs/model.md "Numbers reported for a
layout"). Independently of ``probewise.core.blocks``, the reference conditions the depths at
the cell's ``k x k`` sub-points (centres of a regular subdivision) and averages: the
covariance of two cell averages is the mean of the covariances of their sub-point pairs, so
the posterior variance of a cell average is the mean of the prior covariances of its
sub-point pairs less the squared norm of the mean of the sub-points' whitened
cross-covariances.
"""

from __future__ import annotations

import numpy as np

from probewise.core.covariance import boundary_covariance
from probewise.core.evaluate import VAR_FLOOR_M2
from probewise.core.field import unit_fields
from probewise.core.optimise import MIN_GAIN_BITS, GreedyProblem, Pick
from probewise.core.posterior import Observations, PosteriorState, Prediction


def cell_subpoints(cells: np.ndarray, spacing_m: float, per_side: int) -> np.ndarray:
    """Sub-points of square cells: ``(C, 2) -> (C * k * k, 2)``, cell by cell."""
    frac = (np.arange(per_side) + 0.5) / per_side - 0.5
    ox, oy = np.meshgrid(frac * spacing_m, frac * spacing_m)
    offsets = np.column_stack([ox.ravel(), oy.ravel()])
    return (cells[:, None, :] + offsets[None, :, :]).reshape(-1, 2)


def cell_prior_variance(state: PosteriorState, sub: np.ndarray, q: int) -> np.ndarray:
    """Prior variance of the cell averages ``(C, B)``: mean of the prior covariances of all
    sub-point pairs of each cell."""
    ground, B = state.ground, state.ground.n_boundaries
    out = np.empty((len(sub) // q, B))
    for c in range(len(out)):
        pts = np.repeat(sub[c * q : (c + 1) * q], B, axis=0)  # (q * B, 2), boundary fastest
        bnd = np.tile(np.arange(B), q)
        f = unit_fields(ground, pts, state.origin)
        k = boundary_covariance(ground, pts, bnd, f, pts, bnd, f)
        for b in range(B):
            out[c, b] = k[np.ix_(bnd == b, bnd == b)].mean()
    return out


def cell_explained(white: np.ndarray, q: int) -> np.ndarray:
    """Variance of the cell averages ``(C, B)`` explained by one block of readings whose
    whitened cross-covariance with the sub-points is ``white (m, B, C * q)``."""
    mean_w = white.reshape(white.shape[0], white.shape[1], -1, q).mean(axis=3)
    return np.einsum("mbc,mbc->cb", mean_w, mean_w)


def cell_variance(prior_var: np.ndarray, pred: Prediction, q: int) -> np.ndarray:
    """Posterior variance of the cell averages ``(C, B)`` from a prediction at the
    sub-points: prior variance less what every block of readings explains."""
    out = prior_var.copy()
    for w in pred.white:
        out -= cell_explained(w, q)
    return np.maximum(out, 0.0)


def greedy_reference(
    problem: GreedyProblem,
    allowed: np.ndarray,
    budget_left: float,
    min_spacing_m: float,
    max_picks: int,
) -> tuple[Pick, ...]:
    """The first ``max_picks`` picks of the greedy search, re-solving for every candidate.

    Same rules as :func:`probewise.core.optimise.greedy_run` (gain per cost, budget, spacing,
    lowest index on ties), started from the existing probes only.
    """
    cand, t = problem.cand, problem.targets
    real = t.slot_cell >= 0
    omega = problem._slot_omega()[real]
    sc, sb = t.slot_cell[real], t.slot_bnd[real]
    state = problem.analysis.baseline
    q = t.blocks.per_side**2
    sub = cell_subpoints(t.cells, t.blocks.spacing_m, t.blocks.per_side)
    prior_var = cell_prior_variance(state, sub, q)
    pred = state.predict(sub)
    active = cand.valid & allowed[None, :]
    dist_ok = np.ones(len(cand.local), dtype=bool)
    picks: list[Pick] = []

    def readings(l: int, j: int) -> Observations:
        obs = np.flatnonzero(cand.observes[l, j])
        return Observations.build(
            np.repeat(cand.local[l][None, :], len(obs), axis=0),
            obs,
            np.sqrt(cand.noise_var[l, j, obs]),
        )

    while len(picks) < max_picks:
        active &= dist_ok[:, None] & (cand.cost <= budget_left + 1e-9)
        current = cell_variance(prior_var, pred, q)
        var = np.maximum(current[sc, sb], VAR_FLOOR_M2)
        best, best_ratio, best_gain = None, 0.0, 0.0
        for l, j in zip(*np.nonzero(active), strict=True):
            new = state.extend(readings(l, j)).predict(sub, base=pred)
            after = np.maximum(current - cell_explained(new.white[-1], q), 0.0)
            after = np.maximum(after[sc, sb], VAR_FLOOR_M2)
            gain = float(np.sum(omega * 0.5 * np.log2(var / after)))
            ratio = gain / max(cand.cost[l, j], 1e-9)
            if gain > MIN_GAIN_BITS and ratio > best_ratio:
                best, best_ratio, best_gain = (int(l), int(j)), ratio, gain
        if best is None:
            break
        l, j = best
        picks.append(Pick(l, j, float(cand.cost[l, j]), best_gain))
        budget_left -= cand.cost[l, j]
        state = state.extend(readings(l, j))
        pred = state.predict(sub, base=pred)
        dist_ok &= np.hypot(*(cand.local - cand.local[l]).T) >= min_spacing_m
    return tuple(picks)
