"""Greedy optimiser: the most information per unit of money, with exact low-rank updates.

docs/model.md "Optimiser". Candidates are a regular grid of locations inside the site and outside
exclusions, times the allowed methods; each candidate's planned depth and observed set are
planned exactly as for evaluation (``server.core.planning``), so the optimiser scores what
``evaluate`` will report. Greedy forward selection picks, at each step, the candidate with
the largest information gain per unit cost (per location + per metre x planned depth), until
nothing more fits the budget; references: greedy variance/entropy reduction for Gaussian
processes (Krause, Singh and Guestrin, JMLR 9, 2008).

Exact incremental updates: the posterior covariance ``M`` between every candidate
location-boundary and every target (the cell average of a boundary of interest over a cell
of the optimisation grid: cells are areas, ``server.core.blocks``) is kept and updated by a
rank-k step after each pick; a candidate is scored from its rows of ``M`` without re-solving
anything. The compiled kernel (``server.core.greedy_kernel``) finds the best candidate in
about one pass over ``M``: an upper bound per location (an envelope probe reading every
boundary with the best precision) and exact scores only for the few candidates whose bound
per cost can still win, so the pick is the one full scoring would make.
``server.core.optimise_reference`` is the brute-force check.

Several budgets can share one :func:`prepare_optimisation` (candidates, covariances), as the
ranking of options does. Long runs report progress through a callback and poll a
``should_stop`` callback between picks (the web's progress bar and cancel button).

Mobilisation makes a method's first probe look expensive, so mixes are handled explicitly:
one greedy run per mix of methods (every subset of the allowed methods of at most
``max_methods_per_mix``), with the mix's mobilisation paid up front; runs are also started
from every hand-made layout that fits the budget (its probes kept, more added), so the result
never gains less than an option the engineer already has. Every prefix of a run is a layout;
the cost-gain curve is the upper envelope of all prefixes, and the best few layouts within
the budget are re-evaluated on the full evaluation grid to choose the answer.
"""

from __future__ import annotations

import itertools
import math
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.linalg import solve_triangular

from server.core.analysis import ProjectAnalysis
from server.core.blocks import CellBlocks, block_unit_terms, cell_blocks, predict_cells
from server.core.correlation import correlate_unit
from server.core.covariance import boundary_covariance
from server.core.evaluate import GridEvaluator, LayoutResult, layout_cost
from server.core.field import UnitFields, unit_fields
from server.core.geometry import points_in_polygon
from server.core.greedy_kernel import BOUND_SLACK, FOLD, Q_MIN, kernel_for, plan_runs
from server.core.grid import EvaluationGrid, evaluation_grid_capped
from server.core.model import CORRELATED_CELLS_PROBLEM, Layout, PlannedProbe, Project
from server.core.planning import plan_probes, planned_observations

# The search runs on all cores; numba's fallback thread pool ("workqueue", used where no
# OpenMP or TBB library is found) aborts the process if two threads enter it at once, and the
# web may run optimisers for two projects concurrently, so searches take turns.
KERNEL_LOCK = threading.Lock()
MIN_GAIN_BITS = 1e-9  # a candidate that buys less than this is not worth a pick
FINALISTS = 4  # layouts re-evaluated on the full grid before choosing
# Each candidate location holds a row of covariances with every target and is planned per
# method: more than this makes a run take minutes for no better answer.
MAX_CANDIDATE_LOCATIONS = 5000


class OptimiseCancelled(Exception):  # noqa: N818 - a signal, not an error
    """Raised inside :func:`optimise` when the caller asks it to stop."""


class OptimiseError(ValueError):
    """The optimiser cannot run: no candidate, or nothing fits the budget (message says).

    ``field`` names the option or model part at fault: ``budget``, ``methods``,
    ``candidate_spacing_m``, ``min_spacing_m`` or ``boundaries_of_interest``.
    """

    def __init__(self, message: str, field: str = "budget"):
        super().__init__(message)
        self.field = field


