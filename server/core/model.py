"""Frozen dataclasses that carry a project into the numerical core.

The model file (``server/io/model_file.py``) is validated with pydantic and converted to these
by ``server/app/to_core.py``; nothing in ``server/core`` sees JSON, the database or the web.

Conventions
-----------
- Units are indexed 0..U-1 top to bottom; the last is the basal unit (no thickness).
- Boundary ``k`` (0..U-2) is the base of unit ``k``; its depth is the sum of the thicknesses
  of units 0..k. ``B = U - 1`` boundaries in all.
- Coordinates are metres in the project CRS (or a local grid); depths are metres below
  ground level, positive down.
- Polygons are tuples of closed rings (each an ``(n, 2)`` float array); a point is inside when
  it is inside an odd number of rings (even-odd rule), which covers holes and multipolygons.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


class ModelLimitError(ValueError):
    """The model asks for something a computation does not support yet.

    ``field`` names the model-file field and ``problem`` says what to do, as an input error
    does; the command line answers with exit status 2 and the web with 4xx.
    """

    def __init__(self, field: str, problem: str):
        self.field = field
        self.problem = problem
        super().__init__(f"{field}: {problem}")


CORRELATED_OPTIMISER_PROBLEM = (
    "the optimiser's fast updates sum independent units and do not yet handle correlated unit "
    "thicknesses; evaluate, value, rank, posterior, readings and fit do: remove the pairs to "
    "optimise"
)


@dataclass(frozen=True)
class ThicknessRange:
    """Thickness prior of one unit: min, most likely and max (m) and a shape name.

    The shape is a name in ``probewise.core.priors.THICKNESS_SHAPES``.
    """

    min_m: float
    likely_m: float
    max_m: float
    shape: str = "pert"


@dataclass(frozen=True)
class Correlation:
    """Correlation model of a unit's thickness with its practical range (m).

    The model is a name in ``probewise.core.correlation.CORRELATION_MODELS``.
    """

    model: str
    range_m: float
    nugget: float = 0.0  # share of the variance with no spatial structure, in [0, 1)


@dataclass(frozen=True, eq=False)
class Polygon:
    """Polygon as a tuple of closed rings, each an ``(n, 2)`` array; even-odd rule."""

    rings: tuple[np.ndarray, ...]


@dataclass(frozen=True)
class Unit:
    name: str
    thickness: ThicknessRange | None  # None on the basal unit only
    correlation: Correlation | None  # None on the basal unit only
    description: str = ""
    presence: float = 1.0  # probability the unit is present at a point, (0, 1]
    spread_multiplier: float = 1.0  # multiplies the thickness range's std (an adopted fit)
    mean_shift_m: float = 0.0  # added to mean, min and max thickness (min clamped at 0)


@dataclass(frozen=True)
class Zone:
    """An area where some units take other thickness ranges; first containing zone wins."""

    name: str
    polygon: Polygon
    thickness: dict[int, ThicknessRange]  # unit index -> range override
    # width (m) of the band across the zone's edge over which the thickness mean and spread
    # blend linearly with those outside (0: a sharp edge); ``probewise.core.field``
    transition_m: float = 0.0


@dataclass(frozen=True)
class BoundaryOfInterest:
    boundary: int  # index k: the base of unit k
    weight: float
    tolerance_m: float


@dataclass(frozen=True)
class DepthBound:
    """A hard bound on a boundary's depth, everywhere or inside a polygon."""

    boundary: int
    min_depth_m: float
    max_depth_m: float
    polygon: Polygon | None = None


@dataclass(frozen=True, eq=False)
class GroundLevel:
    """Ground level (m, project datum): a constant, or surveyed points ``(m, 3)`` of
    ``x, y, level`` in project coordinates (linear on their Delaunay triangulation, nearest
    point outside its hull; ``probewise.core.levels``)."""

    datum: str
    level_m: float | None = None
    points: np.ndarray | None = None


@dataclass(frozen=True, eq=False)
class FormerEnvironment:
    """A mapped former environment and the band of levels (m, project datum) it lives in."""

    name: str
    polygon: Polygon
    level_min_m: float
    level_max_m: float


@dataclass(frozen=True)
class Settlement:
    """Terzaghi 1D primary consolidation of the compressible unit under the fill.

    ``compressible_unit`` is a unit index below the bounded boundary; unit weights in kN/m3,
    surcharge in kPa.
    """

    compressible_unit: int
    cc_min: float
    cc_max: float
    e0: float
    unit_weight_kn_m3: float
    fill_unit_weight_kn_m3: float
    surcharge_kpa: float = 0.0
    sublayer_m: float = 0.5  # the unit is split into sublayers this thick at most


