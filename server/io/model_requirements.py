"""The model file's ``requirements`` and each method's ``delivers`` (docs/model-file.md
"Requirements" and "What a method delivers"): schema and cross-checks.

``requirements_problems(data, normal)`` runs after the rest of the file has passed its own
checks (as the history sections do): it validates these optional parts with pydantic, writes
their normalised form into ``normal`` and yields every problem as ``InputError(field,
problem)``.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Annotated, Literal

from pydantic import Field, ValidationError, model_validator

from probewise.core.requirements import MAX_TESTS, tests_for_characteristic
from probewise.errors import InputError
from probewise.io.model_checks import structure_problems
from probewise.io.model_common import MAX_DEPTH_M, ProblemError, names_text, show_value
from probewise.io.model_schema import Name, _Base

MAX_ITEMS = 200
Count = Annotated[int, Field(ge=0, le=100_000)]
PositiveCount = Annotated[int, Field(ge=1, le=100_000)]
Text = Annotated[str, Field(max_length=200)]
HOW_MANY = ("every_m", "per_unit", "per_probe", "continuous")


class Delivery(_Base):
    """One thing a probe of the method gives: exactly one of the ``HOW_MANY`` keys."""

    kind: Literal["sample", "in_situ", "installation", "log"]
    name: Name
    parameters: Annotated[list[Text], Field(max_length=MAX_ITEMS)] = Field(default_factory=list)
    units: Annotated[list[str], Field(max_length=MAX_ITEMS)] = Field(default_factory=list)
    every_m: Annotated[float, Field(gt=0, le=MAX_DEPTH_M)] | None = None
    per_unit: PositiveCount | None = None
    per_probe: PositiveCount | None = None
    continuous: bool = False
    quality_class: Annotated[int, Field(ge=1, le=5)] | None = None
    category: Literal["A", "B", "C"] | None = None

    @model_validator(mode="after")
    def _one_rate(self) -> Delivery:
        given = [k for k in HOW_MANY if getattr(self, k) not in (None, False)]
        if len(given) != 1:
            shown = ", ".join(given) if given else "none"
            raise ProblemError(
                "", f"give exactly one of {', '.join(HOW_MANY)} (how many; given: {shown})"
            )
        if self.kind != "sample" and (self.quality_class or self.category):
            raise ProblemError("quality_class", "quality class and category are for samples")
        return self


class MethodDelivers(_Base):
    delivers: Annotated[list[Delivery], Field(max_length=MAX_ITEMS)] | None = None


class Calibration(_Base):
    method: str
    for_: Annotated[list[str], Field(min_length=1, max_length=MAX_ITEMS)] = Field(alias="for")
    per: PositiveCount
    within_m: Annotated[float, Field(gt=0, le=1e5)]


class Characteristic(_Base):
    """The number of results a characteristic value needs (EN 1990 Annex D)."""

    cov: Annotated[float, Field(gt=0, le=2)]
    max_reduction: Annotated[float, Field(gt=0, lt=1)]
    v_known: bool = False

    @model_validator(mode="after")
    def _reachable(self) -> Characteristic:
        if tests_for_characteristic(self.cov, self.max_reduction, self.v_known) is None:
            raise ProblemError(
                "max_reduction",
                f"{self.max_reduction:g} cannot be reached with V = {self.cov:g} by "
                f"{MAX_TESTS} results or fewer (k_n is never below 1.645, so it must be at "
                f"least {1.645 * self.cov:.3g})",
            )
        return self


class TestNeed(_Base):
    unit: str
    parameter: Annotated[Text, Field(min_length=1)]
    test: Text = ""
    count: Count | None = None
    characteristic: Characteristic | None = None

    @model_validator(mode="after")
    def _one_count(self) -> TestNeed:
        if (self.count is None) == (self.characteristic is None):
            raise ProblemError("", "give either count or characteristic")
        return self


class Requirements(_Base):
    min_probes: Annotated[dict[str, Count], Field(max_length=MAX_ITEMS)] = Field(
        default_factory=dict
    )
    calibration: Annotated[list[Calibration], Field(max_length=MAX_ITEMS)] = Field(
        default_factory=list
    )
    tests: Annotated[list[TestNeed], Field(max_length=MAX_ITEMS)] = Field(default_factory=list)


class RequirementSections(_Base):
    requirements: Requirements | None = None
    methods: list[MethodDelivers] = Field(default_factory=list)


def required_count(need: dict) -> tuple[int, str]:
    """The number of results a test requirement asks for, and where it comes from."""
    char = need.get("characteristic")
    if char is None:
        return int(need["count"]), "given"
    n = tests_for_characteristic(char["cov"], char["max_reduction"], char["v_known"])
    known = "known" if char["v_known"] else "unknown"
    return int(n), (
        f"EN 1990 Annex D: V = {char['cov']:g} ({known}), characteristic value at most "
        f"{100 * char['max_reduction']:g}% below the mean"
    )


def requirements_problems(data: dict, normal: dict) -> Iterator[InputError]:
    """Validate ``requirements`` and every method's ``delivers``; put them, normalised, into
    ``normal`` (a model that passed its other checks) and yield every problem."""
    methods = data.get("methods") if isinstance(data.get("methods"), list) else []
    given = {"methods": [{"delivers": m.get("delivers")} for m in methods if isinstance(m, dict)]}
    if "requirements" in data:
        given["requirements"] = data["requirements"]
    try:
        sections = RequirementSections.model_validate(given)
    except ValidationError as exc:
        yield from structure_problems(exc)
        return
    out = sections.model_dump(mode="json", by_alias=True)
    units = [u["name"] for u in normal["units"]]
    method_ids = [m["id"] for m in normal["methods"]]
    for i, (method, spec) in enumerate(zip(normal["methods"], out["methods"], strict=False)):
        if spec["delivers"] is None:
            method.pop("delivers", None)
            continue
        method["delivers"] = spec["delivers"]
        for d, item in enumerate(spec["delivers"]):
            for u, name in enumerate(item["units"]):
                if name not in units:
                    yield _unit_error(f"methods[{i}].delivers[{d}].units[{u}]", name, units)
    req = out.get("requirements")
    if "requirements" not in given:
        return
    normal["requirements"] = req
    if req is None:
        return
    yield from _requirement_problems(req, units, method_ids)


def _unit_error(field: str, name: str, units: list[str]) -> InputError:
    return InputError(field, f"{show_value(name)} is not one of the units ({names_text(units)})")


def _method_error(field: str, mid: str, method_ids: list[str]) -> InputError:
    known = names_text(method_ids)
    return InputError(field, f"{show_value(mid)} is not one of the method ids ({known})")


def _requirement_problems(req: dict, units: list[str], method_ids: list[str]):
    for mid in req["min_probes"]:
        if mid not in method_ids:
            yield _method_error(f"requirements.min_probes.{mid}", mid, method_ids)
    for c, rule in enumerate(req["calibration"]):
        at = f"requirements.calibration[{c}]"
        if rule["method"] not in method_ids:
            yield _method_error(f"{at}.method", rule["method"], method_ids)
        for f, mid in enumerate(rule["for"]):
            if mid not in method_ids:
                yield _method_error(f"{at}.for[{f}]", mid, method_ids)
            elif mid == rule["method"]:
                yield InputError(f"{at}.for[{f}]", "a method cannot calibrate itself")
    for t, need in enumerate(req["tests"]):
        if need["unit"] not in units:
            yield _unit_error(f"requirements.tests[{t}].unit", need["unit"], units)
        if need.get("characteristic") is None:
            need.pop("characteristic", None)
        if need.get("count") is None:
            need.pop("count", None)
