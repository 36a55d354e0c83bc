"""Stage 4 of model-file validation: cross-references on a structurally valid, normalised model.

Unique names, units named by other sections, methods named by probes, observed depths in
order, probes inside the site, a grid of sensible size. Units come first (a broken unit list
makes every reference to a unit look wrong), then the other sections in document order.

Each section has one check ``check(model, refs) -> problems`` in ``REFERENCE_CHECKS``; a new
section of the model file adds its check there.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np
import shapely

from probewise.errors import InputError
from probewise.io.model_common import MAX_GRID_CELLS, names_text, number_text, path_key, show_value
from probewise.io.model_elements import element_problems
from probewise.io.model_geometry import to_shapely


@dataclass(frozen=True)
class References:
    """What the checks look names up in: the site, the units in order, the methods by id
    (the first of a repeated id)."""

    site: shapely.Geometry
    unit_names: list[str]
    order: dict[str, int]  # unit name -> index, top to bottom
    non_basal: frozenset[str]  # units with a base: every one but the last
    methods: dict[str, dict]

    def unit_problem(self, name: str, need_base: bool = True) -> str | None:
        """Why ``name`` cannot be referred to as a unit (with a base, when ``need_base``)."""
        if name not in self.order:
            return f"{show_value(name)} is not one of the units ({names_text(self.unit_names)})"
        if need_base and name not in self.non_basal:
            return f"{show_value(name)} is the basal unit, which has no base (no boundary below it)"
        return None

    def method_problem(self, method_id: str) -> str | None:
        if method_id in self.methods:
            return None
        known = names_text(list(self.methods))
        return f"{show_value(method_id)} is not one of the method ids ({known})"


def references_of(m: dict) -> References:
    unit_names = [u["name"] for u in m["units"]]
    methods: dict[str, dict] = {}
    for method in m["methods"]:
        methods.setdefault(method["id"], method)
    return References(
        site=to_shapely(m["site"]),
        unit_names=unit_names,
        order={name: i for i, name in enumerate(unit_names)},
        non_basal=frozenset(unit_names[:-1]),
        methods=methods,
    )


def _unit_problems(m: dict, refs: References) -> Iterator[InputError]:
    units = m["units"]
    if len(units) < 2:
        yield InputError("units", "needs at least 2 units (the last one is the basal unit)")
    first_at: dict[str, int] = {}
    for i, unit in enumerate(units):
        if unit["name"] in first_at:
            yield InputError(
                f"units[{i}].name",
                f"{show_value(unit['name'])} is used twice (also units[{first_at[unit['name']]}])",
            )
        first_at.setdefault(unit["name"], i)
        is_basal = i == len(units) - 1
        if is_basal and len(units) >= 2 and unit["thickness_m"] is not None:
            yield InputError(
                f"units[{i}].thickness_m",
                "the basal (last) unit has no thickness; remove it or add a unit below",
            )
        if is_basal and unit.get("presence") is not None:
            yield InputError(
                f"units[{i}].presence",
                "the basal (last) unit is present everywhere; presence needs a thickness",
            )
        if not is_basal:
            for key in ("thickness_m", "correlation"):
                if unit[key] is None:
                    yield InputError(
                        f"units[{i}].{key}",
                        "is required on every unit but the basal (last) one",
                    )


def _grid_problems(m: dict, refs: References) -> Iterator[InputError]:
    area_m2 = float(refs.site.area)
    spacing = m["grid_spacing_m"]
    # a spacing so small that its square underflows to 0 gives "infinitely many" cells
    cells = area_m2 / spacing**2 if spacing**2 > 0 else math.inf
    if cells > MAX_GRID_CELLS:
        finest = math.ceil(math.sqrt(area_m2 / MAX_GRID_CELLS) * 10) / 10
        yield InputError(
            "grid_spacing_m",
            f"{number_text(spacing)} m gives about {cells:.3g} grid cells over the site "
            f"({area_m2:.0f} m2); at most {MAX_GRID_CELLS} are allowed, so use at least "
            f"{finest:g} m",
        )
    elif cells < 1:
        yield InputError(
            "grid_spacing_m",
            f"{number_text(spacing)} m is coarser than the site ({area_m2:.0f} m2); "
            "use a finer spacing",
        )


def _unit_name_problems(m: dict, refs: References) -> Iterator[InputError]:
    """Zones, boundaries of interest and bounds name units (by the boundary at their base)."""
    for z, zone in enumerate(m["zones"]):
        for name in zone["units"]:
            problem = refs.unit_problem(name)
            if problem:
                yield InputError(f"zones[{z}].units.{path_key(name)}", problem)

    seen: dict[str, int] = {}
    for b, boi in enumerate(m["boundaries_of_interest"]):
        problem = refs.unit_problem(boi["base_of"])
        if problem:
            yield InputError(f"boundaries_of_interest[{b}].base_of", problem)
        elif boi["base_of"] in seen:
            yield InputError(
                f"boundaries_of_interest[{b}].base_of",
                f"{show_value(boi['base_of'])} is listed twice "
                f"(also boundaries_of_interest[{seen[boi['base_of']]}])",
            )
        seen.setdefault(boi["base_of"], b)

    for b, bound in enumerate(m["bounds"]):
        problem = refs.unit_problem(bound["base_of"])
        if problem:
            yield InputError(f"bounds[{b}].base_of", problem)


def _method_problems(m: dict, refs: References) -> Iterator[InputError]:
    seen: set[str] = set()
    for k, method in enumerate(m["methods"]):
        if method["id"] in seen:
            yield InputError(f"methods[{k}].id", f"{show_value(method['id'])} is used twice")
        seen.add(method["id"])
        for c, name in enumerate(method["cannot_penetrate"]):
            problem = refs.unit_problem(name, need_base=False)
            if problem:
                yield InputError(f"methods[{k}].cannot_penetrate[{c}]", problem)
        for name in method["precision_m"]:
            problem = refs.unit_problem(name)
            if problem:
                yield InputError(f"methods[{k}].precision_m.{path_key(name)}", problem)


def _observed_problems(probe: dict, at: str, refs: References) -> Iterator[InputError]:
    """An existing probe's observed bases: known units, above the final depth, in order."""
    order = refs.order
    above: tuple[str, float] | None = None
    for name, depth in sorted(
        probe["observed"].items(), key=lambda kv: order.get(kv[0], len(order))
    ):
        field = f"{at}.observed.{path_key(name)}"
        problem = refs.unit_problem(name)
        if problem:
            yield InputError(field, problem)
            continue
        if depth > probe["final_depth_m"]:
            yield InputError(
                field,
                f"{number_text(depth)} m is below the final depth "
                f"{number_text(probe['final_depth_m'])} m",
            )
        if above is not None and depth < above[1]:
            yield InputError(
                field,
                f"base at {number_text(depth)} m is above the base of {show_value(above[0])} at "
                f"{number_text(above[1])} m (depths must not decrease down the units; equal "
                "depths record an absent unit)",
            )
        above = (name, depth)


