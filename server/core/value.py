"""The value of an investigation in money: design elements, expected saving, net value.

docs/model.md "The value of an investigation". A design element is a footprint, the boundary
that drives its cost, which way is adverse and a design fractile p. Its cells are the
evaluation cells whose centres lie in the footprint; every cell figure (mean, variance) is the
one the evaluation reports for that cell, with the hard bounds at the cell centre.

Now (existing probes only) a cell has posterior mean m0 and variance v0; after a layout the
variance is v1 <= v0 but the readings are unknown, so the posterior mean they will produce is
itself Gaussian, m' ~ N(m0, v0 - v1) (preposterior analysis: Raiffa and Schlaifer, Applied
Statistical Decision Theory, 1961). The design depth of a state (m, v) is the quantile of
N(m, v) truncated to [lo, hi] at p (deeper adverse) or 1 - p (shallower adverse).

- quantity: cost = rate x A x g(design depth), g(d) = max(0, d - r) (deeper adverse) or
  max(0, r - d) (shallower); the expected cost after a layout averages g over m' by
  Gauss-Hermite quadrature (probabilists' nodes, ``GAUSS_HERMITE_NODES``).
- choice: the element's average boundary depth over its cells' sub-points is Gaussian with
  mean M0 and variance V0 now, V1 after; the cheaper design is allowed when
  M + z sqrt(V) <= T (deeper adverse) or M - z sqrt(V) >= T (shallower), z = Phi^-1(p), and
  the probability that the readings allow it is Phi((T - z sqrt(V1) - M0) / sqrt(V0 - V1))
  (deeper) or Phi((M0 - z sqrt(V1) - T) / sqrt(V0 - V1)) (shallower). Expected cost after =
  robust - (robust - cheaper) x P.

The element average is one linear functional of the field, conditioned like every other
target (``probewise.core.element_average``).
"""

from __future__ import annotations

import functools
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.polynomial.hermite_e import hermegauss
from scipy.special import ndtr, ndtri

from probewise.core.bounds import depth_bounds, truncated_quantiles
from probewise.core.element_average import (
    ElementAverage,
    average_cross_covariance,
    condition_average,
    element_average,
)
from probewise.core.geometry import points_in_polygon
from probewise.core.grid import EvaluationGrid
from probewise.core.model import (
    ChoiceConsequence,
    DesignElement,
    Layout,
    Project,
    QuantityConsequence,
)
from probewise.core.posterior import PosteriorState

GAUSS_HERMITE_NODES = 64  # nodes of the preposterior expectation (at least 40)
CELL_CHUNK = 4096  # cells per quadrature pass (bounds memory: chunk x nodes floats)
ADVERSE = ("deeper", "shallower")


class EmptyElementError(ValueError):
    """No evaluation cell centre lies inside an element's footprint."""

    def __init__(self, index: int, name: str):
        self.index = index
        self.name = name
        super().__init__(f"no evaluation cell centre lies inside element {name!r}")


# ---------------------------------------------------------------- per-cell numerics


def design_quantile(fractile: float, adverse: str) -> float:
    """The probability level of the design depth: p (deeper adverse) or 1 - p."""
    if adverse not in ADVERSE:
        raise ValueError(f"adverse must be one of {ADVERSE}, not {adverse!r}")
    return float(fractile) if adverse == "deeper" else 1.0 - float(fractile)


def design_depth_m(
    mean_m: np.ndarray,
    var_m2: np.ndarray,
    lo_m: np.ndarray,
    hi_m: np.ndarray,
    fractile: float,
    adverse: str,
) -> np.ndarray:
    """Design depth: quantile of N(mean, var) truncated to [lo, hi] at p or 1 - p.

    Parameters
    ----------
    mean_m, var_m2, lo_m, hi_m : array of float, broadcastable
    fractile : float
        Design fractile p in [0.5, 1).
    adverse : {"deeper", "shallower"}

    Returns
    -------
    array of float
        Broadcast shape of the inputs (m).
    """
    std = np.sqrt(np.maximum(np.asarray(var_m2, dtype=float), 0.0))
    return truncated_quantiles(mean_m, std, lo_m, hi_m, design_quantile(fractile, adverse))


