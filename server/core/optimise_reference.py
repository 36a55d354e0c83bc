"""Brute-force greedy: the reference the fast optimiser is checked against.

For every candidate at every step it extends the posterior state by the candidate's readings
(a block Cholesky update against all readings so far) and predicts every target again, with
none of the cached cross-covariances of ``server.core.optimise``. Slow by design; used by the
tests and by ``benchmarks/optimise.py`` only.
"""

from __future__ import annotations

import numpy as np

from server.core.evaluate import VAR_FLOOR_M2
from server.core.optimise import MIN_GAIN_BITS, GreedyProblem, Pick
from server.core.posterior import Observations


def greedy_reference(
    problem: GreedyProblem,
    allowed: np.ndarray,
    budget_left: float,
    min_spacing_m: float,
    max_picks: int,
) -> tuple[Pick, ...]:
    """The first ``max_picks`` picks of the greedy search, re-solving for every candidate.

    Same rules as :func:`server.core.optimise.greedy_run` (gain per cost, budget, spacing,
    lowest index on ties), started from the existing probes only.
    """
    cand, t = problem.cand, problem.targets
    real = t.slot_cell >= 0
    omega = problem._slot_omega()[real]
    sc, sb = t.slot_cell[real], t.slot_bnd[real]
    state = problem.analysis.baseline
    pred = state.predict(t.cells)
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
        var = np.maximum(pred.var_m2[sc, sb], VAR_FLOOR_M2)
        best, best_ratio, best_gain = None, 0.0, 0.0
        for l, j in zip(*np.nonzero(active), strict=True):
            new = state.extend(readings(l, j)).predict(t.cells, base=pred)
            after = np.maximum(new.var_m2[sc, sb], VAR_FLOOR_M2)
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
        pred = state.predict(t.cells, base=pred)
        dist_ok &= np.hypot(*(cand.local - cand.local[l]).T) >= min_spacing_m
    return tuple(picks)