@dataclass(frozen=True)
class OptimiseOptions:
    """What to optimise for.

    Attributes
    ----------
    budget : float
        Most the layout may cost (currency units), mobilisation included.
    methods : tuple of str, optional
        Method ids the optimiser may use; default all.
    candidate_spacing_m : float, optional
        Spacing of the candidate grid; default chosen so there are about
        ``target_locations`` locations.
    min_spacing_m : float, optional
        Least distance between chosen probes; default the candidate spacing.
    max_cells : int
        Optimise on a coarser copy of the evaluation grid when it has more cells than this.
    target_locations : int
        Number of candidate locations the default spacing aims at.
    max_methods_per_mix : int
        Largest number of methods in one mix.
    warm_start : bool
        Also start runs from the hand-made layouts that fit the budget.
    refine_sweeps : int
        Most exchange sweeps of the refinement (``server.core.refine``); 0 turns it off.
    refine_cells : int
        The refinement scores on the evaluation grid coarsened to at most this many cells.
    refine_work : float
        Most candidate-target covariances the refinement's tried exchanges may sweep (each
        try updates and scores every candidate's row once or twice); bounds its run time on
        large layouts.
    """

    budget: float
    methods: tuple[str, ...] | None = None
    candidate_spacing_m: float | None = None
    min_spacing_m: float | None = None
    max_cells: int = 1500
    target_locations: int = 600
    max_methods_per_mix: int = 3
    warm_start: bool = True
    refine_sweeps: int = 3
    refine_cells: int = 3000
    refine_work: float = 5e8


@dataclass(frozen=True, eq=False)
class Candidates:
    """Candidate probes: ``L`` locations times ``J`` methods.

    Attributes
    ----------
    xy : (L, 2) float
        Project coordinates of the locations.
    local : (L, 2) float
        The same relative to the analysis origin.
    method_ids : tuple of str, length J
    depth_m : (L, J) float
        Planned depth of each candidate.
    cost : (L, J) float
        Per-location + per-metre cost (no mobilisation).
    noise_var : (L, J, B) float
        Reading variance for each boundary the candidate observes; ``nan`` elsewhere.
    valid : (L, J) bool
        Observes at least one boundary.
    """

    xy: np.ndarray
    local: np.ndarray
    method_ids: tuple[str, ...]
    depth_m: np.ndarray
    cost: np.ndarray
    noise_var: np.ndarray
    valid: np.ndarray

    @property
    def observes(self) -> np.ndarray:
        """``(L, J, B)`` bool: boundaries each candidate reads."""
        return np.isfinite(self.noise_var)


@dataclass(frozen=True)
class Pick:
    """One greedy step: candidate (location, method index), its cost and gain (bits)."""

    location: int
    method: int
    cost: float
    gain_bits: float


@dataclass(frozen=True)
class GreedyRun:
    """One greedy run: a mix of methods, optionally started from a hand-made layout."""

    mix: tuple[str, ...]
    start: str | None
    start_cost: float
    start_gain_bits: float
    picks: tuple[Pick, ...]

    def prefixes(self, cand: Candidates, mobilisation: dict[str, float]):
        """``(n_picks, cost, gain)`` of every prefix; cost pays mobilisation of methods used."""
        used: set[str] = set()
        cost, gain = self.start_cost, self.start_gain_bits
        out = [(0, cost, gain)]
        for n, p in enumerate(self.picks, start=1):
            mid = cand.method_ids[p.method]
            if mid not in used:
                used.add(mid)
                cost += mobilisation[mid]
            cost += p.cost
            gain += p.gain_bits
            out.append((n, cost, gain))
        return out


@dataclass(frozen=True)
class Refinement:
    """What the exchange refinement (``server.core.refine``) added to the greedy layout.

    Gains (bits) are on the full evaluation grid, as ``evaluate`` reports them;
    ``refined_gain_bits`` is the returned layout's (the greedy's when refining found nothing
    better). ``moves`` counts the exchanges and additions in the returned layout, ``sweeps``
    the sweeps made and ``candidate_locations`` the locations searched.
    """

    greedy_gain_bits: float
    refined_gain_bits: float
    moves: int
    sweeps: int
    candidate_locations: int
    seconds: float


@dataclass(frozen=True, eq=False)
class OptimiseResult:
    """The chosen layout (evaluated on the full grid), the curve and how it was found.

    ``curve`` is that of the greedy prefixes (gains on the optimisation grid);
    ``refinement`` says what the exchange refinement added to the greedy layout.
    """

    layout: Layout
    result: LayoutResult
    curve: tuple[tuple[float, float], ...]
    runs: tuple[GreedyRun, ...]
    candidates: Candidates
    optimisation_cells: int
    optimisation_spacing_m: float
    candidate_spacing_m: float
    min_spacing_m: float
    seconds: float
    refinement: Refinement | None = None


