"""The model file's levels and site history: ``ground_level``, ``reference_levels`` and
``history`` (docs/model-file.md "Levels and site history"), schema and cross-checks.

``history_problems(data, normal)`` runs after the rest of the file has passed its own
structure checks: it validates these three optional sections with pydantic, writes their
normalised form into ``normal`` and yields every problem as ``InputError(field, problem)``.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Annotated

import numpy as np
from pydantic import Field, ValidationError, model_validator

from probewise.errors import InputError
from probewise.io.model_checks import structure_problems
from probewise.io.model_common import MAX_COORD_M, ProblemError
from probewise.io.model_common import number_text as _num
from probewise.io.model_common import show_value as _show
from probewise.io.model_schema import Name, PolygonGeometry, _Base

GAMMA_WATER_KN_M3 = 9.81
MAX_LEVEL_M = 1e4  # |level|: nothing on Earth's surface
MAX_GROUND_POINTS = 20_000
MAX_HISTORY_RULES = 20
MAX_ENVIRONMENTS = 200
MAX_REFERENCE_LEVELS = 200
SECTIONS = ("ground_level", "reference_levels", "history")

Level = Annotated[float, Field(ge=-MAX_LEVEL_M, le=MAX_LEVEL_M)]
Coordinate = Annotated[float, Field(ge=-MAX_COORD_M, le=MAX_COORD_M)]
LevelRef = Level | Name  # a number in the project datum, or a reference level's name


class GroundPoint(_Base):
    x: Coordinate
    y: Coordinate
    level_m: Level


class GroundLevel(_Base):
    """A constant level or at least 3 surveyed points, not all on one line."""

    datum: str = ""
    level_m: Level | None = None
    points: Annotated[list[GroundPoint], Field(max_length=MAX_GROUND_POINTS)] | None = None

    @model_validator(mode="after")
    def _one_source(self) -> GroundLevel:
        if (self.level_m is None) == (self.points is None):
            raise ProblemError("", "give either level_m (a constant) or points, not both")
        if self.points is not None:
            problem = _points_problem(self.points)
            if problem:
                raise ProblemError(*problem)
        return self


def _points_problem(points: list[GroundPoint]) -> tuple[str, str] | None:
    """Why surveyed points cannot be triangulated: too few, repeated or all on one line."""
    if len(points) < 3:
        return "points", f"needs at least 3 points to triangulate (has {len(points)})"
    xy = np.array([(p.x, p.y) for p in points], dtype=float)
    seen: dict[tuple[float, float], int] = {}
    for i, key in enumerate(map(tuple, xy)):
        if key in seen:
            return f"points[{i}]", f"repeats the position of points[{seen[key]}]"
        seen[key] = i
    centred = xy - xy.mean(axis=0)
    sv = np.linalg.svd(centred, compute_uv=False)
    if sv[1] <= 1e-9 * max(sv[0], 1.0):
        return "points", "all lie on one line; a ground surface needs points that span an area"
    return None


class ReferenceLevel(_Base):
    name: Name
    level_m: Level


class ReferenceLevels(_Base):
    datum_shift_m: Level = 0.0
    levels: Annotated[list[ReferenceLevel], Field(max_length=MAX_REFERENCE_LEVELS)]


class LevelBand(_Base):
    level_min: LevelRef
    level_max: LevelRef


class Environment(_Base):
    name: Name
    geometry: PolygonGeometry
    level_min: LevelRef
    level_max: LevelRef


class CcRange(_Base):
    min: Annotated[float, Field(gt=0, le=10)]
    max: Annotated[float, Field(gt=0, le=10)]

    @model_validator(mode="after")
    def _ordered(self) -> CcRange:
        if self.min > self.max:
            raise ProblemError("min", f"{_num(self.min)} is above max {_num(self.max)}")
        return self


class SettlementSpec(_Base):
    compressible_unit: str
    cc: CcRange
    e0: Annotated[float, Field(gt=0, le=50)]
    unit_weight_kn_m3: Annotated[float, Field(le=100)]
    fill_unit_weight_kn_m3: Annotated[float, Field(gt=0, le=100)]
    surcharge_kpa: Annotated[float, Field(ge=0, le=1e5)] = 0.0
    # largest sublayer of the compressible unit (m); absent: 0.5 (probewise.core.history)
    sublayer_m: Annotated[float, Field(gt=0, le=10)] | None = None

    @model_validator(mode="after")
    def _heavier_than_water(self) -> SettlementSpec:
        if self.unit_weight_kn_m3 <= GAMMA_WATER_KN_M3:
            raise ProblemError(
                "unit_weight_kn_m3",
                f"{_num(self.unit_weight_kn_m3)} kN/m3 is not above water's "
                f"{GAMMA_WATER_KN_M3} kN/m3 (the saturated unit weight gives the effective "
                "stress)",
            )
        return self


class HistoryRule(_Base):
    name: Name
    base_of: str
    environments: Annotated[list[Environment], Field(max_length=MAX_ENVIRONMENTS)]
    outside: LevelBand | None = None
    settlement: SettlementSpec | None = None


class HistorySections(_Base):
    ground_level: GroundLevel | None = None
    reference_levels: ReferenceLevels | None = None
    history: Annotated[list[HistoryRule], Field(max_length=MAX_HISTORY_RULES)] = Field(
        default_factory=list
    )


def resolve_level(value: float | str, reference: dict | None) -> float:
    """A level in the project datum: a number as given, a reference name -> its level_m
    plus the table's datum_shift_m (the name is known to exist)."""
    if isinstance(value, str):
        table = {r["name"]: r["level_m"] for r in reference["levels"]}
        return float(table[value]) + float(reference["datum_shift_m"])
    return float(value)


