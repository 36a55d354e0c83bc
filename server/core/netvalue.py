"""The net-value search: greedy on expected saving per unit cost, with exact low-rank updates.

docs/optimiser.md "Net value". The targets are what the design elements of docs/model.md
("The value of an investigation") are decided on, on the optimisation grid:

- a quantity element: the cell average of its boundary over each of its cells; its expected
  cost after a layout depends on each cell's variance v1 alone (``probewise.core.value``);
- a choice element: the element average of its boundary, one linear functional of the field
  (the mean of its cells' averages, since every cell has the same number of sub-points); its
  column of the cross-covariance ``M`` is the mean of its cells' columns, and its variance is
  w' S w, kept up to date by the same rank-k update as every other target, so no
  cell-by-cell covariance of the element is ever formed.

The greedy state is that of the information-gain search (``probewise.core.greedy``) with these
targets. A candidate reading boundaries O gives each target the variance
v1 = V - m' (P_OO + R)^-1 m, m its covariances with the target; its expected saving is
(expected design cost of the state) - (expected design cost with v1).

A quantity cell's expected cost is a smooth function of theta = arcsin(sqrt(v1 / v0)) (v0
the cell's variance with the existing probes only), tabulated exactly at ``TABLE_POINTS``
values of theta when the search is set up and read by linear interpolation. The table's error
is estimated at the midpoints of its intervals (``ERROR_SAFETY`` times the largest, per cell),
and candidates are then scored exactly (``probewise.core.value``) in decreasing order of their
interpolated saving per cost plus that error, until no candidate left can beat the best exact
one: the pick is the one exact scoring of every candidate would make, within the estimate.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import ndtr, ndtri

from probewise.core.analysis import ProjectAnalysis
from probewise.core.blocks import cell_blocks, predict_cells
from probewise.core.greedy import GreedyProblem, GreedyState, Targets
from probewise.core.grid import EvaluationGrid
from probewise.core.model import ChoiceConsequence, Project
from probewise.core.optimise_types import Candidates, OptimiseError
from probewise.core.value import (
    EmptyElementError,
    ValueEvaluator,
    choice_cost,
    expected_excess_per_cell,
    expected_quantity_cost,
    p_cheaper_allowed,
)

TABLE_POINTS = 257  # values of theta in [0, pi/2] per quantity cell
ERROR_SAFETY = 2.0  # the table's error bound is this times the largest midpoint error
MIN_SAVING = 1e-9  # money: a candidate that saves less is not worth a pick


@dataclass(frozen=True)
class ValuePick:
    """One net-value greedy step: candidate (location, method index), its cost (no
    mobilisation) and the expected saving it adds (money, on the optimisation grid)."""

    location: int
    method: int
    cost: float
    expected_saving: float


@dataclass(frozen=True)
class ValueRun:
    """One net-value greedy run: a mix of methods, optionally started from a layout."""

    mix: tuple[str, ...]
    start: str | None
    start_cost: float
    start_saving: float
    picks: tuple[ValuePick, ...]
    n_forced: int = 0  # the first picks bring the layout up to the requirements' counts

    def prefixes(self, cand: Candidates, mobilisation: dict[str, float]):
        """``(n_picks, gi_cost, expected_saving)`` of every prefix; the cost pays the
        mobilisation of the mix's methods used so far (a start layout's cost includes its own)."""
        used: set[str] = set()
        cost, saving = self.start_cost, self.start_saving
        out = [(0, cost, saving)]
        for n, p in enumerate(self.picks, start=1):
            mid = cand.method_ids[p.method]
            if mid not in used and (self.start is None or mid not in self.mix):
                used.add(mid)
                cost += mobilisation[mid]
            cost += p.cost
            saving += p.expected_saving
            out.append((n, cost, saving))
        return out


@dataclass(frozen=True)
class _ElementSlots:
    """Where an element's targets sit among the slots."""

    kind: str  # "quantity" or "choice"
    slots: np.ndarray  # quantity: its cells' slots; choice: (1,) the average's slot


