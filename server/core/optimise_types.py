"""What the optimiser takes and gives: options, candidates, picks, runs, results and errors
(``probewise.core.optimise`` and its helpers share them)."""

from __future__ import annotations

import threading
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from probewise.core.evaluate import LayoutResult
from probewise.core.model import Layout

# The search runs on all cores; numba's fallback thread pool ("workqueue", used where no
# OpenMP or TBB library is found) aborts the process if two threads enter it at once, and the
# web may run optimisers for two projects concurrently, so searches take turns.
KERNEL_LOCK = threading.Lock()
MIN_GAIN_BITS = 1e-9  # a candidate that buys less than this is not worth a pick
FINALISTS = 4  # layouts re-evaluated on the full grid before choosing
# Each candidate location holds a row of covariances with every target and is planned per
# method: more than this makes a run take minutes for no better answer.
MAX_CANDIDATE_LOCATIONS = 5000
# Memory for the refinement's posterior covariance among candidates (probewise.core.refine)
REFINE_BYTES = 512 * 2**20
OBJECTIVES = ("gain", "net-value")  # what the optimiser maximises (OptimiseOptions.objective)


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


class RequirementsUnmetError(OptimiseError):
    """No layout within the budget meets every requirement; ``unmet`` says, in words, which
    ones the closest layout found misses (docs/optimiser.md "Requirements")."""

    def __init__(self, budget: float, unmet: tuple[str, ...]):
        self.budget = budget
        self.unmet = tuple(unmet)
        super().__init__(
            f"a budget of {budget:,.0f} cannot meet the requirements: " + "; ".join(self.unmet),
            "requirements",
        )


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
        Most exchange sweeps of the refinement (``probewise.core.refine``); 0 turns it off.
    refine_cells : int
        The refinement scores on the evaluation grid coarsened to at most this many cells.
    refine_work : float
        Most candidate-target covariances the refinement's tried exchanges may sweep (each
        try updates and scores every candidate's row once or twice); bounds its run time on
        large layouts.
    refine_bytes : float
        Memory (bytes) the refinement's covariance among candidate location-boundaries may
        take (``(L B)^2`` float64 numbers for ``L`` locations, ``B`` boundaries); default
        512 MiB. When the local points around the picks would take more, the local grid is
        made coarser (its step doubled until they fit, none at all in the end); when the
        greedy candidates alone would, only those nearest the picks are kept.
    objective : {"gain", "net-value"}
        ``gain``: the most information within the budget; ``net-value``: the most expected
        saving less investigation cost of the design elements (``probewise.core.netvalue``),
        where ``budget`` may be ``inf`` (no cap).
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
    refine_bytes: float = REFINE_BYTES
    objective: str = "gain"


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
        Cost of each candidate probe, contingency included, no fixed cost
        (``probewise.core.programme.probe_cost``).
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
    meets: bool = True  # the layout up to this pick meets every requirement


@dataclass(frozen=True)
class GreedyRun:
    """One greedy run: a mix of methods, optionally started from a hand-made layout."""

    mix: tuple[str, ...]
    start: str | None
    start_cost: float
    start_gain_bits: float
    picks: tuple[Pick, ...]
    start_meets: bool = True  # the start (no pick yet) meets every requirement
    unmet: tuple[str, ...] = ()  # requirements the whole run still misses, in words

    def prefixes(self, cand: Candidates, mobilisation: dict[str, float], feasible=False):
        """``(n_picks, cost, gain)`` of every prefix; cost pays mobilisation of methods used
        (a start layout's cost paid its own methods', which are the run's mix).

        With ``feasible``, only the prefixes that meet every requirement."""
        used: set[str] = set(self.mix) if self.start is not None else set()
        cost, gain = self.start_cost, self.start_gain_bits
        out = [(0, cost, gain)] if self.start_meets or not feasible else []
        for n, p in enumerate(self.picks, start=1):
            mid = cand.method_ids[p.method]
            if mid not in used:
                used.add(mid)
                cost += mobilisation[mid]
            cost += p.cost
            gain += p.gain_bits
            if p.meets or not feasible:
                out.append((n, cost, gain))
        return out


@dataclass(frozen=True)
class Refinement:
    """What the exchange refinement (``probewise.core.refine``) added to the greedy layout.

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

    With the net-value objective ``curve`` is empty, ``value_curve`` holds the saving-cost
    curve and ``value`` the layout's value on the full grid; ``runs`` are ``ValueRun``.

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
    objective: str = "gain"
    value: object = None  # net value: the layout's LayoutValue on the full grid
    value_curve: tuple[ValuePoint, ...] = ()  # net value: the chosen run, pick by pick


@dataclass(frozen=True)
class ValuePoint:
    """One prefix of a net-value greedy run: investigation cost (mobilisation included),
    expected saving (optimisation grid) and number of probes added; ``optimum`` marks the
    prefix returned."""

    cost: float
    expected_saving: float
    probes: int
    optimum: bool = False

    @property
    def net_value(self) -> float:
        return self.expected_saving - self.cost


ProgressFn = Callable[[float, str], None]
