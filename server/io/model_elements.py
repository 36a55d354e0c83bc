"""The model file's optional ``elements`` section: design elements whose cost follows a
boundary (docs/model-file.md "Design elements"; docs/model.md "The value of an investigation").

The schema (pydantic) is a field of ``probewise.io.model_schema.ModelFile``; the cross-reference
checks are one entry of ``probewise.io.model_references.REFERENCE_CHECKS``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from typing import Annotated, Any, Literal

import numpy as np
import shapely
from pydantic import AfterValidator, BaseModel, ConfigDict, Field, ValidationError, model_validator

from probewise.errors import InputError
from probewise.io.model_checks import plain_message
from probewise.io.model_common import MAX_DEPTH_M, ProblemError, field_path
from probewise.io.model_geometry import check_site_geometry, to_shapely

FRACTILE_MIN, FRACTILE_MAX = 0.5, 0.999
MAX_CELL_TEST = 1_000_000  # grid centres tested for "the element holds a cell"


def _problem(sub: str, text: str) -> ValueError:
    return ProblemError(sub, text)


def _geometry(value: dict) -> dict:
    return check_site_geometry(value)


def _name(value: str) -> str:
    if not value.strip():
        raise _problem("", "must not be empty")
    return value


class _Base(BaseModel):
    model_config = ConfigDict(
        strict=True, allow_inf_nan=False, extra="allow", populate_by_name=True
    )


class QuantityConsequence(_Base):
    kind: Literal["quantity"]
    rate_per_m3: Annotated[float, Field(ge=0)]
    reference_depth_m: Annotated[float, Field(ge=0, le=MAX_DEPTH_M)] = 0.0


class ChoiceConsequence(_Base):
    kind: Literal["choice"]
    basis: Literal["mean"] = "mean"
    threshold_depth_m: Annotated[float, Field(gt=0, le=MAX_DEPTH_M)]
    cheaper_cost: Annotated[float, Field(ge=0)]
    robust_cost: Annotated[float, Field(ge=0)]

    @model_validator(mode="after")
    def _ordered(self) -> ChoiceConsequence:
        if self.robust_cost < self.cheaper_cost:
            raise _problem(
                "robust_cost",
                f"{self.robust_cost:g} is below cheaper_cost {self.cheaper_cost:g}; the robust "
                "design is the one that costs at least as much",
            )
        return self


CONSEQUENCES = {"quantity": QuantityConsequence, "choice": ChoiceConsequence}


def _consequence(value: dict) -> dict:
    """Validate a consequence by its ``kind``; field paths stay those of the file."""
    kind = value.get("kind")
    schema = CONSEQUENCES.get(kind) if isinstance(kind, str) else None
    if schema is None:
        shown = "missing" if kind is None else f"{kind!r}"
        raise _problem("kind", f'must be "quantity" or "choice" ({shown})')
    try:
        return schema.model_validate(value).model_dump(mode="json")
    except ValidationError as exc:
        err = exc.errors(include_url=False)[0]
        sub, problem = plain_message(err)
        where = field_path(err["loc"])
        raise _problem(f"{where}.{sub}" if where and sub else where or sub, problem) from None


class Element(_Base):
    name: Annotated[str, AfterValidator(_name)]
    geometry: Annotated[dict[str, Any], AfterValidator(_geometry)]
    base_of: str
    adverse: Literal["deeper", "shallower"]
    design_fractile: Annotated[float, Field(ge=FRACTILE_MIN, le=FRACTILE_MAX)] = 0.95
    consequence: Annotated[dict[str, Any], AfterValidator(_consequence)]


def element_problems(
    model: dict, site: shapely.Geometry, unit_problem: Callable[[str], str | None]
) -> Iterator[InputError]:
    """Cross-references of the elements: unique names, a boundary that exists (not the basal
    unit), a footprint that overlaps the site."""
    seen: dict[str, int] = {}
    for i, element in enumerate(model.get("elements") or []):
        at = f"elements[{i}]"
        if element["name"] in seen:
            yield InputError(
                f"{at}.name",
                f"{element['name']!r} is used twice (also elements[{seen[element['name']]}])",
            )
        seen.setdefault(element["name"], i)
        problem = unit_problem(element["base_of"])
        if problem:
            yield InputError(f"{at}.base_of", problem)
        footprint = to_shapely(element["geometry"])
        if not shapely.intersection(footprint, site).area > 0:
            yield InputError(f"{at}.geometry", "lies outside the site")
        elif not _holds_a_cell(site, footprint, float(model["grid_spacing_m"])):
            yield no_cell_error(i, element["name"])


def _holds_a_cell(site: shapely.Geometry, footprint: shapely.Geometry, spacing_m: float) -> bool:
    """Whether a centre of the evaluation grid (cells aligned to the site's bounding box, as
    ``probewise.core.grid`` lays them) lies inside both the site and the footprint."""
    x0, y0, _, _ = site.bounds
    fx0, fy0, fx1, fy1 = footprint.bounds
    cols = np.arange(max(math.floor((fx0 - x0) / spacing_m - 0.5), 0),
                     math.ceil((fx1 - x0) / spacing_m - 0.5) + 1)  # fmt: skip
    rows = np.arange(max(math.floor((fy0 - y0) / spacing_m - 0.5), 0),
                     math.ceil((fy1 - y0) / spacing_m - 0.5) + 1)  # fmt: skip
    if cols.size * rows.size > MAX_CELL_TEST:
        return True  # a footprint this large holds cells; the core checks it exactly
    gx, gy = np.meshgrid(x0 + spacing_m * (cols + 0.5), y0 + spacing_m * (rows + 0.5))
    inside = shapely.contains_xy(footprint, gx.ravel(), gy.ravel())
    inside &= shapely.contains_xy(site, gx.ravel(), gy.ravel())
    return bool(inside.any())


def no_cell_error(index: int, name: str) -> InputError:
    """The message for an element that holds no evaluation cell centre."""
    return InputError(
        f"elements[{index}].geometry",
        f"no evaluation cell centre lies inside element {name!r}; draw it larger or use a "
        "finer grid_spacing_m",
    )
