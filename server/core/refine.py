"""Exchange refinement of a greedy layout: revisit every pick, exactly, within the budget.

Greedy forward selection never revisits an early pick and chooses from a coarse candidate
grid. The refinement takes the greedy layout and, probe by probe, removes the probe and puts
back the best replacement among every candidate location and method (the exchange algorithm
for optimal designs of Fedorov, Theory of Optimal Experiments, 1972; greedy followed by
exchange as for sensor placement in Krause, Singh and Guestrin, JMLR 9, 2008). A replacement
is kept only when the layout gains more with it than with the probe it replaces, so the gain
never falls; it must fit the money the other probes leave (mobilisation of a method the other
probes do not use included) and keep the minimum spacing. After each sweep any money freed is
spent greedily. Sweeps repeat until one changes nothing (or a set number of sweeps).

Candidates are the greedy's grid plus a finer local grid around every greedy pick (the cell
centres of the refinement grid, every one or every few so that the step is at least a quarter
of the candidate spacing, or half the candidate spacing when the cells are coarser, within half
the candidate spacing of the pick), planned exactly as the greedy plans them. Targets are
the evaluation grid coarsened to at most ``refine_cells`` cells, built by the optimiser's own
``build_targets``, so the refinement uses whatever target kind the optimiser uses.
``Q`` below takes ``(L B)^2`` float64 numbers, so the candidates are bounded by
``OptimiseOptions.refine_bytes``: past it the local grid's step is doubled until the local
points fit (none past half the candidate spacing), and when the greedy grid alone is too
large only its locations nearest the picks are kept (docs/optimiser.md "Memory").

Exact state with removals: besides the cross-covariance ``M`` of candidates and targets and
the target variances ``V`` of the greedy search, the refinement keeps ``Q``, the posterior
covariance among all candidate location-boundaries (``N = L B`` square). Adding a probe that
reads ``O`` at location ``l`` with noise ``R`` is the usual rank-k update with
``K = Q[O, O] + R``; removing it is the same update with ``R - Q[O, O]`` in place of ``K`` and
the opposite sign (conditioning on a reading with noise ``-R`` cancels it; the matrix is
positive definite because the posterior variance of a read boundary is below the reading's
noise). The exact search of the greedy kernel scores every candidate from ``M``, ``V`` and the
diagonal blocks of ``Q``.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.linalg import solve_triangular
from scipy.linalg.blas import dgemm

from probewise.core.correlation import correlate
from probewise.core.evaluate import LayoutResult
from probewise.core.geometry import points_in_polygon
from probewise.core.grid import evaluation_grid_capped
from probewise.core.local_conditioning import LocalState
from probewise.core.model import Layout
from probewise.core.optimise import (
    Candidates,
    GreedyProblem,
    GreedyRun,
    GreedyState,
    OptimiseOptions,
    OptimiseSetup,
    Refinement,
    build_candidates,
    build_targets,
    layout_from_picks,
)
from probewise.core.optimise_requirements import check_finalist
from probewise.core.optimise_types import REFINE_BYTES
from probewise.core.requirements import build_tracker


@dataclass(frozen=True)
class RefineSpec:
    """The layout to refine and its constraints.

    Attributes
    ----------
    picks : tuple of (int, int)
        ``(location, method index)`` of the greedy picks in the greedy candidates.
    budget : float
        Most the layout may cost, mobilisation included.
    fixed_cost : float
        Cost of the fixed part (a hand-made start layout, mobilisation included; else what
        any layout pays, reporting).
    fixed_methods : frozenset of str
        Methods whose mobilisation ``fixed_cost`` already pays.
    fixed_xy : (n, 2) float
        Local coordinates of the fixed probes (for the spacing).
    mobilisation : dict of str to float
    min_spacing_m : float
    """

    picks: tuple[tuple[int, int], ...]
    budget: float
    fixed_cost: float
    fixed_methods: frozenset
    fixed_xy: np.ndarray
    mobilisation: dict
    min_spacing_m: float
    tracker: object = None  # requirements with the fixed part taken (None: no requirements)


class RefineState:
    """Posterior state that can add and remove probes exactly (see module docstring).

    ``M (B, L, S)``, ``V (S,)`` and ``P (L, B, B)`` as in ``GreedyState``; ``Q (L B, L B)``
    posterior covariance among candidate location-boundaries (index ``l B + b``). ``G``,
    ``H`` and ``pending`` are there for the search kernel (never a pending update here).
    """

    def __init__(self, problem: GreedyProblem, start: GreedyState):
        start.flush()
        self.B = B = problem.B
        self.M = np.ascontiguousarray(start.M)
        self.V = start.V.copy()
        L, R = len(problem.cand.local), start.n_rows
        self.Q = prior_candidate_covariance(problem)
        if R:  # Q -= F F^T in place: one (N, N) array, no temporaries of its size
            f = start.F[:, :, :R].reshape(L * B, R)
            dgemm(-1.0, f.T, f.T, 1.0, self.Q.T, 1, 0, 1)
        q4 = self.Q.reshape(L, B, L, B)
        self.P = np.ascontiguousarray(q4[np.arange(L), :, np.arange(L), :])
        self.G = np.zeros((L, B, B))
        self.H = np.zeros((B, self.M.shape[2]))
        self.pending = False

    def flush(self) -> None:  # the search kernel's protocol: nothing is ever pending here
        self.pending = False

    def _factors(self, l, obs, noise_var, sign: float, rows: bool = True):
        """Whitened covariance of the readings with every location-boundary ``(k, N)``
        (None unless ``rows``) and with every target ``(k, S)``: adding (``sign`` 1) or
        removing (-1) them. ``l`` is one location or ``(k,)`` locations, one a reading."""
        idx = l * self.B + obs
        block = self.Q[np.ix_(idx, idx)]
        k = np.diag(noise_var) + sign * block
        low = np.linalg.cholesky(0.5 * (k + k.T))
        w = solve_triangular(low, self.Q[idx, :], lower=True, check_finite=False) if rows else None
        h = solve_triangular(low, self.M[obs, l, :], lower=True, check_finite=False)
        return w, h

    def _update_m(self, w: np.ndarray, h: np.ndarray, sign: float) -> None:
        """``M[b] -= sign w_b^T h`` in place (BLAS on the transposed, Fortran-ordered view)."""
        wr = w.reshape(len(w), -1, self.B)
        for b in range(self.B):
            dgemm(-sign, h.T, np.ascontiguousarray(wr[:, :, b]), 1.0, self.M[b].T, 0, 0, 1)

    def _update_small(self, w: np.ndarray, h: np.ndarray, sign: float) -> None:
        wr = w.reshape(len(w), -1, self.B)
        self.V -= sign * np.einsum("qs,qs->s", h, h)
        self.P -= sign * np.einsum("qlb,qlc->lbc", wr, wr)

    def add(self, l, obs: np.ndarray, noise_var: np.ndarray) -> None:
        """Condition on readings of boundaries ``obs`` at location ``l`` (noise variances;
        ``l`` may be ``(k,)``, one location a reading)."""
        w, h = self._factors(l, obs, noise_var, 1.0)
        self._update_m(w, h, 1.0)
        self._update_small(w, h, 1.0)
        self._update_q(w, 1.0)

    def add_many(self, readings: Sequence[tuple[int, np.ndarray, np.ndarray]]) -> None:
        """Condition on several probes at once, ``(location, obs, noise_var)`` each at a
        distinct location: one block update (BLAS on all readings) instead of one a probe."""
        if not readings:
            return
        locs = np.concatenate([np.full(len(obs), l) for l, obs, _ in readings])
        obs = np.concatenate([obs for _, obs, _ in readings])
        self.add(locs, obs, np.concatenate([noise for _, _, noise in readings]))

    def _update_q(self, w: np.ndarray, sign: float) -> None:
        """``Q -= sign w^T w`` in place (``Q`` is symmetric, so its transpose is updated)."""
        dgemm(-sign, w.T, w, 1.0, self.Q.T, 0, 0, 1)

    def remove_trial(self, l: int, obs: np.ndarray, noise_var: np.ndarray):
        """Take those readings out of ``M``, ``V`` and ``P`` (not ``Q``); returns what
        :meth:`undo` or :meth:`commit` needs."""
        w, h = self._factors(l, obs, noise_var, -1.0)
        saved = (self.V.copy(), self.P.copy())
        self._update_m(w, h, -1.0)
        self._update_small(w, h, -1.0)
        return w, h, saved

    def undo(self, trial) -> None:
        """Put the readings of a trial removal back (``M`` by the opposite update)."""
        w, h, (V, P) = trial
        self._update_m(w, h, 1.0)
        self.V, self.P = V, P

    def commit(self, trial) -> None:
        """Make a trial removal final (``Q`` too)."""
        self._update_q(trial[0], -1.0)


def prior_candidate_covariance(problem: GreedyProblem) -> np.ndarray:
    """Prior covariance among candidate location-boundaries: ``(L B, L B)``.

    ``Cov(D_b(x_l), D_c(x_m)) = sum over units i <= min(b, c) of s_i(l) s_i(m) rho_i``.
    """
    ground, local, std = problem.ground, problem.cand.local, problem.cand_fields.std_m
    B, L = problem.B, len(local)
    d = local[:, None, :] - local[None, :, :]
    h = np.sqrt(np.einsum("ijk,ijk->ij", d, d))
    out = np.zeros((L, B, L, B))
    acc = np.zeros((L, L))
    for i in range(B):
        corr = ground.units[i].correlation
        acc += correlate(corr.model, h, corr.range_m) * np.outer(std[:, i], std[:, i])
        # boundaries b, c >= i share unit i; write min(b, c) == i
        out[:, i, :, i:] = acc[:, :, None]
        out[:, i + 1 :, :, i] = acc[:, None, :]
    return out.reshape(L * B, L * B)


def local_points(project, spacing_m: float, step_m: float, centres_xy: np.ndarray, anchor):
    """Points of a lattice of step ``step_m`` through ``anchor`` within half ``spacing_m`` of
    each centre (project coordinates), inside the site and outside exclusions: ``(n, 2)``."""
    reach = int(math.floor(0.5 * spacing_m / step_m + 1e-9))
    if reach < 1 or len(centres_xy) == 0:
        return np.zeros((0, 2))
    anchor = np.asarray(anchor, dtype=float)
    offs = np.arange(-reach, reach + 1) * step_m
    out = []
    for c in centres_xy:
        base = anchor + np.round((c - anchor) / step_m) * step_m  # nearest lattice point
        gx, gy = np.meshgrid(base[0] + offs, base[1] + offs)
        pts = np.column_stack([gx.ravel(), gy.ravel()])
        out.append(pts[np.max(np.abs(pts - c), axis=1) <= 0.5 * spacing_m + 1e-9])
    xy = np.unique(np.round(np.vstack(out), 6), axis=0)
    keep = points_in_polygon(xy, project.site.outline)
    for excl in project.site.exclusions:
        keep &= ~points_in_polygon(xy, excl)
    return xy[keep]


def merge_candidates(a: Candidates, b: Candidates) -> Candidates:
    """Candidates ``a`` followed by ``b`` (same methods)."""
    return Candidates(
        np.vstack([a.xy, b.xy]),
        np.vstack([a.local, b.local]),
        a.method_ids,
        np.vstack([a.depth_m, b.depth_m]),
        np.vstack([a.cost, b.cost]),
        np.concatenate([a.noise_var, b.noise_var]),
        np.vstack([a.valid, b.valid]),
    )


def subset_candidates(cand: Candidates, keep: np.ndarray) -> Candidates:
    """Candidates at locations ``keep`` (indices, in that order)."""
    return Candidates(
        cand.xy[keep],
        cand.local[keep],
        cand.method_ids,
        cand.depth_m[keep],
        cand.cost[keep],
        cand.noise_var[keep],
        cand.valid[keep],
    )


def max_refine_locations(refine_bytes: float, n_boundaries: int) -> int:
    """Most candidate locations ``L`` whose ``Q`` (``(L B, L B)`` float64) fits
    ``refine_bytes``."""
    return math.isqrt(int(max(refine_bytes, 0) // 8)) // max(n_boundaries, 1)


def nearest_candidates(cand: Candidates, picks, max_locations: int):
    """The greedy candidates, or only the ``max_locations`` nearest the picks when there are
    more (the picks' own locations always kept); returns them and the picks re-indexed."""
    if len(cand.local) <= max_locations or not picks:
        return cand, list(picks)
    at = cand.local[[l for l, _ in picks]]
    near = np.full(len(cand.local), np.inf)
    for p in at:
        near = np.minimum(near, np.hypot(*(cand.local - p).T))
    near[[l for l, _ in picks]] = -1.0  # first, whatever the count
    count = max(max_locations, len({l for l, _ in picks}))
    keep = np.sort(np.argsort(near, kind="stable")[:count])
    new = {int(l): i for i, l in enumerate(keep)}
    return subset_candidates(cand, keep), [(new[l], j) for l, j in picks]


def refinement_problem(
    setup,
    picks: Sequence[tuple[int, int]],
    refine_cells: int,
    refine_bytes: float = REFINE_BYTES,
):
    """The refinement's GreedyProblem and the picks in its candidates.

    Candidates are the greedy candidates plus local points around the picks, as many as
    ``Q`` within ``refine_bytes`` allows (module docstring); targets on the evaluation grid
    coarsened to at most ``refine_cells`` cells.
    """
    project, analysis = setup.project, setup.analysis
    grid, _ = evaluation_grid_capped(project.site, analysis.origin, refine_cells)
    most = max_refine_locations(refine_bytes, analysis.ground.n_boundaries)
    cand, picks = nearest_candidates(setup.candidates, picks, most)
    spacing = setup.candidate_spacing_m
    # cell centres of the grid, thinned to about a quarter of the candidate spacing (at most
    # 5 x 5 points a pick); half the candidate spacing when the cells are coarser than that
    g = grid.spacing_m
    step = g * max(1, math.ceil(0.25 * spacing / g - 1e-9)) if g <= 0.5 * spacing else 0.5 * spacing
    centres = cand.xy[[l for l, _ in picks]] if picks else np.zeros((0, 2))
    extra = np.zeros((0, 2))
    while most > len(cand.local):
        extra = local_points(project, spacing, step, centres, grid.xy_project[0])
        if len(extra):
            d = np.hypot(*(extra[:, None, :] - cand.xy[None, :, :]).transpose(2, 0, 1))
            extra = extra[np.min(d, axis=1) > 1e-6]  # a greedy location already
        if len(cand.local) + len(extra) <= most:
            break
        step *= 2.0  # too many for Q's memory: a coarser local grid (none past the spacing)
        extra = np.zeros((0, 2))
    if len(extra):
        cand = merge_candidates(cand, build_candidates(analysis, extra, cand.method_ids))
    return GreedyProblem(analysis, cand, build_targets(analysis, grid)), picks


class Exchange:
    """The exchange search on one refinement problem (see module docstring)."""

    def __init__(self, problem: GreedyProblem, spec: RefineSpec, state: RefineState):
        self.problem, self.spec, self.state = problem, spec, state
        cand = problem.cand
        self.mob = np.array([spec.mobilisation[m] for m in cand.method_ids])
        self.fixed_j = np.array([m in spec.fixed_methods for m in cand.method_ids])
        self.picks = list(spec.picks)
        self.moves = 0

    def _readings(self, l: int, j: int):
        obs = np.flatnonzero(self.problem.observes[l, j])
        return l, obs, self.problem.cand.noise_var[l, j, obs]

    def feasible(self, others: Sequence[tuple[int, int]]) -> np.ndarray:
        """``(L, J)`` bool: candidates that may join ``others`` (budget, spacing, valid)."""
        cand, spec = self.problem.cand, self.spec
        used = self.fixed_j.copy()
        spent = spec.fixed_cost
        for l, j in others:
            if not used[j]:
                spent += self.mob[j]
                used[j] = True
            spent += cand.cost[l, j]
        left = spec.budget - spent
        price = cand.cost + np.where(used, 0.0, self.mob)[None, :]
        ok = cand.valid & (price <= left + 1e-9)
        taken = [cand.local[l] for l, _ in others] + list(spec.fixed_xy)
        for p in taken:
            ok &= (np.hypot(*(cand.local - p).T) >= spec.min_spacing_m)[:, None]
        if spec.tracker is not None:  # the layout after the exchange meets every requirement
            tracker = spec.tracker.copy()
            for l, j in others:
                tracker.add(l, j)
            ok &= tracker.mask(complete=True)
        return ok

    def removal_losses(self) -> np.ndarray:
        """``(n,)`` gain (bits) each pick would lose if taken out alone."""
        out = np.empty(len(self.picks))
        for i, (l, j) in enumerate(self.picks):
            _, obs, noise = self._readings(l, j)
            h = self.state._factors(l, obs, noise, -1.0, rows=False)[1]
            after = self.state.V + np.einsum("qs,qs->s", h, h)
            out[i] = self.problem.gain_bits(after, self.state.V)
        return out

    def try_exchange(self, i: int) -> bool:
        """Replace pick ``i`` by the best candidate if that gains more; True if replaced."""
        l, j = self.picks[i]
        others = self.picks[:i] + self.picks[i + 1 :]
        trial = self.state.remove_trial(*self._readings(l, j))
        active = self.feasible(others)
        active[l, j] = True  # putting it back always fits
        gains = self.problem.score(self.state, active)
        nl, nj = divmod(int(np.argmax(gains)), gains.shape[1])
        keep = gains[l, j]
        if gains[nl, nj] <= keep + 1e-9 * abs(keep) + 1e-12:
            self.state.undo(trial)
            return False
        self.state.commit(trial)
        self.state.add(*self._readings(nl, nj))
        self.picks[i] = (nl, nj)
        self.moves += 1
        return True

    def fill(self) -> None:
        """Spend money left on the greedy rule (most gain per cost), exactly as the greedy."""
        while True:
            active = self.feasible(self.picks)
            if not active.any():
                return
            found = self.problem.best_candidate(self.state, active)
            if found is None:
                return
            self.state.add(*self._readings(found[0], found[1]))
            self.picks.append((found[0], found[1]))
            self.moves += 1


def refine_picks(
    problem: GreedyProblem,
    spec: RefineSpec,
    start: GreedyState,
    max_sweeps: int,
    max_work: float = math.inf,
    on_step: Callable[[float], None] | None = None,
    own_start: bool = False,
) -> tuple[list[tuple[int, int]], int, int]:
    """Exchange sweeps from the greedy picks; returns (picks, moves, sweeps).

    Each sweep tries the picks in increasing order of the gain they alone bring (the likeliest
    to be improved first), then spends any money freed. Sweeps stop when one changes nothing,
    after ``max_sweeps``, or when the tries have swept ``max_work`` candidate-target
    covariances. ``start`` is the problem's state with the fixed part applied (not modified,
    unless ``own_start``: then it is used up rather than copied, which saves a copy of ``M``).
    ``on_step(fraction)`` is called after every try; it may raise to cancel.
    """
    state = RefineState(problem, start if own_start else start.copy())
    ex = Exchange(problem, spec, state)
    state.add_many([ex._readings(l, j) for l, j in ex.picks])
    per_try = float(state.M.size)
    tries_left = max(int(max_work // per_try), 1)
    total = min(max_sweeps * len(ex.picks), tries_left)
    sweeps = tried = 0
    while sweeps < max_sweeps and tries_left > 0:
        sweeps += 1
        changed = False
        for i in np.argsort(ex.removal_losses(), kind="stable"):
            if tries_left <= 0:
                break
            changed |= ex.try_exchange(int(i))
            tries_left -= 1
            tried += 1
            if on_step is not None:
                on_step(min(tried / max(total, 1), 1.0))
        before = len(ex.picks)
        ex.fill()
        if not changed and len(ex.picks) == before:
            break
    return ex.picks, ex.moves, sweeps


def refine_layout(
    setup: OptimiseSetup,
    options: OptimiseOptions,
    run: GreedyRun,
    n_picks: int,
    start: Layout | None,
    greedy: tuple[Layout, LayoutResult],
    budget: float,
    on_step: Callable[[float], None] | None = None,
) -> tuple[Layout, LayoutResult, Refinement]:
    """Refine the first ``n_picks`` picks of a greedy run (after its start layout).

    Returns the refined layout and its full-grid result when it gains more than the greedy
    layout ``greedy`` (its layout and full-grid result) within the budget, else ``greedy``;
    and what the refinement added. ``options.refine_sweeps`` 0 skips it.
    """
    t0 = time.perf_counter()
    layout, result = greedy
    picks = [(p.location, p.method) for p in run.picks[:n_picks]]
    g0 = result.information_gain_bits
    # beyond exact conditioning the refinement's many local candidates would need the
    # covariance among all of them explained tile by tile (probewise.core.local_cross): skipped
    local = isinstance(setup.analysis.baseline, LocalState)
    if options.refine_sweeps <= 0 or not picks or local:
        return layout, result, Refinement(g0, g0, 0, 0, 0, time.perf_counter() - t0)
    problem, picks = refinement_problem(setup, picks, options.refine_cells, options.refine_bytes)
    state = problem.base_state  # the problem is ours alone: used up, not copied
    fixed_cost, fixed_methods, fixed_xy = setup.fixed_cost, frozenset(), np.zeros((0, 2))
    if start is not None:
        fixed_cost = problem.apply_layout(state, start)[0]
        fixed_methods = frozenset(p.method for p in start.probes)
        fixed_xy = setup.analysis.to_local(np.array([(p.x, p.y) for p in start.probes]))
    tracker = None
    if setup.tracker is not None:
        cand = problem.cand
        tracker = build_tracker(setup.analysis, cand.method_ids, cand.xy, cand.depth_m)
        if start is not None:
            tracker.add_plans(setup.analysis, setup.analysis.plan(start))
    spec = RefineSpec(
        tuple(picks),
        budget,
        fixed_cost,
        fixed_methods,
        fixed_xy,
        dict(setup.mobilisation),
        setup.min_spacing_m,
        tracker,
    )
    new_picks, moves, sweeps = refine_picks(
        problem, spec, state, options.refine_sweeps, options.refine_work, on_step, own_start=True
    )
    n_loc = len(problem.cand.local)
    if moves:
        refined = layout_from_picks(problem.cand, new_picks, start, layout.name)
        out = setup.evaluator.evaluate_layout(refined)
        meets = tracker is None or not check_finalist(setup.analysis, out)
        if out.cost <= budget + 1e-6 and out.information_gain_bits > g0 and meets:
            info = Refinement(
                g0, out.information_gain_bits, moves, sweeps, n_loc, time.perf_counter() - t0
            )
            return refined, out, info
    return layout, result, Refinement(g0, g0, 0, sweeps, n_loc, time.perf_counter() - t0)