ProgressFn = Callable[[float, str], None]


def nice_spacing_m(raw_m: float) -> float:
    """Round a spacing up to 1, 2, 2.5 or 5 times a power of ten (m)."""
    if raw_m <= 0 or not math.isfinite(raw_m):
        raise ValueError("spacing must be positive")
    decade = 10.0 ** math.floor(math.log10(raw_m))
    for step in (1.0, 2.0, 2.5, 5.0, 10.0):
        if step * decade >= raw_m * (1 - 1e-12):
            return step * decade
    return 10.0 * decade  # pragma: no cover - loop always returns


def optimisation_grid(project: Project, origin, max_cells: int) -> EvaluationGrid:
    """The evaluation grid, coarsened by a whole factor until it has at most ``max_cells``."""
    return evaluation_grid_capped(project.site, origin, max_cells)[0]


def check_candidate_count(area_m2: float, spacing_m: float, count: int | None = None) -> None:
    """Refuse a candidate grid of more than ``MAX_CANDIDATE_LOCATIONS`` locations.

    Called with the site area before the grid is built (``count`` None: estimated, refused
    only when well over, so an absurd spacing never allocates its grid) and with the count
    after.
    """
    field = "candidate_spacing_m"
    if not (spacing_m > 0 and math.isfinite(spacing_m)):
        raise OptimiseError(f"must be a positive number of metres, not {spacing_m:g}", field)
    estimate = area_m2 / spacing_m**2
    if count is not None:
        over = count > MAX_CANDIDATE_LOCATIONS
    else:
        over = estimate > 2 * MAX_CANDIDATE_LOCATIONS
    if over:
        shown = f"{count:,}" if count is not None else f"about {estimate:,.0f}"
        finest = nice_spacing_m(math.sqrt(area_m2 / MAX_CANDIDATE_LOCATIONS))
        raise OptimiseError(
            f"a candidate spacing of {spacing_m:g} m gives {shown} candidate locations, over "
            f"the limit of {MAX_CANDIDATE_LOCATIONS:,}; use {finest:g} m or more",
            field,
        )


def candidate_locations(project: Project, origin, spacing_m: float) -> np.ndarray:
    """Regular grid of locations inside the site and outside every exclusion: ``(L, 2)``
    in project coordinates (cell centres of a grid aligned to the site bounding box)."""
    site = project.site
    pts = np.vstack(site.outline.rings)
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    nx = max(int(math.ceil((hi[0] - lo[0]) / spacing_m - 1e-9)), 1)
    ny = max(int(math.ceil((hi[1] - lo[1]) / spacing_m - 1e-9)), 1)
    gx, gy = np.meshgrid(
        lo[0] + spacing_m * (np.arange(nx) + 0.5), lo[1] + spacing_m * (np.arange(ny) + 0.5)
    )
    xy = np.column_stack([gx.ravel(), gy.ravel()])
    keep = points_in_polygon(xy, site.outline)
    for excl in site.exclusions:
        keep &= ~points_in_polygon(xy, excl)
    return xy[keep]


def build_candidates(
    analysis: ProjectAnalysis, xy: np.ndarray, method_ids: Sequence[str]
) -> Candidates:
    """Plan every (location, method) candidate against the baseline (existing probes)."""
    methods = analysis.methods
    B = analysis.ground.n_boundaries
    L, J = len(xy), len(method_ids)
    probes = [
        PlannedProbe(f"c{l}-{m}", m, float(x), float(y))
        for l, (x, y) in enumerate(xy)
        for m in method_ids
    ]
    plans = plan_probes(analysis.ground, methods, analysis.baseline, probes)
    depth = np.zeros((L, J))
    cost = np.zeros((L, J))
    noise = np.full((L, J, B), np.nan)
    for n, plan in enumerate(plans):
        l, j = divmod(n, J)
        method = methods[method_ids[j]]
        depth[l, j] = plan.depth_m
        cost[l, j] = method.per_location + method.per_metre * plan.depth_m
        for k in plan.observes:
            noise[l, j, k] = method.precision_m[k] ** 2
    valid = np.isfinite(noise).any(axis=2)
    local = analysis.to_local(xy)
    return Candidates(xy, local, tuple(method_ids), depth, cost, noise, valid)


