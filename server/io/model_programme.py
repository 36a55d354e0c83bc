"""The model file's refusal rules, rigs and cost items (docs/model-file.md "Refusal,
programme and cost items"): optional keys of each method and the optional top-level
``cost_items``, schema and cross-checks.

``programme_problems(data, normal)`` runs after the rest of the file has passed its own
structure checks, like the history sections: it validates these keys with pydantic, writes
their normalised form into ``normal`` and yields every problem as
``InputError(field, problem)``.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import fields
from typing import Annotated

from pydantic import Field, ValidationError

from probewise.core.model import CostItems
from probewise.errors import InputError
from probewise.io.model_checks import structure_problems
from probewise.io.model_common import show_value
from probewise.io.model_schema import Name, _Base

METHOD_KEYS = ("rigs", "move_days", "proves_refusal", "refusal")
COST_ITEM_KEYS = tuple(f.name for f in fields(CostItems))
MAX_RIGS = 50
MAX_RULES = 50

NonNegative = Annotated[float, Field(ge=0)]
Positive = Annotated[float, Field(gt=0)]


class Predrill(_Base):
    per_metre: NonNegative = 0.0
    metres_per_day: Positive


class RefusalRule(_Base):
    unit: Name
    chance: Annotated[float, Field(gt=0, le=1)] = 1.0
    predrill: Predrill | None = None


class MethodProgramme(_Base):
    rigs: Annotated[int, Field(ge=1, le=MAX_RIGS)] | None = None
    move_days: NonNegative | None = None
    proves_refusal: bool | None = None
    refusal: Annotated[list[RefusalRule], Field(max_length=MAX_RULES)] | None = None


class CostItemsModel(_Base):
    service_clearance_per_location: NonNegative = 0.0
    reinstatement_per_location: NonNegative = 0.0
    traffic_management_per_day: NonNegative = 0.0
    supervision_per_day: NonNegative = 0.0
    standing_per_day: NonNegative = 0.0
    standing_days_per_rig: NonNegative = 0.0
    reporting: NonNegative = 0.0
    contingency_percent: Annotated[float, Field(ge=0, le=100)] = 0.0


class ProgrammeSections(_Base):
    methods: list[MethodProgramme]
    cost_items: CostItemsModel | None = None


def programme_problems(data: dict, normal: dict) -> Iterator[InputError]:
    """Validate the methods' refusal and programme keys and ``cost_items`` of ``data``; put
    them, normalised, into ``normal`` and yield every problem."""
    given = {
        "methods": [
            {k: m[k] for k in METHOD_KEYS if k in m} if isinstance(m, dict) else {}
            for m in data.get("methods") or []
        ]
    }
    if "cost_items" in data:
        given["cost_items"] = data["cost_items"]
    try:
        sections = ProgrammeSections.model_validate(given)
    except ValidationError as exc:
        yield from structure_problems(exc)
        return
    out = sections.model_dump(mode="json")
    units = [u["name"] for u in normal["units"]]
    for k, (method, extra) in enumerate(zip(normal["methods"], out["methods"], strict=True)):
        for key in METHOD_KEYS:
            method.pop(key, None)
            if extra[key] is not None:
                method[key] = extra[key]
        seen: dict[str, int] = {}
        for r, rule in enumerate(extra["refusal"] or []):
            at = f"methods[{k}].refusal[{r}].unit"
            if rule["unit"] not in units:
                yield InputError(
                    at, f"no unit named {show_value(rule['unit'])}; units are {', '.join(units)}"
                )
            elif rule["unit"] in seen:
                first = seen[rule["unit"]]
                yield InputError(
                    at, f"{show_value(rule['unit'])} has a rule already (refusal[{first}])"
                )
            seen.setdefault(rule["unit"], r)
            if rule["predrill"] is None:
                rule.pop("predrill")
    if out["cost_items"] is not None:
        normal["cost_items"] = out["cost_items"]
