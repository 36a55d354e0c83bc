"""The model file's structure as pydantic classes (stage 3 of validation).

Types, required fields, defaults and per-object rules (ordered ranges, geometries, CRS).
``ModelFile`` is the whole document; a new section of the model file adds a field to it (and
its cross-reference check to ``probewise.io.model_references.REFERENCE_CHECKS``).
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    model_serializer,
    model_validator,
)

from probewise.core.priors import DEFAULT_SHAPE
from probewise.io.model_common import (
    CORRELATION_MODELS,
    MAX_DEPTH_M,
    MAX_RANGE_M,
    SCHEMA,
    SHAPES,
    ProblemError,
    number_text,
    show_value,
)
from probewise.io.model_document import DocumentControl, SafetyNotes
from probewise.io.model_elements import Element
from probewise.io.model_geometry import check_crs, check_polygon, check_site_geometry


def check_name(value: str) -> str:
    if not value.strip():
        raise ProblemError("", "must not be empty")
    return value


def check_schema(value: object) -> object:
    if value != SCHEMA:
        raise ProblemError("", f'must be "{SCHEMA}" (this file says {show_value(value)})')
    return value


Name = Annotated[str, AfterValidator(check_name)]
Number = float
Depth = Annotated[float, Field(ge=0, le=MAX_DEPTH_M)]
PositiveDepth = Annotated[float, Field(gt=0, le=MAX_DEPTH_M)]
Positive = Annotated[float, Field(gt=0)]
NonNegative = Annotated[float, Field(ge=0)]
PolygonGeometry = Annotated[dict[str, Any], AfterValidator(check_polygon)]
SiteGeometry = Annotated[dict[str, Any], AfterValidator(check_site_geometry)]


class _Base(BaseModel):
    model_config = ConfigDict(
        strict=True, allow_inf_nan=False, extra="allow", populate_by_name=True
    )


class Range(_Base):
    """Thickness range (m): 0 <= min <= likely <= max and min < max."""

    min: Depth
    likely: Depth
    max: Depth
    shape: Literal[SHAPES] = DEFAULT_SHAPE  # type: ignore[valid-type]

    @model_validator(mode="after")
    def _ordered(self) -> Range:
        low, likely, high = number_text(self.min), number_text(self.likely), number_text(self.max)
        if self.min > self.max:
            raise ProblemError("", f"min {low} is above max {high}")
        if self.min > self.likely:
            raise ProblemError("", f"min {low} is above likely {likely}")
        if self.likely > self.max:
            raise ProblemError("", f"likely {likely} is above max {high}")
        if self.min == self.max:
            raise ProblemError("", f"min and max are both {low}; max must be above min")
        return self


class Correlation(_Base):
    model: Literal[CORRELATION_MODELS]  # type: ignore[valid-type]
    range_m: Annotated[float, Field(gt=0, le=MAX_RANGE_M)]


class Unit(_Base):
    name: Name
    description: str = ""
    thickness_m: Range | None = None
    correlation: Correlation | None = None
    # share of the site where the unit is present (docs/model.md "Locally present units")
    presence: Annotated[float, Field(gt=0, le=1)] | None = None


class ZoneUnit(_Base):
    thickness_m: Range


class Zone(_Base):
    name: Name
    geometry: PolygonGeometry
    units: dict[str, ZoneUnit]


class AreaOfInterest(_Base):
    name: Name
    geometry: PolygonGeometry
    weight: Positive


class Exclusion(_Base):
    name: Name
    geometry: PolygonGeometry


class BoundaryOfInterest(_Base):
    base_of: str
    weight: Positive
    tolerance_m: PositiveDepth


class Bound(_Base):
    base_of: str
    min_depth_m: Depth
    max_depth_m: Depth
    geometry: PolygonGeometry | None = None

    @model_validator(mode="after")
    def _ordered(self) -> Bound:
        if self.min_depth_m >= self.max_depth_m:
            raise ProblemError(
                "",
                f"min_depth_m {number_text(self.min_depth_m)} must be below "
                f"max_depth_m {number_text(self.max_depth_m)}",
            )
        return self


class Cost(_Base):
    mobilisation: NonNegative
    per_location: NonNegative
    per_metre: NonNegative


class Method(_Base):
    id: Name
    name: Name
    kind: Literal["borehole", "cpt", "dmt", "trial_pit", "other"]
    cost: Cost
    metres_per_day: Positive
    max_depth_m: PositiveDepth
    embedment_m: Depth
    cannot_penetrate: list[str] = Field(default_factory=list)
    precision_m: dict[str, PositiveDepth]


class ExistingProbe(_Base):
    id: Name
    method: str
    x: Number
    y: Number
    final_depth_m: PositiveDepth
    observed: dict[str, Depth]
    precision_m: dict[str, PositiveDepth] = Field(default_factory=dict)
    ground_level_m: Number | None = None  # level of the ground at the probe, project datum


class PlannedProbe(_Base):
    id: Name
    method: str
    x: Number
    y: Number
    depth_m: PositiveDepth | None = None


class CurvePoint(_Base):
    # the information-gain curve has information_gain_bits; the net-value curve has
    # expected_saving and net_value, with optimum true on the prefix returned
    cost: Annotated[float, Field(ge=0)]
    information_gain_bits: Number | None = None
    expected_saving: Number | None = None
    net_value: Number | None = None
    optimum: bool | None = None

    @model_validator(mode="after")
    def _one_kind(self):
        if self.information_gain_bits is None and (
            self.expected_saving is None or self.net_value is None
        ):
            raise ValueError("a curve point needs information_gain_bits, or expected_saving "
                             "and net_value")  # fmt: skip
        return self

    @model_serializer(mode="wrap")
    def _absent_not_null(self, handler):
        return {k: v for k, v in handler(self).items() if v is not None}


# Optional fields that stay absent, not null, in the normalised document, per section.
OPTIONAL_KEYS = {
    "layouts": ("origin", "description", "budget", "optimiser_curve", "recorded_stage"),
    "units": ("presence",),
    "existing": ("ground_level_m",),
}
OPTIONAL_TOP_KEYS = ("document", "safety")  # sections left out, not null, when absent


class Layout(_Base):
    name: Name
    probes: list[PlannedProbe]
    # Where the layout came from (absent: drawn by hand); the optimiser also records the
    # budget it was given and its cost-gain curve. Absent fields are left out on export.
    origin: Literal["hand", "guidance", "optimised"] | None = None
    description: str | None = None
    budget: Annotated[float, Field(gt=0)] | None = None
    optimiser_curve: list[CurvePoint] | None = None
    recorded_stage: Name | None = None  # the stage its fieldwork was recorded as


class ModelFile(_Base):
    schema_: Annotated[Any, AfterValidator(check_schema)] = Field(alias="schema")
    name: Name
    crs: Annotated[Any, AfterValidator(check_crs)]
    currency: str = ""
    site: SiteGeometry
    grid_spacing_m: Annotated[float, Field(gt=0, le=1e5)]
    zones: list[Zone] = Field(default_factory=list)
    areas_of_interest: list[AreaOfInterest] = Field(default_factory=list)
    exclusions: list[Exclusion] = Field(default_factory=list)
    units: list[Unit]
    boundaries_of_interest: list[BoundaryOfInterest]
    bounds: list[Bound] = Field(default_factory=list)
    methods: list[Method]
    existing: list[ExistingProbe] = Field(default_factory=list)
    layouts: list[Layout] = Field(default_factory=list)
    elements: list[Element] = Field(default_factory=list)
    document: DocumentControl | None = None
    safety: SafetyNotes | None = None
