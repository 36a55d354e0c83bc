"""Options to compare: guidance grids and the ranking of every option by cost and gain.

Options and Compare steps. A *guidance grid* is the rule-of-thumb layout an engineer would
draw without this tool: one method on a regular square grid at a spacing taken from the codes
of practice. ``GUIDANCE_SPACINGS`` lists the typical spacings; the ranking puts hand-made
layouts, guidance grids and optimised layouts side by side (cost, duration, information gain,
gain per cost, Pareto efficiency over all of them).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from probewise.core.analysis import ProjectAnalysis
from probewise.core.evaluate import GridEvaluator, LayoutResult, pareto_flags
from probewise.core.model import Layout, PlannedProbe, Project
from probewise.core.optimise import candidate_locations
from probewise.core.requirements import requirement_status
from probewise.core.value import ValueEvaluator, layout_values

KINDS = ("hand", "guidance", "optimised")
MAX_GUIDANCE_PROBES = 5000  # more is no guidance grid anyone would price


@dataclass(frozen=True)
class GuidanceSpacing:
    """A typical spacing of investigation points for a kind of structure (m)."""

    structures: str
    min_m: float | None
    max_m: float
    source: str


_EC7 = "Eurocode 7 Part 2 (EN 1997-2:2007), Annex B.3"

# Spacings of investigation points, EN 1997-2:2007 Annex B.3 (figures from memory: check the
# current edition and the National Annex before relying on them).
GUIDANCE_SPACINGS: tuple[GuidanceSpacing, ...] = (
    GuidanceSpacing("High-rise and industrial structures (grid)", 15.0, 40.0, _EC7),
    GuidanceSpacing("Large-area structures (grid)", None, 60.0, _EC7),
    GuidanceSpacing(
        "Linear structures: roads, railways, pipelines, dikes, tunnels, retaining walls",
        20.0,
        200.0,
        _EC7,
    ),
)


def guidance_grid_layout(
    project: Project, method_id: str, spacing_m: float, name: str | None = None
) -> Layout:
    """A regular layout of one method at a chosen spacing.

    Square grid aligned to the site's bounding box (first point half a spacing in from its
    lower-left corner, as the evaluation grid); every grid point inside the site and outside
    every exclusion gets a probe. Depths are planned by the model, as for any layout.

    Parameters
    ----------
    project : Project
    method_id : str
        Id of one of the project's methods.
    spacing_m : float
        Grid spacing (m), > 0.
    name : str, optional
        Layout name; default ``"Guidance grid: <method name> at <spacing> m"``.

    Returns
    -------
    Layout
        Probes ``<method>-G01``, ``<method>-G02``... row by row from the lower left.

    Raises
    ------
    ValueError
        Unknown method, a spacing that is not a positive number, or no grid point left in
        the site (spacing too coarse for the site, or every point excluded).
    """
    method = project.methods.get(method_id)
    if method is None:
        raise ValueError(
            f"no method with id {method_id!r}; methods are {', '.join(project.methods)}"
        )
    spacing = float(spacing_m)
    if not (math.isfinite(spacing) and spacing > 0):
        raise ValueError(f"the grid spacing must be a positive number of metres, not {spacing_m}")
    pts = np.vstack(project.site.outline.rings)
    span = pts.max(axis=0) - pts.min(axis=0)
    raster = math.ceil(span[0] / spacing + 1e-9) * math.ceil(span[1] / spacing + 1e-9)
    if raster > 4 * MAX_GUIDANCE_PROBES:  # refuse before allocating an absurd grid
        raise ValueError(
            f"a {spacing:g} m grid would put about {raster:,} probes on the site's bounding "
            f"box, over the limit of {MAX_GUIDANCE_PROBES:,}; use a coarser spacing"
        )
    xy = candidate_locations(project, project.origin, spacing)
    if len(xy) > MAX_GUIDANCE_PROBES:
        raise ValueError(
            f"a {spacing:g} m grid puts {len(xy):,} probes on the site, over the limit of "
            f"{MAX_GUIDANCE_PROBES:,}; use a coarser spacing"
        )
    if len(xy) == 0:
        raise ValueError(
            f"a {spacing:g} m grid puts no probe inside the site outside the exclusions; "
            "use a finer spacing"
        )
    width = max(2, len(str(len(xy))))
    probes = tuple(
        PlannedProbe(f"{method_id}-G{n:0{width}d}", method_id, float(x), float(y))
        for n, (x, y) in enumerate(xy, start=1)
    )
    return Layout(name or f"Guidance grid: {method.name} at {spacing:g} m", probes)


@dataclass(frozen=True)
class RankedOption:
    """One option of the ranking (``kind`` one of ``KINDS``); ``pareto`` over all options."""

    name: str
    kind: str
    cost: float
    duration_days: float
    metres: float
    information_gain_bits: float
    gain_per_cost: float | None
    pareto: bool
    n_probes: int
    # with design elements (docs/model.md "The value of an investigation"), else None:
    expected_saving: float | None = None
    net_value: float | None = None
    # (choice element name, probability the readings allow its cheaper design)
    p_cheaper_allowed: tuple[tuple[str, float], ...] = ()
    rig_days: float = 0.0  # every rig's days summed (``duration_days``: calendar days)
    # with requirements (probewise.core.requirements), else None; unmet in words
    requirements_met: bool | None = None
    unmet: tuple[str, ...] = ()

    @property
    def benefit_cost_ratio(self) -> float | None:
        """Expected saving per unit of investigation cost; 1 is break-even."""
        if self.expected_saving is None or self.cost <= 0:
            return None
        return self.expected_saving / self.cost


def layout_statuses(project: Project, evaluator: GridEvaluator | None, results) -> list:
    """Each result's ``RequirementStatus`` (all None when the project has no requirements)."""
    if project.requirements is None or project.requirements.empty:
        return [None] * len(results)
    analysis = evaluator.analysis if evaluator is not None else ProjectAnalysis(project)
    return [requirement_status(analysis, r.plans) for r in results]