def excess_m(depth_m: np.ndarray, reference_depth_m: float, adverse: str) -> np.ndarray:
    """g(d): depth past the reference (deeper adverse) or short of it (shallower), >= 0."""
    d = np.asarray(depth_m, dtype=float)
    return (
        np.maximum(d - reference_depth_m, 0.0)
        if adverse == "deeper"
        else (np.maximum(reference_depth_m - d, 0.0))
    )


def quantity_cost(
    mean_m: np.ndarray,
    var_m2: np.ndarray,
    lo_m: np.ndarray,
    hi_m: np.ndarray,
    fractile: float,
    adverse: str,
    consequence: QuantityConsequence,
    cell_area_m2: float,
) -> float:
    """Cost of a quantity element in a known state: sum of rate x A x g(design depth).

    Parameters
    ----------
    mean_m, var_m2, lo_m, hi_m : (c,) float
        The element's cells: posterior mean and variance, hard bounds.
    """
    depth = design_depth_m(mean_m, var_m2, lo_m, hi_m, fractile, adverse)
    g = excess_m(depth, consequence.reference_depth_m, adverse)
    return float(consequence.rate_per_m3 * cell_area_m2 * g.sum())


def unit_normal_linear_loss(u: np.ndarray) -> np.ndarray:
    """G(u) = phi(u) - u (1 - Phi(u)) = E[max(0, Z - u)], Z ~ N(0, 1) (Raiffa and Schlaifer,
    Applied Statistical Decision Theory, 1961): ``(...) -> (...)``."""
    u = np.asarray(u, dtype=float)
    return np.exp(-0.5 * u * u) / np.sqrt(2.0 * np.pi) - u * ndtr(-u)


def _untruncated_expected_excess(m0, spread, std1, z, reference_depth_m, adverse):
    """E over m' ~ N(m0, spread^2) of g(m' + z std1), the untruncated design depth, in closed
    form: spread x G(u) with u the standardised distance to the reference (``(c,)``)."""
    centre = m0 + z * std1
    gap = centre - reference_depth_m if adverse == "deeper" else reference_depth_m - centre
    with np.errstate(divide="ignore", invalid="ignore"):
        loss = spread * unit_normal_linear_loss(-gap / spread)
    return np.where(spread > 0, loss, np.maximum(gap, 0.0))


def expected_quantity_cost(
    mean0_m: np.ndarray,
    var0_m2: np.ndarray,
    var1_m2: np.ndarray,
    lo_m: np.ndarray,
    hi_m: np.ndarray,
    fractile: float,
    adverse: str,
    consequence: QuantityConsequence,
    cell_area_m2: float,
    nodes: int = GAUSS_HERMITE_NODES,
) -> float:
    """Expected cost of a quantity element after readings with variance ``var1`` come in.

    E over m' ~ N(m0, v0 - v1) of rate x A x g(design depth of (m', v1)), cell by cell, by
    Gauss-Hermite quadrature with the probabilists' weight exp(-x^2 / 2).

    Parameters
    ----------
    mean0_m, var0_m2 : (c,) float
        Now: posterior mean and variance of each cell.
    var1_m2 : (c,) float
        After the layout; ``var1 <= var0`` (a larger value counts as no information).
    lo_m, hi_m : (c,) float
        Hard bounds of each cell.
    nodes : int
        Quadrature nodes (>= 40).

    Returns
    -------
    float
        The expected cost; equal to :func:`quantity_cost` of (m0, v0) when v1 = v0.

    Notes
    -----
    g has a kink where the design depth meets the reference depth, and quadrature converges
    slowly across a kink (3-8% off at 64 nodes in a tail). So the quadrature is applied
    to the difference between the truncated and the untruncated design depth's g, and the
    untruncated part is added in closed form, spread x G(u) with G the unit normal linear
    loss integral: exact when the bounds do not bite, and the remainder's kinks nearly cancel
    where they bite little.
    """
    per_cell = expected_excess_per_cell(
        mean0_m, var0_m2, var1_m2, lo_m, hi_m, fractile, adverse, consequence, nodes
    )
    return float(consequence.rate_per_m3 * cell_area_m2 * float(per_cell.sum()))


