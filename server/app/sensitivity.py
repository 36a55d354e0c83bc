"""Does the best option hold when the ground model is wrong by a factor of two?

The ranking of the options (probewise.core.options.rank_options) is recomputed on changed
copies of the ground model: every unit's practical range x0.5 and x2, every unit's thickness
spread (the standard deviation its range gives) x0.5 and x2, and, when asked, the model fitted
to the existing readings (server/app/fit.py). In each the best option is the one the pages show
first (``default_layout_name``): the highest net value when the model has design elements, else
the Pareto-efficient option with the most information gain per unit cost. The answer says
whether the best option as entered stays best in every case, and where it does not, which
option takes its place (docs/model.md "Sensitivity of the ranking").
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

from probewise.app.fit import with_ranges_scaled
from probewise.app.schedule import default_layout_name
from probewise.core.model import Layout, Project
from probewise.core.options import RankedOption, rank_options

FACTORS = (0.5, 2.0)


@dataclass(frozen=True)
class Scenario:
    """One ranking: the change made to the model, the best option, the measure that ranks."""

    key: str  # "as_entered", "ranges_x0.5", "spreads_x2", "fitted"
    label: str
    best: str | None
    measure: float | None  # net value (money) or information gain per unit cost
    base_best_measure: float | None  # the same measure of the best option as entered
    base_best_place: int | None  # 1 = first; the place of the option best as entered
    order: tuple[tuple[str, float | None], ...]  # (option, measure), best first


@dataclass(frozen=True)
class Sensitivity:
    by_value: bool  # ranked by net value (design elements) rather than gain per cost
    scenarios: tuple[Scenario, ...]

    @property
    def best(self) -> str | None:
        return self.scenarios[0].best if self.scenarios else None

    @property
    def holds(self) -> bool:
        """True when the best option as entered is best in every scenario."""
        return self.best is not None and all(s.best == self.best for s in self.scenarios)

    @property
    def changes(self) -> tuple[Scenario, ...]:
        return tuple(s for s in self.scenarios if s.best != self.best)


def with_spreads_scaled(project: Project, factor: float) -> Project:
    """The project with every unit's thickness spread (std) multiplied by ``factor``; the hard
    minimum and maximum of each range stay."""
    units = tuple(
        u
        if u.thickness is None
        else dataclasses.replace(u, spread_multiplier=u.spread_multiplier * factor)
        for u in project.ground.units
    )
    return dataclasses.replace(project, ground=dataclasses.replace(project.ground, units=units))


def _measure(option: RankedOption, by_value: bool) -> float | None:
    return option.net_value if by_value else option.gain_per_cost


def _ordered(ranking: Sequence[RankedOption], by_value: bool) -> list[RankedOption]:
    """Best first by the measure that ranks (options without one last)."""
    return sorted(
        ranking,
        key=lambda o: (
            _measure(o, by_value) is None,
            -(_measure(o, by_value) or 0.0),
            o.cost,
            o.name,
        ),
    )


def scenario_of(
    key: str,
    label: str,
    project: Project,
    ranking: Sequence[RankedOption],
    base_best: str | None,
) -> Scenario:
    by_value = bool(project.elements)
    best = default_layout_name(project, ranking)
    ordered = _ordered(ranking, by_value)
    names = [o.name for o in ordered]
    place = names.index(base_best) + 1 if base_best in names else None
    measures = {o.name: _measure(o, by_value) for o in ordered}
    return Scenario(
        key=key,
        label=label,
        best=best,
        measure=measures.get(best) if best else None,
        base_best_measure=measures.get(base_best) if base_best else None,
        base_best_place=place,
        order=tuple((o.name, measures[o.name]) for o in ordered),
    )


def ranking_sensitivity(
    project: Project,
    kinds: Mapping[str, str],
    ranking: Sequence[RankedOption] | None = None,
    fitted: Project | None = None,
    rank: Callable[[Project, list[Layout]], list[RankedOption]] | None = None,
) -> Sensitivity:
    """The ranking of the project's layouts as entered and on every changed model.

    Parameters
    ----------
    project : Project
    kinds : mapping of layout name to kind ("hand", "guidance", "optimised")
    ranking : the ranking as entered, when already computed (reused)
    fitted : the project with the fit to its readings adopted, optional
    rank : ``rank(project, layouts)``, the ranking of a changed model (default: rank_options)
    """
    layouts = list(project.layouts)

    def default_rank(p: Project, options: list[Layout]) -> list[RankedOption]:
        return rank_options(p, options, kinds)

    rank = rank or default_rank
    base = list(ranking) if ranking is not None else rank(project, layouts)
    base_best = default_layout_name(project, base)
    cases: list[tuple[str, str, Project]] = []
    for factor in FACTORS:
        cases.append(
            (
                f"ranges_x{factor:g}",
                f"Practical ranges \u00d7{factor:g}",
                with_ranges_scaled(project, factor),
            )
        )
    for factor in FACTORS:
        cases.append(
            (
                f"spreads_x{factor:g}",
                f"Thickness spreads \u00d7{factor:g}",
                with_spreads_scaled(project, factor),
            )
        )
    if fitted is not None:
        cases.append(("fitted", "Fitted to the readings", fitted))
    scenarios = [scenario_of("as_entered", "As entered", project, base, base_best)]
    for key, label, changed in cases:
        scenarios.append(scenario_of(key, label, changed, rank(changed, layouts), base_best))
    return Sensitivity(by_value=bool(project.elements), scenarios=tuple(scenarios))


def sensitivity_sentence(s: Sensitivity) -> str:
    """One sentence: does the best option hold, and where not, what takes its place."""
    if s.best is None:
        return "There is no option to rank."
    measure = "net value" if s.by_value else "information gain per unit cost"
    if s.holds:
        return (
            f"{s.best} stays the best option (by {measure}) in every case: with the practical "
            "ranges and the thickness spreads halved and doubled"
            + (" and with the model fitted to the readings" if _has(s, "fitted") else "")
            + "."
        )
    changed = "; ".join(f"{c.label.lower()}: {c.best}" for c in s.changes)
    return (
        f"{s.best} is the best option (by {measure}) as entered, but not in every case "
        f"({changed}): the choice depends on ground-model figures that are uncertain; check "
        "them (the Readings page fits them to the existing probes) before committing."
    )


def _has(s: Sensitivity, key: str) -> bool:
    return any(x.key == key for x in s.scenarios)