def rank_options(
    project: Project,
    options: Sequence[Layout],
    kinds: Mapping[str, str],
    evaluator: GridEvaluator | None = None,
    known: Mapping[str, LayoutResult] | None = None,
) -> list[RankedOption]:
    """Evaluate options on the full evaluation grid and rank them by cost.

    Parameters
    ----------
    project : Project
    options : sequence of Layout
        Names must be unique.
    kinds : mapping of layout name to kind
        ``"hand"``, ``"guidance"`` or ``"optimised"`` for every option.
    evaluator : GridEvaluator, optional
        Reused when given (it holds the baseline solve); else one is built.
    known : mapping of layout name to LayoutResult, optional
        Results already computed on this project's full grid (e.g. ``OptimiseResult.result``)
        for options of those names; used instead of evaluating again.

    Returns
    -------
    list of RankedOption
        Sorted by cost (then by gain, highest first); Pareto flags over all options. With
        design elements: expected saving and net value set, sorted by net value (highest
        first, then by cost).

    Raises
    ------
    ValueError
        Duplicate option names, or a kind missing or not one of ``KINDS``;
        ``probewise.core.value.EmptyElementError`` when an element holds no cell.
    """
    names = [o.name for o in options]
    if len(set(names)) != len(names):
        dup = next(n for n in names if names.count(n) > 1)
        raise ValueError(f"two options are named {dup!r}; option names must be unique")
    for n in names:
        if kinds.get(n) not in KINDS:
            raise ValueError(f"option {n!r} needs a kind, one of {', '.join(KINDS)}")
    known = known or {}
    results: list[LayoutResult] = []
    for layout in options:
        if layout.name in known:
            results.append(known[layout.name])
            continue
        if evaluator is None:
            evaluator = GridEvaluator(project)
        results.append(evaluator.evaluate_layout(layout))
    flags = pareto_flags([r.cost for r in results], [r.information_gain_bits for r in results])
    savings: list[float | None] = [None] * len(results)
    chances: list[tuple[tuple[str, float], ...]] = [()] * len(results)
    if project.elements:
        if evaluator is None:
            evaluator = GridEvaluator(project)
        values = ValueEvaluator(
            project,
            evaluator.grid,
            evaluator.baseline.grid.mean_m,
            evaluator.baseline.grid.std_m,
            evaluator.analysis.baseline,
        )
        worth = layout_values(values, evaluator.analysis, options, results)
        savings = [v.expected_saving for v in worth]
        chances = [
            tuple(
                (e.name, e.p_cheaper_allowed) for e in v.elements if e.p_cheaper_allowed is not None
            )
            for v in worth
        ]
    statuses = layout_statuses(project, evaluator, results)
    ranked = [
        RankedOption(
            name=layout.name,
            kind=kinds[layout.name],
            cost=r.cost,
            duration_days=r.duration_days,
            metres=r.metres,
            information_gain_bits=r.information_gain_bits,
            gain_per_cost=r.gain_per_cost,
            pareto=flag,
            n_probes=len(layout.probes),
            expected_saving=saving,
            net_value=None if saving is None else saving - r.cost,
            p_cheaper_allowed=chance,
            rig_days=r.rig_days,
            requirements_met=None if status is None else status.met,
            unmet=() if status is None else status.unmet,
        )
        for layout, r, flag, saving, chance, status in zip(
            options, results, flags, savings, chances, statuses, strict=True
        )
    ]
    if project.elements:
        return sorted(ranked, key=lambda o: (-o.net_value, o.cost, o.name))
    return sorted(ranked, key=lambda o: (o.cost, -o.information_gain_bits, o.name))