class ValueProblem(GreedyProblem):
    """The greedy problem whose targets are the design elements' (module docstring).

    Slots: the quantity elements' cells, then one per choice element (its average), then the
    choice elements' cells (only to build the averages' columns). ``n_scored`` slots are
    scored.

    Parameters
    ----------
    analysis : ProjectAnalysis
    cand : Candidates
    grid : EvaluationGrid
        The optimisation grid: elements' cells are its cells.
    project : Project
        With at least one element.

    Raises
    ------
    OptimiseError
        ``elements``: none, or one holds no cell centre of the grid.
    """

    def __init__(
        self, analysis: ProjectAnalysis, cand: Candidates, grid: EvaluationGrid, project: Project
    ):
        if not project.elements:
            raise OptimiseError(
                "the model has no design elements: the net value needs at least one", "elements"
            )
        blocks = cell_blocks(analysis.ground, grid.xy, grid.spacing_m, analysis.origin)
        pred = predict_cells(analysis.baseline, blocks)
        try:
            self.values = ValueEvaluator(
                project, grid, pred.mean_m, np.sqrt(pred.var_m2), analysis.baseline
            )
        except EmptyElementError as exc:
            raise OptimiseError(
                f"element {exc.name!r} holds no cell centre of the optimisation grid "
                f"(cells of {grid.spacing_m:g} m); draw it larger",
                "elements",
            ) from None
        self.cell_area_m2 = grid.cell_area_m2
        targets, self.element_slots, self._averages = self._layout_slots(grid, blocks)
        self.n_scored = int(sum(len(s.cells) for s in self.values.setups if s.average is None))
        self.n_scored += len(self._averages)
        super().__init__(analysis, cand, targets)
        for slot, _members, setup in self._averages:
            self.base_state.V[slot] = setup.var0_m2
        self._build_tables()

    def _layout_slots(self, grid, blocks):
        """Targets, each element's slots and the averages ``(slot, member slots, setup)``."""
        setups = self.values.setups
        quantity = [i for i, s in enumerate(setups) if s.average is None]
        choice = [i for i, s in enumerate(setups) if s.average is not None]
        cells: list[int] = []
        bnds: list[int] = []
        where: list[_ElementSlots | None] = [None] * len(setups)
        for i in quantity:
            s = setups[i]
            where[i] = _ElementSlots("quantity", np.arange(len(cells), len(cells) + len(s.cells)))
            cells += [int(c) for c in s.cells]
            bnds += [s.element.boundary] * len(s.cells)
        first_avg = len(cells)
        cells += [-1] * len(choice)  # the averages: filled by derive_slots
        bnds += [-1] * len(choice)
        averages = []
        for a, i in enumerate(choice):
            s = setups[i]
            members = np.arange(len(cells), len(cells) + len(s.cells))
            averages.append((first_avg + a, members, s))
            where[i] = _ElementSlots("choice", np.array([first_avg + a]))
            cells += [int(c) for c in s.cells]
            bnds += [s.element.boundary] * len(s.cells)
        S = len(cells)
        slot_cell = np.array(cells, dtype=int)
        slot_bnd = np.array(bnds, dtype=int)
        targets = Targets(
            grid.xy, blocks.fields, blocks, np.unique(slot_bnd[slot_bnd >= 0]), np.ones(S),
            slot_cell, slot_bnd, np.array([0]), np.array([S]), np.array([1.0]),
        )  # fmt: skip
        return targets, tuple(where), tuple(averages)

    def derive_slots(self, cov: np.ndarray) -> np.ndarray:
        """The choice elements' average slots: the mean of their cells' slots."""
        for slot, members, _ in self._averages:
            cov[..., slot] = cov[..., members].mean(axis=-1)
        return cov

    # -- quantity tables -----------------------------------------------------------------
    def _cell_inputs(self):
        """Per quantity slot: m0, v0, lo, hi and its setup index (arrays of ``n_q``)."""
        v = self.values
        out = {"m0": [], "v0": [], "lo": [], "hi": [], "setup": []}
        for i, s in enumerate(v.setups):
            if s.average is None:
                k = s.element.boundary
                out["m0"].append(v.mean0_m[s.cells, k])
                out["v0"].append(v.var0_m2[s.cells, k])
                out["lo"].append(s.lo_m)
                out["hi"].append(s.hi_m)
                out["setup"].append(np.full(len(s.cells), i))
        return {k: np.concatenate(a) if a else np.zeros(0) for k, a in out.items()}

    def _table_costs(self, inp, theta: np.ndarray) -> np.ndarray:
        """Exact expected cost of every quantity slot at each ``theta (T,)``: ``(n_q, T)``."""
        n_q, T = len(inp["m0"]), len(theta)
        out = np.zeros((n_q, T))
        s2 = np.sin(theta) ** 2
        for i, s in enumerate(self.values.setups):
            sel = np.flatnonzero(inp["setup"] == i)
            if sel.size == 0:
                continue
            e = s.element
            rep = [np.repeat(inp[k][sel], T) for k in ("m0", "v0", "lo", "hi")]
            v1 = rep[1] * np.tile(s2, sel.size)
            g = expected_excess_per_cell(
                rep[0], rep[1], v1, rep[2], rep[3], e.design_fractile, e.adverse, e.consequence
            )
            scale = e.consequence.rate_per_m3 * self.cell_area_m2
            out[sel] = scale * g.reshape(sel.size, T)
        return out

    def _build_tables(self) -> None:
        inp = self._cell_inputs()
        self._v0_q = np.maximum(inp["v0"], 1e-300)
        self._dtheta = 0.5 * np.pi / (TABLE_POINTS - 1)
        theta = self._dtheta * np.arange(TABLE_POINTS)
        self._table = self._table_costs(inp, theta)  # (n_q, T)
        mid = self._table_costs(inp, theta[:-1] + 0.5 * self._dtheta)
        interp = 0.5 * (self._table[:, :-1] + self._table[:, 1:])
        err = np.abs(mid - interp).max(axis=1) if mid.size else np.zeros(0)
        self.table_error = float(ERROR_SAFETY * err.sum())  # money, whole candidate

    def _interp_quantity(self, v1: np.ndarray) -> np.ndarray:
        """Interpolated expected cost of the quantity slots, summed: ``(..., n_q) -> (...)``."""
        n_q = len(self._v0_q)
        if n_q == 0:
            return np.zeros(v1.shape[:-1])
        ratio = np.clip(v1 / self._v0_q, 0.0, 1.0)
        t = np.arcsin(np.sqrt(ratio)) / self._dtheta
        i = np.minimum(t.astype(np.int64), TABLE_POINTS - 2)
        frac = t - i
        flat = self._table.reshape(-1)
        base = np.arange(n_q) * TABLE_POINTS + i
        return (flat[base] * (1.0 - frac) + flat[base + 1] * frac).sum(axis=-1)

    # -- costs ---------------------------------------------------------------------------
    def _choice_costs(self, v_avg: np.ndarray) -> np.ndarray:
        """Expected cost of the choice elements, summed: ``v_avg (..., n_choice)`` -> ``(...)``,
        the closed form of ``probewise.core.value.p_cheaper_allowed``, vectorised."""
        total = np.zeros(v_avg.shape[:-1])
        for a, (_, _, s) in enumerate(self._averages):
            e, c = s.element, s.element.consequence
            v1 = np.minimum(np.maximum(v_avg[..., a], 0.0), s.var0_m2)
            z = float(ndtri(e.design_fractile))
            spread = np.sqrt(np.maximum(s.var0_m2 - v1, 0.0))
            if e.adverse == "deeper":
                margin = c.threshold_depth_m - z * np.sqrt(v1) - s.mean0_m
            else:
                margin = s.mean0_m - z * np.sqrt(v1) - c.threshold_depth_m
            with np.errstate(divide="ignore", invalid="ignore"):
                p = np.where(spread > 0, ndtr(margin / spread), (margin >= 0).astype(float))
            total += c.robust_cost - (c.robust_cost - c.cheaper_cost) * p
        return total

    def approx_cost(self, v1: np.ndarray) -> np.ndarray:
        """Expected design cost of every element summed, for scored-slot variances
        ``v1 (..., n_scored)``; quantity cells from the tables: ``(...)``."""
        n_q = len(self._v0_q)
        return self._interp_quantity(v1[..., :n_q]) + self._choice_costs(v1[..., n_q:])

    def element_costs(self, v1: np.ndarray) -> list[tuple[float, float | None]]:
        """Exact expected cost of each element (``probewise.core.value``) and, for a choice
        element, the probability that the cheaper design is allowed, for scored-slot
        variances ``v1 (n_scored,)``."""
        v = self.values
        out = []
        for s, where in zip(v.setups, self.element_slots, strict=True):
            e, k = s.element, s.element.boundary
            if where.kind == "quantity":
                cost = expected_quantity_cost(
                    v.mean0_m[s.cells, k], v.var0_m2[s.cells, k], v1[where.slots], s.lo_m,
                    s.hi_m, e.design_fractile, e.adverse, e.consequence, self.cell_area_m2,
                )  # fmt: skip
                out.append((cost, None))
            else:
                con: ChoiceConsequence = e.consequence
                p = p_cheaper_allowed(
                    s.mean0_m, s.var0_m2, min(float(v1[where.slots[0]]), s.var0_m2),
                    e.design_fractile, e.adverse, con.threshold_depth_m,
                )  # fmt: skip
                out.append((choice_cost(p, con), p))
        return out

    def exact_cost(self, v1: np.ndarray) -> float:
        """Exact expected design cost, all elements: ``v1 (n_scored,)`` -> float."""
        return float(sum(c for c, _ in self.element_costs(v1)))

    @property
    def cost_now(self) -> float:
        """Design cost with the existing probes only."""
        return float(sum(s.cost_now for s in self.values.setups))

    # -- scoring -------------------------------------------------------------------------
    def after_variances(self, state: GreedyState, j: int) -> np.ndarray:
        """Scored-slot variances after each location's candidate of method ``j``:
        ``(L, n_scored)``; ``state.M`` must be flushed."""
        ns, B = self.n_scored, self.B
        obs = self.observes[:, j, :]  # (L, B)
        A = np.where(obs[:, :, None] & obs[:, None, :], state.P, 0.0)
        A[:, np.arange(B), np.arange(B)] += np.where(obs, self.noise[:, j, :], 1.0)
        chol = np.linalg.cholesky(A)  # (L, B, B); unobserved rows are the identity's
        white = []
        q = np.zeros((len(obs), ns))
        for b in range(B):  # forward substitution, vectorised over locations and slots
            row = np.where(obs[:, b, None], state.M[b, :, :ns], 0.0)
            for c in range(b):
                row = row - chol[:, b, c, None] * white[c]
            row = row / chol[:, b, b, None]
            white.append(row)
            q += row * row
        return state.V[None, :ns] - q

    def best_value_candidate(self, state: GreedyState, active: np.ndarray, cost_now: float):
        """The active candidate with the most expected saving per cost, scored exactly:
        ``(l, j, saving)`` or None when none saves more than ``MIN_SAVING``. Ties go to the
        lowest ``l * J + j``. ``cost_now``: the exact expected design cost of ``state``."""
        state.flush()
        cost = self.cand.cost
        L, J = active.shape
        v1 = np.zeros((J, L, self.n_scored))
        upper = np.full((L, J), -np.inf)
        for j in range(J):
            if not active[:, j].any():
                continue
            v1[j] = self.after_variances(state, j)
            approx = cost_now - self.approx_cost(v1[j])
            upper[:, j] = np.where(active[:, j], (approx + self.table_error) / cost[:, j], -np.inf)
        flat = upper.reshape(-1)
        order = np.argsort(-flat, kind="stable")
        best, best_ratio = None, -np.inf
        for idx in order:
            if not np.isfinite(flat[idx]) or flat[idx] < best_ratio:
                break
            l, j = divmod(int(idx), J)
            saving = cost_now - self.exact_cost(v1[j, l])
            ratio = saving / cost[l, j]
            if saving > MIN_SAVING and (
                ratio > best_ratio or (ratio == best_ratio and idx < best[0] * J + best[1])
            ):
                best, best_ratio = (l, j, float(saving)), ratio
        return best