@dataclass(frozen=True, eq=False)
class Targets:
    """Targets of the objective, laid out in padded slots of equal weight.

    ``cells (C, 2)`` local cell centres, ``fields`` their priors, ``blocks`` the cells as
    areas (a target is the cell average of a boundary, ``server.core.blocks``), ``boundaries``
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
            self.M -= np.einsum("lbq,qs->bls", self.G, self.H)
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
        cum = np.cumsum(terms, axis=0)  # (B, L, C): sum over units 0..i
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
        pred_c = base.predict(self.cand.local)
        pred_t = self.base_cells = predict_cells(base, t.blocks)  # reused by apply_layout
        white_c = np.concatenate(pred_c.white, axis=0) if pred_c.white else None  # (m, B, L)
        M = self._prior_cand_slots()
        real = t.slot_cell >= 0
        V = np.ones(len(t.slot_cell))
        V[real] = pred_t.var_m2[t.slot_cell[real], t.slot_bnd[real]]
        L = len(self.cand.local)
        var_cum = np.cumsum(self.cand_fields.std_m**2, axis=1)  # (L, B)
        idx = np.minimum.outer(np.arange(self.B), np.arange(self.B))
        P = var_cum[:, idx]  # (L, B, B): prior cov at one point
        if white_c is not None and white_c.shape[0]:
            white_t = np.concatenate(pred_t.white, axis=0)  # (m, B, C)
            slots = np.zeros((white_t.shape[0], len(t.slot_cell)))
            slots[:, real] = white_t[:, t.slot_bnd[real], t.slot_cell[real]]
            M -= np.einsum("mbl,ms->bls", white_c, slots)
            P -= np.einsum("mbl,mcl->lbc", white_c, white_c)
            F = white_c.transpose(2, 1, 0)  # (L, B, m)
        else:
            F = np.zeros((L, self.B, 0))
        F_store = np.zeros((L, self.B, max(64, 2 * F.shape[2])))
        F_store[:, :, : F.shape[2]] = F
        return GreedyState(np.ascontiguousarray(M), P, V, F_store, F.shape[2])

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
        return layout_cost(plans, self.analysis.methods)[0]

    def apply_layout(self, state: GreedyState, layout: Layout) -> tuple[float, float]:
        """Condition ``state`` on a hand-made layout's readings; return (cost, gain bits)."""
        plans = plan_probes(
            self.ground, self.analysis.methods, self.analysis.baseline, layout.probes
        )
        cost = layout_cost(plans, self.analysis.methods)[0]
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
    """
    cand = problem.cand
    active = cand.valid & allowed[None, :]
    dist_ok = np.ones(len(cand.local), dtype=bool)
    if taken_xy is not None and len(taken_xy):
        for p in taken_xy:
            dist_ok &= np.hypot(*(cand.local - p).T) >= min_spacing_m
    picks: list[Pick] = []
    while max_picks is None or len(picks) < max_picks:
        active &= dist_ok[:, None] & (cand.cost <= budget_left + 1e-9)
        if not active.any():
            break
        found = problem.best_candidate(state, active)
        if found is None:
            break
        l, j, gain = found
        picks.append(Pick(l, j, float(cand.cost[l, j]), gain))
        budget_left -= cand.cost[l, j]
        problem.apply_pick(state, l, j)
        dist_ok &= np.hypot(*(cand.local - cand.local[l]).T) >= min_spacing_m
        if on_pick is not None:
            on_pick(len(picks))
    return tuple(picks)


def method_mixes(
    method_ids: Sequence[str], mobilisation: dict[str, float], budget: float, max_size: int
) -> list[tuple[str, ...]]:
    """Every mix of at most ``max_size`` methods whose mobilisation fits the budget."""
    mixes = []
    for size in range(1, min(max_size, len(method_ids)) + 1):
        for mix in itertools.combinations(method_ids, size):
            if sum(mobilisation[m] for m in mix) < budget:
                mixes.append(mix)
    return mixes


def layout_from_run(
    problem: GreedyProblem, run: GreedyRun, n_picks: int, start: Layout | None, name: str
) -> Layout:
    """The layout of the first ``n_picks`` picks of a run (after its start layout)."""
    picks = [(p.location, p.method) for p in run.picks[:n_picks]]
    return layout_from_picks(problem.cand, picks, start, name)


def layout_from_picks(
    cand: Candidates, picks: Sequence[tuple[int, int]], start: Layout | None, name: str
) -> Layout:
    """The layout of ``start``'s probes (if any) and candidates ``(location, method)``."""
    probes = list(start.probes) if start is not None else []
    used_ids = {p.id for p in probes}
    counters: dict[str, int] = {}
    for l, j in picks:
        mid = cand.method_ids[j]
        while True:
            counters[mid] = counters.get(mid, 0) + 1
            pid = f"{mid}-O{counters[mid]:02d}"
            if pid not in used_ids:
                break
        used_ids.add(pid)
        x, y = cand.xy[l]
        probes.append(PlannedProbe(pid, mid, float(x), float(y)))
    return Layout(name, tuple(probes))