def _existing_problems(m: dict, refs: References) -> Iterator[InputError]:
    existing = m["existing"]
    yield from probe_site_problems(refs.site, existing, "existing")
    ids: dict[str, int] = {}
    for p, probe in enumerate(existing):
        at = f"existing[{p}]"
        if probe["id"] in ids:
            yield InputError(
                f"{at}.id",
                f"{show_value(probe['id'])} is used twice (also existing[{ids[probe['id']]}])",
            )
        ids.setdefault(probe["id"], p)
        problem = refs.method_problem(probe["method"])
        if problem:
            yield InputError(f"{at}.method", problem)
        yield from _observed_problems(probe, at, refs)
        for name in probe["precision_m"]:
            problem = refs.unit_problem(name)
            if problem:
                yield InputError(f"{at}.precision_m.{path_key(name)}", problem)


def _planned_problems(layout: dict, i: int, refs: References) -> Iterator[InputError]:
    """A layout's probes: unique ids, known methods, depths within the method's reach."""
    ids: dict[str, int] = {}
    for p, probe in enumerate(layout["probes"]):
        at = f"layouts[{i}].probes[{p}]"
        if probe["id"] in ids:
            yield InputError(
                f"{at}.id",
                f"{show_value(probe['id'])} is used twice in this layout "
                f"(also probes[{ids[probe['id']]}])",
            )
        ids.setdefault(probe["id"], p)
        problem = refs.method_problem(probe["method"])
        if problem:
            yield InputError(f"{at}.method", problem)
        elif probe["depth_m"] is not None:
            limit = refs.methods[probe["method"]]["max_depth_m"]
            if probe["depth_m"] > limit:
                yield InputError(
                    f"{at}.depth_m",
                    f"{number_text(probe['depth_m'])} m is deeper than the maximum depth of "
                    f"method {show_value(probe['method'])} ({number_text(limit)} m)",
                )


def _layout_problems(m: dict, refs: References) -> Iterator[InputError]:
    names: dict[str, int] = {}
    for i, layout in enumerate(m["layouts"]):
        if layout["name"] in names:
            yield InputError(
                f"layouts[{i}].name",
                f"{show_value(layout['name'])} is used twice "
                f"(also layouts[{names[layout['name']]}])",
            )
        names.setdefault(layout["name"], i)
        yield from probe_site_problems(refs.site, layout["probes"], f"layouts[{i}].probes")
        yield from _planned_problems(layout, i, refs)


def probe_site_problems(
    site: shapely.Geometry, probes: list[dict], where: str
) -> Iterator[InputError]:
    """Probes outside the site (on the boundary counts as inside); one vectorised test."""
    if not probes:
        return
    xs = np.array([p["x"] for p in probes], dtype=float)
    ys = np.array([p["y"] for p in probes], dtype=float)
    inside = shapely.intersects_xy(site, xs, ys)
    for p in np.flatnonzero(~inside):
        probe = probes[p]
        yield InputError(
            f"{where}[{p}]",
            f"probe {show_value(probe['id'])} at ({probe['x']:g}, {probe['y']:g}) "
            "lies outside the site",
        )


def _element_problems(m: dict, refs: References) -> Iterator[InputError]:
    yield from element_problems(m, refs.site, refs.unit_problem)


ReferenceCheck = Callable[[dict, References], Iterator[InputError]]

# One check per section, units first, then document order.
REFERENCE_CHECKS: list[ReferenceCheck] = [
    _unit_problems,
    _grid_problems,
    _unit_name_problems,
    _method_problems,
    _existing_problems,
    _layout_problems,
    _element_problems,
]


def reference_problems(m: dict) -> Iterator[InputError]:
    """Every cross-reference problem of a structurally valid, normalised model, in order."""
    refs = references_of(m)
    for check in REFERENCE_CHECKS:
        yield from check(m, refs)