@functools.lru_cache(maxsize=8)
def _normal_quadrature(nodes: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Hermite nodes and weights of N(0, 1) (probabilists' weight), computed once."""
    x, w = hermegauss(nodes)
    return x, w / np.sqrt(2.0 * np.pi)


def expected_excess_per_cell(
    mean0_m: np.ndarray,
    var0_m2: np.ndarray,
    var1_m2: np.ndarray,
    lo_m: np.ndarray,
    hi_m: np.ndarray,
    fractile: float,
    adverse: str,
    consequence: QuantityConsequence,
    nodes: int = GAUSS_HERMITE_NODES,
) -> np.ndarray:
    """E[g(design depth)] of each cell after readings with variance ``var1`` (m): ``(c,)``.

    The per-cell terms of :func:`expected_quantity_cost` (which multiplies their sum by rate
    x A); same arguments, same method (closed form for the untruncated design depth plus the
    quadrature of the remainder).
    """
    x, w = _normal_quadrature(nodes)
    m0, v0, v1, lo, hi = (
        np.asarray(a, dtype=float).reshape(-1) for a in (mean0_m, var0_m2, var1_m2, lo_m, hi_m)
    )
    spread = np.sqrt(np.maximum(v0 - v1, 0.0))
    std1 = np.sqrt(np.maximum(v1, 0.0))
    q = design_quantile(fractile, adverse)
    z = float(ndtri(q))
    r = consequence.reference_depth_m
    out = _untruncated_expected_excess(m0, spread, std1, z, r, adverse)
    for c0 in range(0, len(m0), CELL_CHUNK):
        s = slice(c0, c0 + CELL_CHUNK)
        m_after = m0[s, None] + spread[s, None] * x[None, :]  # (chunk, nodes)
        depth = truncated_quantiles(m_after, std1[s, None], lo[s, None], hi[s, None], q)
        remainder = excess_m(depth, r, adverse) - excess_m(m_after + z * std1[s, None], r, adverse)
        out[s] += remainder @ w
    return out


def expected_design_depth_m(
    mean0_m: np.ndarray,
    var0_m2: np.ndarray,
    var1_m2: np.ndarray,
    lo_m: np.ndarray,
    hi_m: np.ndarray,
    fractile: float,
    adverse: str,
    nodes: int = GAUSS_HERMITE_NODES,
) -> np.ndarray:
    """Expected design depth of each cell once readings with variance ``var1`` come in.

    E over m' ~ N(m0, v0 - v1) of the design depth of (m', v1), by Gauss-Hermite quadrature
    (probabilists' weight). Without bounds it is m0 + z sqrt(v1) exactly, z = Phi^-1(q).

    Parameters
    ----------
    mean0_m, var0_m2, var1_m2, lo_m, hi_m : (c,) float
        Now: mean and variance; after: variance (``var1 <= var0``); hard bounds.
    fractile : float
    adverse : {"deeper", "shallower"}
    nodes : int

    Returns
    -------
    (c,) float
        Expected design depth (m); the design depth now where v1 = v0.
    """
    x, w = hermegauss(nodes)
    w = w / np.sqrt(2.0 * np.pi)
    m0, v0, v1, lo, hi = (
        np.asarray(a, dtype=float).reshape(-1) for a in (mean0_m, var0_m2, var1_m2, lo_m, hi_m)
    )
    spread = np.sqrt(np.maximum(v0 - v1, 0.0))
    std1 = np.sqrt(np.maximum(np.minimum(v1, v0), 0.0))
    q = design_quantile(fractile, adverse)
    out = np.empty_like(m0)
    for c0 in range(0, len(m0), CELL_CHUNK):
        s = slice(c0, c0 + CELL_CHUNK)
        m_after = m0[s, None] + spread[s, None] * x[None, :]  # (chunk, nodes)
        depth = truncated_quantiles(m_after, std1[s, None], lo[s, None], hi[s, None], q)
        out[s] = depth @ w
    return out


# ---------------------------------------------------------------- choice elements


def cheaper_allowed_now(
    mean_m: float, var_m2: float, fractile: float, adverse: str, threshold_depth_m: float
) -> bool:
    """Today's decision: M + z sqrt(V) <= T (deeper adverse) or M - z sqrt(V) >= T."""
    return p_cheaper_allowed(mean_m, var_m2, var_m2, fractile, adverse, threshold_depth_m) == 1.0


def p_cheaper_allowed(
    mean0_m: float,
    var0_m2: float,
    var1_m2: float,
    fractile: float,
    adverse: str,
    threshold_depth_m: float,
) -> float:
    """Probability that the readings will allow the cheaper design.

    Deeper adverse: Phi((T - z sqrt(V1) - M0) / sqrt(V0 - V1)); shallower adverse:
    Phi((M0 - z sqrt(V1) - T) / sqrt(V0 - V1)), z = Phi^-1(p). With V0 = V1 it is today's
    decision, 1 or 0 (allowed on the threshold itself).
    """
    if adverse not in ADVERSE:
        raise ValueError(f"adverse must be one of {ADVERSE}, not {adverse!r}")
    z = float(ndtri(fractile))
    sd1 = np.sqrt(max(float(var1_m2), 0.0))
    spread = np.sqrt(max(float(var0_m2) - float(var1_m2), 0.0))
    if adverse == "deeper":
        margin = threshold_depth_m - z * sd1 - mean0_m
    else:
        margin = mean0_m - z * sd1 - threshold_depth_m
    if spread == 0.0:
        return 1.0 if margin >= 0.0 else 0.0
    return float(ndtr(margin / spread))


def choice_cost(p_cheaper: float, consequence: ChoiceConsequence) -> float:
    """Expected cost: robust - (robust - cheaper) x P."""
    c = consequence
    return float(c.robust_cost - (c.robust_cost - c.cheaper_cost) * p_cheaper)


# ---------------------------------------------------------------- the element average


def element_cells(grid: EvaluationGrid, element: DesignElement) -> np.ndarray:
    """Indices ``(c,)`` of the grid cells whose centres lie inside the element."""
    return np.flatnonzero(points_in_polygon(grid.xy, element.polygon, grid.origin))


# ---------------------------------------------------------------- a project's elements


@dataclass(frozen=True)
class ElementValue:
    """One element's cost now and expected after a layout (money of the project)."""

    name: str
    kind: str
    cost_now: float
    cost_expected: float
    p_cheaper_allowed: float | None = None  # choice elements only

    @property
    def expected_saving(self) -> float:
        return self.cost_now - self.cost_expected


class ValueTotals:
    """The sums of a layout's value over its ``elements`` (each with ``cost_now`` and
    ``cost_expected``), less its investigation cost ``gi_cost``: one home for them (a mixin
    of the dataclasses that hold those two fields)."""

    elements: Sequence  # annotations only: the dataclass using the mixin holds the fields
    gi_cost: float

    @property
    def design_cost_now(self) -> float:
        return float(sum(e.cost_now for e in self.elements))

    @property
    def design_cost_expected(self) -> float:
        return float(sum(e.cost_expected for e in self.elements))

    @property
    def expected_saving(self) -> float:
        return self.design_cost_now - self.design_cost_expected

    @property
    def net_value(self) -> float:
        return self.expected_saving - self.gi_cost


@dataclass(frozen=True, eq=False)
class LayoutValue(ValueTotals):
    """A layout's investigation cost, design costs and what it is worth."""

    name: str
    gi_cost: float
    elements: tuple[ElementValue, ...]


@dataclass(frozen=True, eq=False)
class _Setup:
    """What an element needs, fixed for a project: its cells and its state now."""

    element: DesignElement
    cells: np.ndarray
    lo_m: np.ndarray
    hi_m: np.ndarray
    cost_now: float
    average: ElementAverage | None = None  # choice elements
    known_cov: np.ndarray | None = None
    mean0_m: float = 0.0
    var0_m2: float = 0.0


class ValueEvaluator:
    """Costs of a project's design elements now and expected after layouts.

    Built from what the evaluation reports: the grid, the baseline cell posterior (mean and
    std per cell and boundary) and, per layout, the layout's cell std.

    Parameters
    ----------
    project : Project
    grid : EvaluationGrid
    baseline_mean_m, baseline_std_m : (n, B) float
        Cell posterior with the existing probes only.
    state : PosteriorState
        Conditioned on the existing probes (``ProjectAnalysis.baseline``).

    Raises
    ------
    EmptyElementError
        When an element holds no cell centre.
    """

    def __init__(self, project, grid, baseline_mean_m, baseline_std_m, state: PosteriorState):
        self.project: Project = project
        self.grid: EvaluationGrid = grid
        self.state = state
        lo, hi = depth_bounds(project.ground, grid.xy, grid.origin)
        mean0 = np.asarray(baseline_mean_m, dtype=float)
        var0 = np.asarray(baseline_std_m, dtype=float) ** 2
        self.var0_m2 = var0
        self.mean0_m = mean0
        setups = []
        for i, element in enumerate(project.elements):
            cells = element_cells(grid, element)
            if cells.size == 0:
                raise EmptyElementError(i, element.name)
            setups.append(self._setup(element, cells, lo, hi))
        self.setups: tuple[_Setup, ...] = tuple(setups)

    def _setup(self, element, cells, lo, hi) -> _Setup:
        k = element.boundary
        lo_e, hi_e = lo[cells, k], hi[cells, k]
        con = element.consequence
        if isinstance(con, QuantityConsequence):
            cost = quantity_cost(
                self.mean0_m[cells, k], self.var0_m2[cells, k], lo_e, hi_e,
                element.design_fractile, element.adverse, con, self.grid.cell_area_m2,
            )  # fmt: skip
            return _Setup(element, cells, lo_e, hi_e, cost)
        avg = element_average(self.project.ground, self.grid, cells, k)
        known_cov = None  # a local state (many readings) conditions near the element instead
        if not hasattr(self.state, "exact_near"):
            known = self.state.observations[0]
            fields = self.state.fields[0]
            known_cov = average_cross_covariance(self.project.ground, avg, known, fields)
        mean0, var0 = condition_average(self.state, avg, known_cov)
        p = p_cheaper_allowed(
            mean0, var0, var0, element.design_fractile, element.adverse, con.threshold_depth_m
        )
        return _Setup(element, cells, lo_e, hi_e, choice_cost(p, con), avg, known_cov, mean0, var0)

    @property
    def needs_state(self) -> bool:
        """True when a layout's posterior state is needed (a choice element exists)."""
        return any(s.average is not None for s in self.setups)

    def element_costs_now(self) -> list[tuple[str, int, float]]:
        """(name, cells, cost now) of every element."""
        return [(s.element.name, int(s.cells.size), s.cost_now) for s in self.setups]

    def layout_value(
        self,
        name: str,
        gi_cost: float,
        layout_std_m: np.ndarray,
        state: PosteriorState | None = None,
    ) -> LayoutValue:
        """A layout's expected design costs and saving.

        Parameters
        ----------
        name : str
        gi_cost : float
            The layout's investigation cost.
        layout_std_m : (n, B) float
            Cell posterior std with the layout's readings added.
        state : PosteriorState, optional
            The baseline extended by the layout (needed when ``needs_state``).
        """
        var1 = np.asarray(layout_std_m, dtype=float) ** 2
        out = []
        for s in self.setups:
            e, k = s.element, s.element.boundary
            con = e.consequence
            if s.average is None:
                cost = expected_quantity_cost(
                    self.mean0_m[s.cells, k], self.var0_m2[s.cells, k], var1[s.cells, k],
                    s.lo_m, s.hi_m, e.design_fractile, e.adverse, con, self.grid.cell_area_m2,
                )  # fmt: skip
                out.append(ElementValue(e.name, "quantity", s.cost_now, cost))
                continue
            if state is None:
                raise ValueError("a choice element needs the layout's posterior state")
            _, var1_avg = condition_average(state, s.average, s.known_cov)
            p = p_cheaper_allowed(
                s.mean0_m, s.var0_m2, min(var1_avg, s.var0_m2), e.design_fractile, e.adverse,
                con.threshold_depth_m,
            )  # fmt: skip
            out.append(ElementValue(e.name, "choice", s.cost_now, choice_cost(p, con), p))
        return LayoutValue(name, float(gi_cost), tuple(out))


def layout_values(
    values: ValueEvaluator, analysis, layouts: Sequence[Layout], results: Sequence
) -> tuple[LayoutValue, ...]:
    """The value of each layout from its evaluation result (``LayoutResult``: cost, cell std).

    ``analysis`` (``ProjectAnalysis``) gives each layout's posterior state when a choice
    element needs it.
    """
    out = []
    for layout, result in zip(layouts, results, strict=True):
        state = analysis.layout_state(layout)[0] if values.needs_state else None
        out.append(values.layout_value(result.name, result.cost, result.grid.std_m, state))
    return tuple(out)