def _band_problems(band: dict, at: str, reference: dict | None) -> Iterator[InputError]:
    names = [r["name"] for r in reference["levels"]] if reference else []
    known = True
    for key in ("level_min", "level_max"):
        value = band[key]
        if isinstance(value, str) and value not in names:
            known = False
            listed = ", ".join(names) if names else "none: the file has no reference_levels"
            yield InputError(f"{at}.{key}", f"{_show(value)} is not a reference level ({listed})")
    if known:
        lo = resolve_level(band["level_min"], reference)
        hi = resolve_level(band["level_max"], reference)
        if lo > hi:
            yield InputError(
                f"{at}.level_min",
                f"{_num(lo)} m is above level_max {_num(hi)} m (project datum)",
            )


def _rule_problems(rule: dict, r: int, m: dict) -> Iterator[InputError]:
    at = f"history[{r}]"
    order = {u["name"]: i for i, u in enumerate(m["units"])}
    basal = len(m["units"]) - 1
    k = order.get(rule["base_of"])
    if k is None or k == basal:
        what = "is the basal unit, which has no base" if k == basal else "is not one of the units"
        yield InputError(f"{at}.base_of", f"{_show(rule['base_of'])} {what}")
    reference = m.get("reference_levels")
    for e, env in enumerate(rule["environments"]):
        yield from _band_problems(env, f"{at}.environments[{e}]", reference)
    if rule["outside"] is not None:
        yield from _band_problems(rule["outside"], f"{at}.outside", reference)
    spec = rule["settlement"]
    if spec is None:
        return
    c = order.get(spec["compressible_unit"])
    field = f"{at}.settlement.compressible_unit"
    if c is None:
        yield InputError(field, f"{_show(spec['compressible_unit'])} is not one of the units")
    elif c == basal:
        yield InputError(
            field,
            f"{_show(spec['compressible_unit'])} is the basal unit, which has no thickness",
        )
    elif k is not None and c <= k:
        yield InputError(
            field,
            f"{_show(spec['compressible_unit'])} is not below the base of "
            f"{_show(rule['base_of'])} (the boundary this rule bounds); the compressible unit "
            "lies under the former surface",
        )


MAX_TRANSITION_M = 1e4


def transition_problems(normal: dict) -> Iterator[InputError]:
    """``zones[i].transition_m`` (optional): a width in metres, 0 or more."""
    for z, zone in enumerate(normal.get("zones") or []):
        if "transition_m" not in zone:
            continue
        value = zone["transition_m"]
        ok = isinstance(value, int | float) and not isinstance(value, bool)
        if not ok or not 0 <= value <= MAX_TRANSITION_M:
            yield InputError(
                f"zones[{z}].transition_m",
                f"must be a width in metres from 0 to {MAX_TRANSITION_M:g} (got {_show(value)})",
            )
        else:
            zone["transition_m"] = float(value)


def history_problems(data: dict, normal: dict) -> Iterator[InputError]:
    """Validate the levels and history sections of ``data`` (and the zones' transition
    widths); put them, normalised, into ``normal`` (a model that passed its other checks) and
    yield every problem."""
    yield from transition_problems(normal)
    given = {key: data[key] for key in SECTIONS if key in data}
    if not given:
        return
    try:
        sections = HistorySections.model_validate(given)
    except ValidationError as exc:
        yield from structure_problems(exc)
        return
    out = sections.model_dump(mode="json")
    if out["ground_level"] is not None:  # the one of level_m / points given, no null
        out["ground_level"] = {k: v for k, v in out["ground_level"].items() if v is not None}
    for rule in out["history"]:  # an absent sublayer thickness stays absent, not null
        if rule["settlement"] is not None and rule["settlement"]["sublayer_m"] is None:
            del rule["settlement"]["sublayer_m"]
    for key in SECTIONS:
        if key in given:
            normal[key] = out[key]
    reference = out["reference_levels"]
    if reference is not None:
        first: dict[str, int] = {}
        for i, level in enumerate(reference["levels"]):
            if level["name"] in first:
                yield InputError(
                    f"reference_levels.levels[{i}].name",
                    f"{_show(level['name'])} is used twice (also levels[{first[level['name']]}])",
                )
            first.setdefault(level["name"], i)
    rules = out["history"]
    if rules and out["ground_level"] is None:
        yield InputError(
            "history", "needs ground_level: former levels become depths below ground level"
        )
    names: dict[str, int] = {}
    for r, rule in enumerate(rules):
        if rule["name"] in names:
            yield InputError(
                f"history[{r}].name",
                f"{_show(rule['name'])} is used twice (also history[{names[rule['name']]}])",
            )
        names.setdefault(rule["name"], r)
        yield from _rule_problems(rule, r, normal)