def value_greedy_run(
    problem: ValueProblem,
    state: GreedyState,
    allowed: np.ndarray,
    budget_left: float,
    min_spacing_m: float,
    taken_xy: np.ndarray | None = None,
    max_picks: int | None = None,
    on_pick=None,
    tracker=None,
) -> tuple[ValuePick, ...]:
    """Greedy forward selection on expected saving per cost while a probe pays for itself.

    Stops when the best candidate's expected saving is no more than its cost (no candidate
    then pays: it has the most saving per unit cost), when nothing more fits
    ``budget_left`` (``inf``: no budget), or after ``max_picks``. Arguments as
    ``probewise.core.greedy.greedy_run`` (``tracker``: every pick keeps the calibration
    rules of the requirements); ``state`` is updated in place.
    """
    cand = problem.cand
    active = cand.valid & allowed[None, :]
    dist_ok = np.ones(len(cand.local), dtype=bool)
    if taken_xy is not None and len(taken_xy):
        for p in taken_xy:
            dist_ok &= np.hypot(*(cand.local - p).T) >= min_spacing_m
    picks: list[ValuePick] = []
    cost_now = problem.exact_cost(state.V[: problem.n_scored])
    while max_picks is None or len(picks) < max_picks:
        active &= dist_ok[:, None] & (cand.cost <= budget_left + 1e-9)
        now = active if tracker is None else active & tracker.mask()
        if not now.any():
            break
        found = problem.best_value_candidate(state, now, cost_now)
        if found is None:
            break
        l, j, saving = found
        if saving <= cand.cost[l, j]:  # the stop rule: the next probe does not pay
            break
        budget_left -= cand.cost[l, j]
        if tracker is not None:
            tracker.add(l, j)
        problem.apply_pick(state, l, j)
        # the exact score is the cost of the state reached (its variances are those scored,
        # up to rounding), so the savings of a run's picks add up to its layout's
        cost_now -= saving
        picks.append(ValuePick(l, j, float(cand.cost[l, j]), saving))
        dist_ok &= np.hypot(*(cand.local - cand.local[l]).T) >= min_spacing_m
        if on_pick is not None:
            on_pick(len(picks))
    return tuple(picks)