@dataclass(frozen=True)
class HistoryRule:
    """Former surface (levels by environment) and its settlement: a hard bound on the depth
    of one boundary (the fill base) that varies across the site (docs/model.md "Levels and
    site history"). First environment containing a point wins; ``outside`` is the
    ``(min, max)`` level elsewhere, or None for no bound there."""

    name: str
    boundary: int
    environments: tuple[FormerEnvironment, ...]
    outside: tuple[float, float] | None = None
    settlement: Settlement | None = None


@dataclass(frozen=True)
class GroundModel:
    units: tuple[Unit, ...]
    zones: tuple[Zone, ...] = ()
    boundaries_of_interest: tuple[BoundaryOfInterest, ...] = ()
    bounds: tuple[DepthBound, ...] = ()
    ground_level: GroundLevel | None = None
    history: tuple[HistoryRule, ...] = ()
    # Lag-0 correlation between unit thicknesses: (unit i, unit j, rho) with i < j; empty =
    # independent units (docs/model.md, "Correlated thicknesses").
    thickness_correlation: tuple[tuple[int, int, float], ...] = ()

    @property
    def n_boundaries(self) -> int:
        return len(self.units) - 1

    @property
    def boundary_names(self) -> tuple[str, ...]:
        return tuple(u.name for u in self.units[:-1])


@dataclass(frozen=True)
class RefusalRule:
    """The chance (0, 1] that a method refuses in a unit, and how to get through when it may:
    pre-drilling at a cost per metre and a rate (m/day), or None (no pre-drilling)
    (docs/model.md "Refusal and pre-drilling")."""

    unit: int
    chance: float
    predrill_per_metre: float | None = None
    predrill_metres_per_day: float | None = None

    @property
    def predrills(self) -> bool:
        return self.predrill_metres_per_day is not None


@dataclass(frozen=True)
class Delivery:
    """What a method gives per probe besides boundary depths (docs/model-file.md "What a
    method delivers"): a sample, an in-situ test, an installation or a log.

    Exactly one of ``every_m`` (one per full interval of a unit the probe passes through),
    ``per_unit`` (that many in each unit it reaches), ``per_probe`` (that many per probe, in
    the units it reaches) or ``continuous`` (one profile per unit reached) says how many.
    ``units`` are unit indices it is taken in (empty: every unit); ``parameters`` the design
    parameters it gives (matched case-blind). ``quality_class`` (1-5) and ``category``
    ("A", "B", "C") are those of samples (EN 1997-2 and EN ISO 22475-1).
    """

    kind: str  # "sample" | "in_situ" | "installation" | "log"
    name: str
    parameters: tuple[str, ...] = ()
    units: tuple[int, ...] = ()
    every_m: float | None = None
    per_unit: int | None = None
    per_probe: int | None = None
    continuous: bool = False
    quality_class: int | None = None
    category: str | None = None


@dataclass(frozen=True)
class TestRequirement:
    """At least ``count`` results of ``parameter`` in unit ``unit`` (planned and existing);
    ``basis`` says where the count came from (given, or EN 1990 Annex D); ``test`` names the
    laboratory or in-situ test that gives it (for the lab schedule)."""

    unit: int
    parameter: str
    count: int
    test: str = ""
    basis: str = ""


@dataclass(frozen=True)
class CalibrationRequirement:
    """Every planned probe of a ``for_methods`` method has a probe of ``method`` (planned or
    existing) within ``within_m``; planned ``for_methods`` probes number at most ``per`` x the
    ``method`` probes (planned and existing)."""

    method: str
    for_methods: tuple[str, ...]
    per: int
    within_m: float


@dataclass(frozen=True)
class Requirements:
    """What every plan must meet (``probewise.core.requirements``): least numbers of probes
    of a method (the layout's own), calibration of one method by another, tests per unit."""

    min_probes: tuple[tuple[str, int], ...] = ()
    calibration: tuple[CalibrationRequirement, ...] = ()
    tests: tuple[TestRequirement, ...] = ()

    @property
    def empty(self) -> bool:
        return not (any(n for _, n in self.min_probes) or self.calibration or self.tests)