def upper_envelope(points: Sequence[tuple[float, float]]) -> tuple[tuple[float, float], ...]:
    """Cost-gain points where the gain rises above every cheaper point: the curve."""
    out: list[tuple[float, float]] = []
    best = -math.inf
    for cost, gain in sorted(points, key=lambda p: (p[0], -p[1])):
        if gain > best + 1e-12:
            out.append((float(cost), float(gain)))
            best = gain
    return tuple(out)


@dataclass(eq=False)
class OptimiseSetup:
    """What one optimisation builds before any greedy run, reusable across budgets.

    Built by :func:`prepare_optimisation`; pass it to :func:`optimise` to run several
    budgets (e.g. for a ranking) without planning candidates and covariances again.
    """

    project: Project
    options: OptimiseOptions
    analysis: ProjectAnalysis
    grid: EvaluationGrid
    candidate_spacing_m: float
    min_spacing_m: float
    problem: GreedyProblem
    mobilisation: dict[str, float]
    _evaluator: GridEvaluator | None = None

    @property
    def candidates(self) -> Candidates:
        return self.problem.cand

    @property
    def evaluator(self) -> GridEvaluator:
        """Evaluator on the project's full evaluation grid (built on first use)."""
        if self._evaluator is None:
            self._evaluator = GridEvaluator(self.project, self.analysis)
        return self._evaluator


def prepare_optimisation(
    project: Project, options: OptimiseOptions, progress: ProgressFn | None = None
) -> OptimiseSetup:
    """Check the options, plan the candidates and build the greedy problem.

    ``options.budget`` is not used here. Raises OptimiseError (see :func:`optimise`).
    """
    report = progress or (lambda f, m: None)
    if project.ground.thickness_correlation:  # the greedy updates sum independent units
        raise OptimiseError(CORRELATED_CELLS_PROBLEM, "thickness_correlation")
    analysis = ProjectAnalysis(project)
    methods = analysis.methods
    allowed_ids = tuple(dict.fromkeys(options.methods)) if options.methods else tuple(methods)
    unknown = [m for m in allowed_ids if m not in methods]
    if unknown:
        raise OptimiseError(
            f"no method with id {unknown[0]!r}; methods are {', '.join(methods)}", "methods"
        )
    for value, label in (
        (options.candidate_spacing_m, "candidate_spacing_m"),
        (options.min_spacing_m, "min_spacing_m"),
    ):
        if value is not None and not (math.isfinite(value) and value > 0):
            raise OptimiseError(f"must be a positive number of metres, not {value:g}", label)
    grid = optimisation_grid(project, analysis.origin, options.max_cells)
    spacing = options.candidate_spacing_m
    if spacing is None:
        area = grid.n_cells * grid.cell_area_m2
        spacing = nice_spacing_m(max(math.sqrt(area / options.target_locations), 1e-3))
    min_spacing = options.min_spacing_m if options.min_spacing_m is not None else spacing
    check_candidate_count(grid.n_cells * grid.cell_area_m2, spacing)
    xy = candidate_locations(project, analysis.origin, spacing)
    check_candidate_count(grid.n_cells * grid.cell_area_m2, spacing, len(xy))
    if len(xy) == 0:
        raise OptimiseError(
            "no candidate location: the site (less exclusions) is smaller than the candidate "
            "spacing; use a finer --candidate-spacing",
            "candidate_spacing_m",
        )
    report(0.02, f"planning {len(xy)} locations x {len(allowed_ids)} methods")
    cand = build_candidates(analysis, xy, allowed_ids)
    if not cand.valid.any():
        raise OptimiseError(
            "no allowed method can read any boundary anywhere on the site", "methods"
        )
    targets = build_targets(analysis, grid)
    report(0.05, "building the covariance of candidates and targets")
    problem = GreedyProblem(analysis, cand, targets)
    mob = {m: methods[m].mobilisation for m in allowed_ids}
    return OptimiseSetup(
        project, options, analysis, grid, float(spacing), float(min_spacing), problem, mob
    )


