"""The greedy search's state: targets (cell averages of the boundaries of interest), the
posterior covariance of candidates with targets, exact low-rank updates per pick, and one greedy
run (docs/optimiser.md)."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.linalg import solve_triangular
from scipy.linalg.blas import dgemm

from probewise.core.analysis import ProjectAnalysis
from probewise.core.blocks import CellBlocks, block_unit_terms, cell_blocks, predict_cells
from probewise.core.correlation import correlate_unit
from probewise.core.covariance import boundary_covariance
from probewise.core.evaluate import layout_cost
from probewise.core.field import UnitFields, unit_fields
from probewise.core.greedy_kernel import BOUND_SLACK, FOLD, Q_MIN, kernel_for, plan_runs
from probewise.core.grid import EvaluationGrid
from probewise.core.local_conditioning import LocalState
from probewise.core.local_cross import explain_locally
from probewise.core.model import Layout
from probewise.core.optimise_types import (
    KERNEL_LOCK,
    MIN_GAIN_BITS,
    Candidates,
    OptimiseError,
    Pick,
)
from probewise.core.planning import plan_probes, planned_observations


@dataclass(frozen=True, eq=False)
class Targets:
    """Targets of the objective, laid out in padded slots of equal weight.

    ``cells (C, 2)`` local cell centres, ``fields`` their priors, ``blocks`` the cells as
    areas (a target is the cell average of a boundary, ``probewise.core.blocks``), ``boundaries``
    of interest ``(K,)`` and ``slot_cell``/``slot_bnd`` ``(S,)`` (-1 on pad slots), runs for
    the kernel.
    """

    cells: np.ndarray
    fields: UnitFields
    blocks: CellBlocks
    boundaries: np.ndarray
    omega: np.ndarray
    slot_cell: np.ndarray
    slot_bnd: np.ndarray
    run_start: np.ndarray
    run_stop: np.ndarray
    run_omega: np.ndarray


def build_targets(analysis: ProjectAnalysis, grid: EvaluationGrid) -> Targets:
    """Targets (cell average, boundary of interest) with weight ``w_k * w_cell / sum(w_cell)``,
    so that the kernel's total equals the information gain of docs/model.md on this grid."""
    boi = analysis.ground.boundaries_of_interest
    if not boi:
        raise OptimiseError("the model has no boundary of interest to optimise for")
    w_cell = grid.weight / grid.weight.sum()
    bnds = np.array([b.boundary for b in boi], dtype=int)
    omega = np.concatenate([b.weight * w_cell for b in boi])  # (K * C,) boundary-major
    slot_target, rs, re_, rw = plan_runs(omega)
    C = grid.n_cells
    real = slot_target >= 0
    slot_cell = np.where(real, slot_target % C, -1)
    slot_bnd = np.where(real, bnds[np.maximum(slot_target, 0) // C], -1)
    blocks = cell_blocks(analysis.ground, grid.xy, grid.spacing_m, analysis.origin)
    return Targets(grid.xy, blocks.fields, blocks, bnds, omega, slot_cell, slot_bnd, rs, re_, rw)


def forward_substitute(low: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """``low^-1 rhs`` for a small lower-triangular ``low (m, m)`` and a wide ``rhs (m, n)``.

    Row by row, vectorised over the columns: for the few readings of one probe this is much
    faster than a LAPACK call on a wide right-hand side.
    """
    if low.shape[0] > 16:
        return solve_triangular(low, rhs, lower=True, check_finite=False)
    out = np.empty_like(rhs, dtype=float)
    for i in range(low.shape[0]):
        row = rhs[i] - low[i, :i] @ out[:i] if i else rhs[i].astype(float)
        out[i] = row / low[i, i]
    return out


def _unit_correlations(ground, xy_a: np.ndarray, xy_b: np.ndarray, fa, fb) -> list[np.ndarray]:
    """Per unit ``s_i(a) s_i(b) rho_i(|a - b|)``: list of ``(na, nb)``."""
    h = np.sqrt(((xy_a[:, None, :] - xy_b[None, :, :]) ** 2).sum(axis=2))
    out = []
    for i in range(ground.n_boundaries):
        term = correlate_unit(ground.units[i].correlation, h)
        term *= fa.std_m[:, i][:, None]
        term *= fb.std_m[:, i][None, :]
        out.append(term)
    return out


class GreedyState:
    """Posterior quantities the greedy search keeps up to date (see module docstring).

    ``M (B, L, S)``: covariance of each candidate location-boundary with each target slot,
    boundary-major so that the kernel gets one array per boundary; ``P (L, B, B)``: covariance
    among the boundaries at each location; ``V (S,)``: target variances (1 on pad slots);
    ``F (L, B, R)``: whitened covariance of every reading so far with the candidate
    location-boundaries (room for more readings past ``n_rows``), so that the covariance of a
    new pick with every candidate is ``prior - F F[pick]^T``; ``G (L, B, B)``, ``H (B, S)``:
    the pending rank-k update ``M[b, l] -= G[l, b] @ H`` of the last pick (applied by the
    kernel while it scores).
    """

    def __init__(self, M, P, V, F, n_rows):
        self.M, self.P, self.V, self.F, self.n_rows = M, P, V, F, n_rows
        B, L, S = M.shape
        self.G = np.zeros((L, B, B))
        self.H = np.zeros((B, S))
        self.pending = False

    def copy(self) -> GreedyState:
        out = GreedyState(self.M.copy(), self.P.copy(), self.V.copy(), self.F.copy(), self.n_rows)
        out.G, out.H, out.pending = self.G.copy(), self.H.copy(), self.pending
        return out

    def flush(self) -> None:
        """Apply a pending update to ``M`` (the kernel normally does it while scoring)."""
        if self.pending:
            for b in range(self.M.shape[0]):  # one matrix product per boundary (BLAS)
                self.M[b] -= self.G[:, b, :] @ self.H
            self.pending = False

    def reserve_rows(self, count: int) -> None:
        """Make room in ``F`` for ``count`` more readings."""
        need = self.n_rows + count
        if need > self.F.shape[2]:
            grown = np.zeros((*self.F.shape[:2], max(need, 2 * self.F.shape[2])))
            grown[:, :, : self.n_rows] = self.F[:, :, : self.n_rows]
            self.F = grown

    def _append_rows(self, rows: np.ndarray) -> None:
        """Append readings ``rows (L, B, m)`` to ``F``."""
        self.reserve_rows(rows.shape[2])
        self.F[:, :, self.n_rows : self.n_rows + rows.shape[2]] = rows
        self.n_rows += rows.shape[2]

    def apply(self, chol: np.ndarray, cov_cand: np.ndarray, cov_slots: np.ndarray) -> None:
        """Condition on a block of ``m`` readings.

        Parameters
        ----------
        chol : (m, m) float
            Lower Cholesky factor of the block's current posterior covariance plus noise.
        cov_cand : (L, B, m) float
            Current posterior covariance of every candidate location-boundary with the block.
        cov_slots : (m, S) float
            Current posterior covariance of the block with every target slot.
        """
        L, B, m = cov_cand.shape
        g = forward_substitute(chol, cov_cand.reshape(L * B, m).T).T.reshape(L, B, m)
        h = forward_substitute(chol, cov_slots)
        self.flush()
        self.V -= np.einsum("qs,qs->s", h, h)
        self.P -= np.einsum("lbq,lcq->lbc", g, g)
        self._append_rows(g)
        if m <= B:
            self.G[:] = 0.0
            self.H[:] = 0.0
            self.G[:, :, :m] = g
            self.H[:m] = h
            self.pending = True
        else:  # a large block (a hand-made layout): apply at once
            self.M -= np.einsum("lbq,qs->bls", g, h)


class GreedyProblem:
    """Everything fixed across the greedy runs of one optimisation."""

    def __init__(self, analysis: ProjectAnalysis, cand: Candidates, targets: Targets):
        self.analysis = analysis
        self.ground = analysis.ground
        self.cand = cand
        self.targets = targets
        self.B = self.ground.n_boundaries
        self.cand_fields = unit_fields(self.ground, cand.local, analysis.origin)
        self.base_state = self._initial_state()
        self.observes = cand.observes  # (L, J, B) bool, computed once
        self.noise = np.where(self.observes, cand.noise_var, 0.0)  # (L, J, B), 0 unobserved
        self.group_start = targets.run_start // FOLD
        self.group_stop = targets.run_stop // FOLD
        self.kernel = kernel_for(self.B)

    def _prior_cand_slots(self) -> np.ndarray:
        """Prior covariance of candidate location-boundaries with target slots ``(B, L, S)``
        (a point with a cell average)."""
        t = self.targets
        terms = block_unit_terms(self.ground, self.cand.local, self.cand_fields.std_m, t.blocks)
        cum = np.cumsum(terms, axis=0, out=terms)  # (B, L, C): sum over units 0..i
        L, S = len(self.cand.local), len(t.slot_cell)
        out = np.zeros((self.B, L, S))
        real = t.slot_cell >= 0
        for b in range(self.B):
            for k in np.unique(t.slot_bnd[real]):
                sel = np.flatnonzero(real & (t.slot_bnd == k))
                out[b][:, sel] = cum[min(b, k)][:, t.slot_cell[sel]]
        return out

    def _initial_state(self) -> GreedyState:
        t = self.targets
        base = self.analysis.baseline
        if isinstance(base, LocalState):  # many readings: conditioned tile by tile
            return self._initial_state_local(base)
        pred_c = base.predict(self.cand.local)
        pred_t = self.base_cells = predict_cells(base, t.blocks)  # reused by apply_layout
        white_c = np.concatenate(pred_c.white, axis=0) if pred_c.white else None  # (m, B, L)
        M = self.derive_slots(self._prior_cand_slots())
        real = t.slot_cell >= 0
        V = np.ones(len(t.slot_cell))
        V[real] = pred_t.var_m2[t.slot_cell[real], t.slot_bnd[real]]
        L = len(self.cand.local)
        F = np.zeros((L, self.B, 0))
        if white_c is not None and white_c.shape[0]:
            white_t = np.concatenate(pred_t.white, axis=0)  # (m, B, C)
            slots = np.zeros((white_t.shape[0], len(t.slot_cell)))
            slots[:, real] = white_t[:, t.slot_bnd[real], t.slot_cell[real]]
            slots = self.derive_slots(slots)
            M = np.ascontiguousarray(M)
            for b in range(self.B):  # M[b] -= white_c[:, b].T @ slots in place (BLAS)
                wb = np.ascontiguousarray(white_c[:, b, :])  # (m, L)
                dgemm(-1.0, slots.T, wb.T, 1.0, M[b].T, 0, 1, 1)
            F = np.ascontiguousarray(white_c.transpose(2, 1, 0))  # (L, B, m)
        return self._start_state(M, V, F)

    def _start_state(self, M: np.ndarray, V: np.ndarray, F: np.ndarray) -> GreedyState:
        """The state from ``M (B, L, S)``, ``V (S,)`` and ``F (L, B, R)``, the factor of what
        the existing readings explain among the candidates (``P`` is the prior at each
        location less ``F F^T``)."""
        L = len(self.cand.local)
        var_cum = np.cumsum(self.cand_fields.std_m**2, axis=1)  # (L, B)
        P = var_cum[:, np.minimum.outer(np.arange(self.B), np.arange(self.B))]  # (L, B, B)
        P -= np.matmul(F, F.transpose(0, 2, 1))
        F_store = np.zeros((L, self.B, max(64, 2 * F.shape[2])))
        F_store[:, :, : F.shape[2]] = F
        return GreedyState(np.ascontiguousarray(M), P, V, F_store, F.shape[2])

    def _initial_state_local(self, base: LocalState) -> GreedyState:
        """The start of the search beyond exact conditioning (``probewise.core.local_cross``):
        the covariances the existing readings explain, tile by tile, instead of whitened
        against the factor of all readings."""
        t = self.targets
        ex = explain_locally(base, self.cand.local, self.cand_fields, t.blocks)
        L, S = len(self.cand.local), len(t.slot_cell)
        real = t.slot_cell >= 0
        sc, sb = t.slot_cell[real], t.slot_bnd[real]
        explained = np.zeros((self.B, L, S))
        explained[:, :, real] = ex.cand_cells[:, :, sc, sb].transpose(1, 0, 2)
        M = self.derive_slots(self._prior_cand_slots()) - self.derive_slots(explained)
        V = np.ones(S)
        V[real] = ex.cell_var_m2[sc, sb]
        return self._start_state(M, V, ex.cand_factor)

    def derive_slots(self, cov: np.ndarray) -> np.ndarray:
        """Fill the slots that are linear functionals of other slots (none here; the net-value
        search, ``probewise.core.netvalue``, adds element averages): ``(..., S)`` in place."""
        return cov

    # -- scoring -------------------------------------------------------------------------
    def _search(self, state: GreedyState, active: np.ndarray, score_all: bool):
        V = state.V
        inv_v = np.where(V > 0, 1.0 / np.maximum(V, 1e-300), 0.0)
        gain = np.full(active.shape, -1.0)
        with KERNEL_LOCK:
            best, _ = self.kernel.search(
                *state.M,  # one array per boundary
                inv_v,
                self.group_start,
                self.group_stop,
                self.targets.run_omega,
                state.P,
                self.noise,
                self.observes,
                np.ascontiguousarray(active),
                self.cand.cost,
                state.G,
                state.H,
                state.pending,
                Q_MIN,
                MIN_GAIN_BITS,
                BOUND_SLACK,
                score_all,
                gain,
            )
        state.pending = False  # the kernel applied it to every row still read
        return int(best), gain

    def score(self, state: GreedyState, active: np.ndarray) -> np.ndarray:
        """Information gain (bits) of every candidate: ``(L, J)``; -1 where inactive.

        Scores every active candidate (for checks); the greedy search uses
        :meth:`best_candidate`, which finds the same best one without scoring them all.
        """
        return self._search(state, active, True)[1]

    def best_candidate(self, state: GreedyState, active: np.ndarray):
        """The active candidate with the most gain per cost: ``(l, j, gain_bits)``, or None
        when none gains more than ``MIN_GAIN_BITS``. Ties go to the lowest ``l * J + j``."""
        best, gain = self._search(state, active, False)
        if best < 0:
            return None
        l, j = divmod(best, active.shape[1])
        return l, j, float(gain[l, j])

    # -- updates -------------------------------------------------------------------------
    def _prior_cand_point(self, xy_local: np.ndarray, bnds: np.ndarray) -> np.ndarray:
        """Prior covariance of every candidate location-boundary with readings of ``bnds``
        at points ``xy_local (m, 2)``: ``(L, B, m)``."""
        fields = unit_fields(self.ground, xy_local, self.analysis.origin)
        terms = np.stack(
            _unit_correlations(self.ground, self.cand.local, xy_local, self.cand_fields, fields)
        )  # (B units, L, m)
        cum = np.cumsum(terms, axis=0)
        idx = np.minimum.outer(np.arange(self.B), bnds)  # (B, m)
        return cum[idx, :, np.arange(len(bnds))[None, :]].transpose(2, 0, 1)

    def _pick_terms(self, l: int) -> np.ndarray:
        """Per unit ``s_i(l') s_i(l) rho_i(|x_l' - x_l|)`` for every candidate location
        ``l'``: ``(B, L)``, the prior covariance of candidate ``l``'s readings by unit."""
        d = self.cand.local - self.cand.local[l]
        h = np.sqrt(np.einsum("ij,ij->i", d, d))
        std = self.cand_fields.std_m
        terms = np.empty((self.B, len(h)))
        for i in range(self.B):
            terms[i] = correlate_unit(self.ground.units[i].correlation, h)
            terms[i] *= std[:, i]
            terms[i] *= std[l, i]
        return terms

    def apply_pick(self, state: GreedyState, l: int, j: int) -> None:
        """Condition ``state`` on candidate ``(l, j)``'s readings (exact rank-m update)."""
        obs = np.flatnonzero(self.observes[l, j])
        state.flush()
        state.reserve_rows(len(obs))
        self.kernel.condition_on_pick(
            state.F,
            state.n_rows,
            l,
            obs,
            self.cand.noise_var[l, j, obs],
            self._pick_terms(l),
            state.P,
            state.M[obs, l, :],
            state.V,
            state.G,
            state.H,
        )
        state.n_rows += len(obs)
        state.pending = True

    def layout_cost(self, layout: Layout) -> float:
        """Cost of a hand-made layout, mobilisation included (as ``evaluate`` reports it)."""
        plans = plan_probes(
            self.ground, self.analysis.methods, self.analysis.baseline, layout.probes
        )
        return layout_cost(plans, self.analysis.methods, self.analysis.project.costs)[0]

    def apply_layout(self, state: GreedyState, layout: Layout) -> tuple[float, float]:
        """Condition ``state`` on a hand-made layout's readings; return (cost, gain bits)."""
        if isinstance(self.analysis.baseline, LocalState):  # needs the factor of all readings
            what = "starting from a hand-made layout"
            raise OptimiseError(self.analysis.baseline.exact_needed(what), "existing")
        plans = plan_probes(
            self.ground, self.analysis.methods, self.analysis.baseline, layout.probes
        )
        cost = layout_cost(plans, self.analysis.methods, self.analysis.project.costs)[0]
        obs = planned_observations(plans, self.analysis.methods, self.analysis.origin)
        if obs.size == 0:
            return cost, 0.0
        base = self.analysis.baseline
        # covariance among the block and with the slots, given the existing probes only
        t = self.targets
        pred_t = self.base_cells
        white_o = base.predict(obs.xy)  # whitened blocks at the readings' points
        fields_o = white_o.fields
        k_oo = boundary_covariance(
            self.ground, obs.xy, obs.boundary, fields_o, obs.xy, obs.boundary, fields_o
        )
        w_o = self._white_at(white_o, obs.boundary)  # (m_e, m)
        k_oo = k_oo - w_o.T @ w_o + np.diag(obs.noise_std_m**2)
        chol = np.linalg.cholesky(0.5 * (k_oo + k_oo.T) + 1e-12 * np.eye(len(k_oo)))
        cov_cand = self._prior_cand_point(obs.xy, obs.boundary)
        R = state.n_rows
        cov_cand -= np.einsum("lbr,rm->lbm", state.F[:, :, :R], w_o)
        # slots: prior covariance of readings with targets minus the existing probes' part
        real = t.slot_cell >= 0
        terms = block_unit_terms(self.ground, obs.xy, fields_o.std_m, t.blocks)
        cum = np.cumsum(terms, axis=0)  # (B, m, C), readings with cell averages
        cov_slots = np.zeros((obs.size, len(t.slot_cell)))
        sb, sc = t.slot_bnd[real], t.slot_cell[real]
        cov_slots[:, real] = cum[
            np.minimum(obs.boundary[:, None], sb[None, :]),
            np.arange(obs.size)[:, None],
            sc[None, :],
        ]
        if pred_t.white:
            white_t = np.concatenate(pred_t.white, axis=0)
            cov_slots[:, real] -= w_o.T @ white_t[:, sb, sc]
        cov_slots = self.derive_slots(cov_slots)
        before = state.V.copy()
        state.flush()
        state.apply(chol, cov_cand, cov_slots)
        gain = float(
            np.sum(self._slot_omega() * 0.5 * np.log2(before / np.maximum(state.V, 1e-300)))
        )
        return cost, gain

    def _white_at(self, pred, bnds: np.ndarray) -> np.ndarray:
        """Whitened covariance of the existing readings with readings ``bnds`` at the
        prediction's points: ``(m_e, m)``."""
        if not pred.white:
            return np.zeros((0, len(bnds)))
        w = np.concatenate(pred.white, axis=0)  # (m_e, B, m)
        return w[:, bnds, np.arange(len(bnds))]

    def gain_bits(self, var_before: np.ndarray, var_after: np.ndarray) -> float:
        """Information gain (bits) of going from target variances ``var_before`` to
        ``var_after`` (both ``(S,)``, as ``GreedyState.V``)."""
        ratio = var_before / np.maximum(var_after, 1e-300)
        return float(np.sum(self._slot_omega() * 0.5 * np.log2(ratio)))

    def _slot_omega(self) -> np.ndarray:
        t = self.targets
        out = np.zeros(len(t.slot_cell))
        for a, b, w in zip(t.run_start, t.run_stop, t.run_omega, strict=True):
            out[a:b] = w * 2.0 * math.log(2.0)  # back from bits-scaled to plain weights
        out[t.slot_cell < 0] = 0.0
        return out


def greedy_run(
    problem: GreedyProblem,
    state: GreedyState,
    allowed: np.ndarray,
    budget_left: float,
    min_spacing_m: float,
    taken_xy: np.ndarray | None = None,
    max_picks: int | None = None,
    on_pick: Callable[[int], None] | None = None,
    tracker=None,
    only: np.ndarray | None = None,
) -> tuple[Pick, ...]:
    """Greedy forward selection on gain per cost until nothing more fits.

    Parameters
    ----------
    problem : GreedyProblem
    state : GreedyState
        Updated in place.
    allowed : (J,) bool
        Methods of the mix.
    budget_left : float
        Money left for per-location and per-metre costs.
    min_spacing_m : float
        Least distance from a chosen (or already taken) probe to the next.
    taken_xy : (n, 2) float, optional
        Local coordinates of probes already in the layout (a hand-made start).
    max_picks : int, optional
        Stop after this many picks.
    on_pick : callable, optional
        Called with the number of picks so far; may raise to cancel.
    tracker : probewise.core.requirements.RequirementTracker, optional
        The requirements (updated in place): only candidates its mask allows are picked,
        and each pick records whether the layout then meets every requirement.
    only : (L, J) bool, optional
        Candidates this run may pick from (e.g. those that deliver a test still short).
    """
    cand = problem.cand
    active = cand.valid & allowed[None, :]
    dist_ok = np.ones(len(cand.local), dtype=bool)
    if taken_xy is not None and len(taken_xy):
        for p in taken_xy:
            dist_ok &= np.hypot(*(cand.local - p).T) >= min_spacing_m
    picks: list[Pick] = []
    if only is not None:
        active &= only
    while max_picks is None or len(picks) < max_picks:
        active &= dist_ok[:, None] & (cand.cost <= budget_left + 1e-9)
        now = active if tracker is None else active & tracker.mask()
        if not now.any():
            break
        found = problem.best_candidate(state, now)
        if found is None:
            break
        l, j, gain = found
        meets = True
        if tracker is not None:
            tracker.add(l, j)
            meets = tracker.meets()
        picks.append(Pick(l, j, float(cand.cost[l, j]), gain, meets))
        budget_left -= cand.cost[l, j]
        problem.apply_pick(state, l, j)
        dist_ok &= np.hypot(*(cand.local - cand.local[l]).T) >= min_spacing_m
        if on_pick is not None:
            on_pick(len(picks))
    return tuple(picks)