@dataclass(frozen=True)
class Method:
    """An investigation method: costs, production, reach and what it resolves.

    ``precision_m`` has one entry per boundary: the std (m) of the depth it reads for that
    boundary, or ``nan`` where it does not resolve the boundary.
    ``refusal_unit`` is the index of the shallowest unit it cannot penetrate, or None.
    ``refusals`` are chances of refusal per unit (with pre-drilling to get through);
    ``proves_refusal`` says whether a stop on a unit proves that unit's top (coring does; a
    cone's refusal on a boulder looks the same as on rock). ``rigs`` work side by side;
    ``move_days`` is the moving and setting up at each location (docs/model.md "Programme").
    """

    id: str
    name: str
    kind: str
    mobilisation: float
    per_location: float
    per_metre: float
    metres_per_day: float
    max_depth_m: float
    embedment_m: float
    refusal_unit: int | None
    precision_m: tuple[float, ...]
    refusals: tuple[RefusalRule, ...] = ()
    proves_refusal: bool = True
    rigs: int = 1
    move_days: float = 0.0
    delivers: tuple[Delivery, ...] = ()  # samples, in-situ tests, installations (Delivery)

    def resolves(self, boundary: int) -> bool:
        return bool(np.isfinite(self.precision_m[boundary]))


@dataclass(frozen=True)
class CostItems:
    """Costs of an investigation beyond each method's own rates (docs/model.md "Cost").

    Per location: service clearance (scan and inspection pit) and reinstatement. Per rig-day
    (a day of one rig's work at a location, moves included): traffic management, supervision
    and logging. Per rig mobilised: a standing-time allowance of ``standing_days_per_rig`` at
    ``standing_per_day``. Once: reporting. ``contingency_percent`` in [0, 100] is added on the
    whole.
    """

    service_clearance_per_location: float = 0.0
    reinstatement_per_location: float = 0.0
    traffic_management_per_day: float = 0.0
    supervision_per_day: float = 0.0
    standing_per_day: float = 0.0
    standing_days_per_rig: float = 0.0
    reporting: float = 0.0
    contingency_percent: float = 0.0


@dataclass(frozen=True)
class ExistingProbe:
    """An earlier probe with the boundary depths it recorded (boundary index -> depth m)."""

    id: str
    method: str
    x: float
    y: float
    final_depth_m: float
    observed: dict[int, float]
    precision_m: dict[int, float]  # boundary index -> std (m) of each recorded depth
    stage: str | None = None  # investigation stage label; None = earlier information
    ground_level_m: float | None = None  # the probe's own surveyed ground level, project datum
    tests: tuple[tuple[float, str], ...] = ()  # (depth m, parameter) of each recorded test


@dataclass(frozen=True)
class PlannedProbe:
    id: str
    method: str
    x: float
    y: float
    depth_m: float | None = None  # planned depth override; None = planned by the model


@dataclass(frozen=True)
class Layout:
    name: str
    probes: tuple[PlannedProbe, ...]


@dataclass(frozen=True)
class AreaOfInterest:
    name: str
    polygon: Polygon
    weight: float


@dataclass(frozen=True)
class Site:
    outline: Polygon
    grid_spacing_m: float
    areas_of_interest: tuple[AreaOfInterest, ...] = ()
    exclusions: tuple[Polygon, ...] = ()
    exclusion_names: tuple[str, ...] = ()


@dataclass(frozen=True)
class QuantityConsequence:
    """Works whose quantity follows the design depth: rate per m3 times cell area times the
    depth past (deeper adverse) or short of (shallower adverse) a reference depth (m)."""

    rate_per_m3: float
    reference_depth_m: float = 0.0


@dataclass(frozen=True)
class ChoiceConsequence:
    """A cheaper design allowed when the design level of the element's mean boundary depth
    is on the right side of a threshold depth (m); otherwise the robust one."""

    threshold_depth_m: float
    cheaper_cost: float
    robust_cost: float
    basis: str = "mean"


@dataclass(frozen=True, eq=False)
class DesignElement:
    """A part of the works whose cost follows one boundary (docs/model.md "The value of an
    investigation"): ``adverse`` is "deeper" or "shallower"; ``design_fractile`` p in
    [0.5, 1)."""

    name: str
    polygon: Polygon
    boundary: int
    adverse: str
    design_fractile: float
    consequence: QuantityConsequence | ChoiceConsequence


@dataclass(frozen=True)
class Project:
    name: str
    crs: str | None
    currency: str
    site: Site
    ground: GroundModel
    methods: dict[str, Method]
    existing: tuple[ExistingProbe, ...] = ()
    layouts: tuple[Layout, ...] = field(default_factory=tuple)
    elements: tuple[DesignElement, ...] = ()
    costs: CostItems = field(default_factory=CostItems)
    requirements: Requirements | None = None  # what every plan must meet; None = nothing

    @property
    def origin(self) -> tuple[float, float]:
        """Centre of the site's bounding box; the core works relative to it for precision."""
        pts = np.vstack(self.site.outline.rings)
        lo, hi = pts.min(axis=0), pts.max(axis=0)
        return float((lo[0] + hi[0]) / 2), float((lo[1] + hi[1]) / 2)