def greedy_jobs(
    project: Project, options: OptimiseOptions, setup: OptimiseSetup
) -> list[tuple[tuple[str, ...], Layout | None]]:
    """The greedy runs to make: one per mix of methods, one per usable hand-made layout."""
    mob, allowed_ids = setup.mobilisation, setup.candidates.method_ids
    jobs: list[tuple[tuple[str, ...], Layout | None]] = [
        (mix, None)
        for mix in method_mixes(allowed_ids, mob, options.budget, options.max_methods_per_mix)
    ]
    if options.warm_start:
        for layout in project.layouts:
            used = tuple(dict.fromkeys(p.method for p in layout.probes))
            if layout.probes and set(used) <= set(allowed_ids):
                jobs.append((used, layout))
    if not jobs:
        raise _no_mobilisation_error(options.budget, mob)
    return jobs


def _no_mobilisation_error(budget: float, mob: dict[str, float]) -> OptimiseError:
    return OptimiseError(
        f"{budget:g} does not cover the mobilisation of any allowed method "
        f"(the cheapest is {min(mob.values()):g})",
        "budget",
    )


def run_greedy_jobs(
    setup: OptimiseSetup,
    budget: float,
    jobs: Sequence[tuple[tuple[str, ...], Layout | None]],
    report: ProgressFn,
    should_stop: Callable[[], bool] | None,
) -> tuple[list[GreedyRun], dict[int, Layout | None]]:
    """Every greedy run of ``jobs``; returns the runs and the start layout of each."""
    analysis, problem, mob = setup.analysis, setup.problem, setup.mobilisation
    cand = problem.cand
    runs: list[GreedyRun] = []
    starts: dict[int, Layout | None] = {}
    for n_job, (mix, start) in enumerate(jobs):
        if should_stop is not None and should_stop():
            raise OptimiseCancelled()
        state = problem.base_state.copy()
        start_cost = start_gain = 0.0
        taken = None
        if start is not None:
            start_cost = problem.layout_cost(start)
            if start_cost > budget:
                continue
            start_cost, start_gain = problem.apply_layout(state, start)
            taken = analysis.to_local(np.array([(p.x, p.y) for p in start.probes]))
            left = budget - start_cost
        else:
            left = budget - sum(mob[m] for m in mix)
        allowed = np.array([m in mix for m in cand.method_ids])
        label = f"from {start.name!r}" if start is not None else "+".join(mix)

        def on_pick(n, n_job=n_job, label=label):
            if should_stop is not None and should_stop():
                raise OptimiseCancelled()
            report(0.05 + 0.75 * (n_job + min(n, 50) / 51) / len(jobs), f"{label}: {n} picks")

        picks = greedy_run(
            problem, state, allowed, left, setup.min_spacing_m, taken, on_pick=on_pick
        )
        starts[len(runs)] = start
        runs.append(GreedyRun(mix, start.name if start else None, start_cost, start_gain, picks))
        report(0.05 + 0.75 * (n_job + 1) / len(jobs), f"{label}: done, {len(picks)} picks")
    return runs, starts


def budget_prefixes(
    runs: Sequence[GreedyRun], cand: Candidates, mob: dict[str, float], budget: float
) -> list[tuple[float, float, int, int]]:
    """``(gain, -cost, run index, n picks)`` of every prefix within the budget."""
    prefixes = []
    for r_idx, run in enumerate(runs):
        for n, cost, gain in run.prefixes(cand, mob):
            if cost <= budget + 1e-9 and (n > 0 or run.start is not None):
                prefixes.append((gain, -cost, r_idx, n))
    if not prefixes:
        if budget <= min(mob.values()):
            raise _no_mobilisation_error(budget, mob)
        raise OptimiseError(
            f"nothing fits a budget of {budget:g}: no allowed probe costs that little "
            "after mobilisation",
            "budget",
        )
    return prefixes


def choose_finalist(
    setup: OptimiseSetup,
    runs: Sequence[GreedyRun],
    starts: dict[int, Layout | None],
    prefixes: Sequence[tuple[float, float, int, int]],
    budget: float,
    title: str,
    should_stop: Callable[[], bool] | None,
):
    """Evaluate the best prefixes on the full grid; ``(layout, result, run index, n picks)``
    of the one with the most gain (then the least cost) within the budget."""
    finalists = sorted(prefixes, reverse=True)[:FINALISTS]
    # the best prefix of each warm start keeps the guarantee against hand-made layouts
    for r_idx, run in enumerate(runs):
        if run.start is not None:
            mine = [p for p in prefixes if p[2] == r_idx]
            if mine:
                finalists.append(max(mine))
    best = None
    for _, _, r_idx, n in dict.fromkeys(finalists):
        if should_stop is not None and should_stop():
            raise OptimiseCancelled()
        layout = layout_from_run(setup.problem, runs[r_idx], n, starts[r_idx], title)
        result = setup.evaluator.evaluate_layout(layout)
        key = (result.information_gain_bits, -result.cost)
        if result.cost <= budget + 1e-6 and (best is None or key > best[0]):
            best = (key, layout, result, r_idx, n)
    if best is None:  # pragma: no cover - prefixes were costed the same way
        raise OptimiseError(f"nothing fits a budget of {budget:g}", "budget")
    return best[1:]


def optimise(
    project: Project,
    options: OptimiseOptions,
    progress: ProgressFn | None = None,
    should_stop: Callable[[], bool] | None = None,
    name: str | None = None,
    setup: OptimiseSetup | None = None,
) -> OptimiseResult:
    """Propose the layout that buys the most information within ``options.budget``.

    Greedy runs (:func:`run_greedy_jobs`), the best prefixes evaluated on the full grid
    (:func:`choose_finalist`), then the exchange refinement of the chosen one
    (``server.core.refine``), kept when it gains more on the full grid.

    Parameters
    ----------
    project : Project
    options : OptimiseOptions
    progress : callable(fraction, message), optional
        Told how far the search is (0..1, never decreasing, 1 at the end).
    should_stop : callable() -> bool, optional
        Polled between picks; when it returns True the search raises OptimiseCancelled.
    name : str, optional
        Name of the returned layout; default ``"Optimised for <budget>"``.
    setup : OptimiseSetup, optional
        From :func:`prepare_optimisation` with the same project and options but the budget;
        saves planning again when several budgets are optimised.

    Returns
    -------
    OptimiseResult

    Raises
    ------
    OptimiseError
        Bad options, no usable candidate, or nothing fits the budget; ``field`` says which.
    OptimiseCancelled
    """
    from server.core.refine import refine_layout

    t_start = time.perf_counter()
    done = [0.0]

    def report(fraction: float, message: str) -> None:
        done[0] = max(done[0], min(fraction, 1.0))  # never backwards
        if progress is not None:
            progress(done[0], message)

    if not (math.isfinite(options.budget) and options.budget > 0):
        raise OptimiseError("the budget must be a positive number", "budget")
    if setup is None:
        setup = prepare_optimisation(project, options, report)
    jobs = greedy_jobs(project, options, setup)
    runs, starts = run_greedy_jobs(setup, options.budget, jobs, report, should_stop)
    prefixes = budget_prefixes(runs, setup.candidates, setup.mobilisation, options.budget)
    curve = upper_envelope([(-c, g) for g, c, _, _ in prefixes])
    report(0.82, "re-evaluating the best layouts on the full grid")
    title = name or f"Optimised for {options.budget:g}"
    layout, result, r_idx, n = choose_finalist(
        setup, runs, starts, prefixes, options.budget, title, should_stop
    )

    def on_step(fraction: float) -> None:
        if should_stop is not None and should_stop():
            raise OptimiseCancelled()
        report(0.85 + 0.14 * fraction, "refining the layout by exchanges")

    layout, result, refinement = refine_layout(
        setup, options, runs[r_idx], n, starts[r_idx], (layout, result), options.budget, on_step
    )
    report(1.0, "done")
    return OptimiseResult(
        layout=layout,
        result=result,
        curve=curve,
        runs=tuple(runs),
        candidates=setup.candidates,
        optimisation_cells=setup.grid.n_cells,
        optimisation_spacing_m=setup.grid.spacing_m,
        candidate_spacing_m=setup.candidate_spacing_m,
        min_spacing_m=setup.min_spacing_m,
        seconds=time.perf_counter() - t_start,
        refinement=refinement,
    )
