"""The model file (schema "probewise/1"): pydantic schema, validation and canonical dump.

One JSON document holds a whole project (docs/model-file.md). ``validate_model`` turns
any decoded JSON value into a normalised plain dict or raises ``InputError`` naming the first
problem as ``field: problem`` with a path such as ``units[2].thickness_m``.

Validation runs in four stages so that absurd input fails fast and every message is plain:
1. sizes: caps on list lengths, nesting depth and value count (before anything expensive);
2. finiteness: every float anywhere, extra fields included, must be finite;
3. structure (pydantic): types, required fields, per-object rules (ranges, geometries, CRS);
4. cross-references: unique names, units named by other sections, observed depths, probes
   inside the site.
Unknown extra fields are allowed and kept (the contract says "add optional fields freely").
Normalising fills defaults, turns numbers into floats and geometry positions into [x, y].
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Iterable, Iterator
from functools import lru_cache
from itertools import islice
from pathlib import Path
from typing import Annotated, Any, Literal

import numpy as np
import shapely
import shapely.geometry
from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    model_validator,
)
from pyproj import CRS

from server.errors import InputError
from server.io.model_structure import structure_problems

SCHEMA = "probewise/1"
SHAPES = ("pert", "triangular", "uniform")
CORRELATION_MODELS = ("exponential", "gaussian", "spherical", "matern32", "matern52")
METHOD_KINDS = ("borehole", "cpt", "dmt", "trial_pit", "other")

# Caps that stop absurd files before any costly work: (top-level key, cap, what is counted).
MAX_UNITS = 20
MAX_EXISTING = 5000
MAX_LAYOUTS = 200
MAX_LAYOUT_PROBES = 2000
LIST_CAPS = (
    ("units", MAX_UNITS, "units"),
    ("existing", MAX_EXISTING, "existing probes"),
    ("layouts", MAX_LAYOUTS, "layouts"),
    ("methods", 50, "methods"),
    ("zones", 200, "zones"),
    ("areas_of_interest", 500, "areas of interest"),
    ("exclusions", 500, "exclusions"),
    ("bounds", 200, "bounds"),
    ("boundaries_of_interest", 50, "boundaries of interest"),
)
MAX_POSITIONS = 100_000  # per geometry
MAX_VALUES = 5_000_000  # JSON values in the whole file
MAX_NESTING = 64
MAX_FILE_BYTES = 100 * 1024 * 1024
MAX_GRID_CELLS = 250_000
MAX_DEPTH_M = 10_000.0  # depths and thicknesses: nothing a site investigation meets
MAX_COORD_M = 1e8  # |x|, |y|: larger than any projected CRS or site grid
MAX_RANGE_M = 1e7  # correlation range

# Top-level keys in contract order (the dump keeps this order; extras follow).
TOP_KEYS = (
    "schema",
    "name",
    "crs",
    "currency",
    "site",
    "grid_spacing_m",
    "zones",
    "areas_of_interest",
    "exclusions",
    "units",
    "boundaries_of_interest",
    "bounds",
    "methods",
    "existing",
    "layouts",
)


class _ProblemError(ValueError):
    """A problem found inside a validator; ``sub`` extends the field path (e.g. ``[0][3]``)."""

    def __init__(self, sub: str, problem: str):
        self.sub = sub
        self.problem = problem
        super().__init__(problem)


# ---------------------------------------------------------------- small helpers


def _key(part: str) -> str:
    """A dict key as it appears in a field path; odd characters are JSON-escaped."""
    if part and part.isprintable():
        return part
    return json.dumps(part, ensure_ascii=False)


def _path(parts: tuple | list) -> str:
    out = ""
    for p in parts:
        if isinstance(p, int) and not isinstance(p, bool):
            out += f"[{p}]"
        else:
            out += ("." if out else "") + _key(str(p))
    return out


def _join(field: str, sub: str) -> str:
    if not sub:
        return field
    if not field:
        return sub
    return field + sub if sub.startswith("[") else f"{field}.{sub}"


def _show(value: object, limit: int = 40) -> str:
    """A short JSON rendering of a user's value for a message."""
    try:
        text = json.dumps(value, ensure_ascii=False)
    except (TypeError, ValueError):
        text = repr(value)
    text = " ".join(text.split())
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _num(value: float) -> str:
    """A number for a message: 3.0 -> 3.0, 2.5 -> 2.5, large values without noise."""
    return f"{value:g}" if abs(value) >= 1e6 else repr(float(value))


def _names(names: list[str], limit: int = 6) -> str:
    shown = ", ".join(names[:limit])
    return shown + (", ..." if len(names) > limit else "")


def _is_number(value: object) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


# ---------------------------------------------------------------- geometry and CRS checks


def _check_position(pos: object, sub: str) -> tuple[float, float]:
    if not isinstance(pos, list) or len(pos) not in (2, 3) or not all(map(_is_number, pos)):
        raise _ProblemError(sub, f"a position must be [x, y] numbers, not {_show(pos)}")
    for v in pos:
        if isinstance(v, int) and abs(v) > MAX_COORD_M:
            raise _ProblemError(sub, f"coordinates must be within +/-{MAX_COORD_M:g} m")
    x, y = float(pos[0]), float(pos[1])
    if not (math.isfinite(x) and math.isfinite(y)):
        raise _ProblemError(sub, "coordinates must be finite numbers (not NaN or Infinity)")
    if abs(x) > MAX_COORD_M or abs(y) > MAX_COORD_M:
        raise _ProblemError(sub, f"coordinates must be within +/-{MAX_COORD_M:g} m")
    return x, y


def _check_rings(rings: object, sub: str) -> list[list[list[float]]]:
    """The rings of one GeoJSON Polygon: closed, at least 4 positions each, finite."""
    if not isinstance(rings, list) or not rings:
        raise _ProblemError(sub, "a polygon needs a list of rings (outer ring first)")
    out = []
    for r, ring in enumerate(rings):
        rsub = f"{sub}[{r}]"
        if not isinstance(ring, list):
            raise _ProblemError(rsub, "a ring must be a list of [x, y] positions")
        if len(ring) < 4:
            raise _ProblemError(rsub, f"a ring needs at least 4 positions (has {len(ring)})")
        pts = [_check_position(p, f"{rsub}[{i}]") for i, p in enumerate(ring)]
        if pts[0] != pts[-1]:
            raise _ProblemError(rsub, "ring is not closed: the last position must equal the first")
        out.append([list(p) for p in pts])
    return out


def _count_positions(coords: object, depth: int) -> int:
    """Positions in a coordinates array nested ``depth`` list levels deep (best effort)."""
    if depth == 0 or not isinstance(coords, list):
        return 1
    return sum(_count_positions(c, depth - 1) for c in coords)


def _explain_invalid(geom: shapely.Geometry) -> str:
    reason = shapely.is_valid_reason(geom)
    match = re.match(r"\s*([^\[]*)\[([-\d.eE+]+) ([-\d.eE+]+)", reason)
    if not match:
        return f"is not a valid polygon: {reason.lower()}"
    what, x, y = match.groups()
    return f"is not a valid polygon: {what.strip().lower()} near ({float(x):g}, {float(y):g})"


def _check_geometry(value: dict, allowed: tuple[str, ...]) -> dict:
    """Check a GeoJSON Polygon (or MultiPolygon) geometry; return it with float positions."""
    kind = value.get("type")
    if kind not in allowed:
        expected = " or ".join(f'"{a}"' for a in allowed)
        raise _ProblemError("type", f"must be {expected}, not {_show(kind)}")
    if "coordinates" not in value:
        raise _ProblemError("coordinates", "is required")
    coords = value["coordinates"]
    depth = 2 if kind == "Polygon" else 3  # list levels down to a position
    if _count_positions(coords, depth) > MAX_POSITIONS:
        raise _ProblemError("coordinates", f"has more than {MAX_POSITIONS} positions")
    if kind == "Polygon":
        parts = [_check_rings(coords, "coordinates")]
    else:
        if not isinstance(coords, list) or not coords:
            raise _ProblemError("coordinates", "a MultiPolygon needs a list of polygons")
        parts = [_check_rings(p, f"coordinates[{i}]") for i, p in enumerate(coords)]
    polys = [
        shapely.Polygon(np.asarray(rings[0])[:, :2], [np.asarray(h)[:, :2] for h in rings[1:]])
        for rings in parts
    ]
    geom = polys[0] if kind == "Polygon" else shapely.MultiPolygon(polys)
    if not shapely.is_valid(geom):
        raise _ProblemError("coordinates", _explain_invalid(geom))
    if not geom.area > 0:
        raise _ProblemError("coordinates", "has zero area")
    out = dict(value)
    out["coordinates"] = parts[0] if kind == "Polygon" else parts
    return out


def _polygon(value: dict) -> dict:
    return _check_geometry(value, ("Polygon",))


def _site_geometry(value: dict) -> dict:
    return _check_geometry(value, ("Polygon", "MultiPolygon"))


def to_shapely(geometry: dict) -> shapely.Geometry:
    """A validated GeoJSON Polygon/MultiPolygon as a shapely geometry."""
    return shapely.geometry.shape(geometry)


@lru_cache(maxsize=64)
def _crs_problem(text: str) -> str | None:
    """Why ``text`` is not a usable project CRS, or None when it is (cached: parsing costs)."""
    shown = _show(text, 60)
    if not text.strip():
        return 'must be a CRS such as "EPSG:27700", or null for a local site grid'
    if len(text) > 20_000:
        return "is too long to be a CRS definition"
    try:
        crs = CRS.from_user_input(text)
    except Exception:  # pyproj raises CRSError and, for odd input, others
        return f'{shown} is not a CRS that pyproj recognises; write it as "EPSG:NNNN"'
    label = text.strip() if len(text) <= 40 else "this CRS"
    if crs.is_geographic:
        return (
            f"{label} is geographic (degrees); use a projected CRS in metres such as the "
            "local UTM zone"
        )
    if not crs.is_projected:
        return f"{label} is a {crs.type_name}, not a projected CRS in metres"
    if "pseudo-mercator" in crs.name.lower():
        return (
            f"{label} (Web Mercator) distorts distances; use a projected CRS in metres such "
            "as the local UTM zone"
        )
    units = {a.unit_name for a in crs.axis_info[:2]}
    if not units <= {"metre", "meter", "m"}:
        return f"{label} is in {', '.join(sorted(units))}; use a projected CRS in metres"
    return None


def _check_crs(value: object) -> object:
    if value is None:
        return None
    if not isinstance(value, str):
        raise _ProblemError("", f'must be text like "EPSG:27700" or null, not {_show(value)}')
    problem = _crs_problem(value)
    if problem:
        raise _ProblemError("", problem)
    return value


def _check_name(value: str) -> str:
    if not value.strip():
        raise _ProblemError("", "must not be empty")
    return value


def _check_schema(value: object) -> object:
    if value != SCHEMA:
        raise _ProblemError("", f'must be "{SCHEMA}" (this file says {_show(value)})')
    return value


# ---------------------------------------------------------------- the schema


Name = Annotated[str, AfterValidator(_check_name)]
Number = float
Depth = Annotated[float, Field(ge=0, le=MAX_DEPTH_M)]
PositiveDepth = Annotated[float, Field(gt=0, le=MAX_DEPTH_M)]
Positive = Annotated[float, Field(gt=0)]
NonNegative = Annotated[float, Field(ge=0)]
PolygonGeometry = Annotated[dict[str, Any], AfterValidator(_polygon)]
SiteGeometry = Annotated[dict[str, Any], AfterValidator(_site_geometry)]


class _Base(BaseModel):
    model_config = ConfigDict(
        strict=True, allow_inf_nan=False, extra="allow", populate_by_name=True
    )


class Range(_Base):
    """Thickness range (m): 0 <= min <= likely <= max and min < max."""

    min: Depth
    likely: Depth
    max: Depth
    shape: Literal["pert", "triangular", "uniform"] = "pert"

    @model_validator(mode="after")
    def _ordered(self) -> Range:
        if self.min > self.max:
            raise _ProblemError("", f"min {_num(self.min)} is above max {_num(self.max)}")
        if self.min > self.likely:
            raise _ProblemError("", f"min {_num(self.min)} is above likely {_num(self.likely)}")
        if self.likely > self.max:
            raise _ProblemError("", f"likely {_num(self.likely)} is above max {_num(self.max)}")
        if self.min == self.max:
            raise _ProblemError("", f"min and max are both {_num(self.min)}; max must be above min")
        return self


class Correlation(_Base):
    model: Literal["exponential", "gaussian", "spherical", "matern32", "matern52"]
    range_m: Annotated[float, Field(gt=0, le=MAX_RANGE_M)]


class Unit(_Base):
    name: Name
    description: str = ""
    thickness_m: Range | None = None
    correlation: Correlation | None = None


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
            raise _ProblemError(
                "",
                f"min_depth_m {_num(self.min_depth_m)} must be below "
                f"max_depth_m {_num(self.max_depth_m)}",
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


class PlannedProbe(_Base):
    id: Name
    method: str
    x: Number
    y: Number
    depth_m: PositiveDepth | None = None


class CurvePoint(_Base):
    cost: Annotated[float, Field(ge=0)]
    information_gain_bits: Number


LAYOUT_OPTIONAL_KEYS = ("origin", "description", "budget", "optimiser_curve")


class Layout(_Base):
    name: Name
    probes: list[PlannedProbe]
    # Where the layout came from (absent: drawn by hand); the optimiser also records the
    # budget it was given and its cost-gain curve. Absent fields are left out on export.
    origin: Literal["hand", "guidance", "optimised"] | None = None
    description: str | None = None
    budget: Annotated[float, Field(gt=0)] | None = None
    optimiser_curve: list[CurvePoint] | None = None


class ModelFile(_Base):
    schema_: Annotated[Any, AfterValidator(_check_schema)] = Field(alias="schema")
    name: Name
    crs: Annotated[Any, AfterValidator(_check_crs)]
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


# ---------------------------------------------------------------- stage 1 and 2: raw checks


def _size_problems(data: object) -> Iterator[InputError]:
    if not isinstance(data, dict):
        return
    for key, cap, what in LIST_CAPS:
        value = data.get(key)
        if isinstance(value, list) and len(value) > cap:
            yield InputError(key, f"has {len(value)} {what}; at most {cap} are allowed")
    layouts = data.get("layouts")
    if isinstance(layouts, list) and len(layouts) <= MAX_LAYOUTS:
        for i, layout in enumerate(layouts):
            probes = layout.get("probes") if isinstance(layout, dict) else None
            if isinstance(probes, list) and len(probes) > MAX_LAYOUT_PROBES:
                yield InputError(
                    f"layouts[{i}].probes",
                    f"has {len(probes)} probes; at most {MAX_LAYOUT_PROBES} per layout are allowed",
                )


_SURROGATE = "holds a lone surrogate escape (such as \\ud800), which is not valid Unicode text"


def _is_unicode(text: str) -> bool:
    """False for text that cannot be written as UTF-8 (a lone surrogate from a JSON escape)."""
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        return False
    return True


def _raw_problems(data: object) -> Iterator[tuple[InputError, bool]]:
    """Non-finite floats and non-Unicode text anywhere (json.loads accepts NaN, Infinity and
    lone surrogate escapes), over-deep or huge files.

    Yields (problem, fatal). Iterative walk in document order; a too-deep or too-large file
    is fatal and stops the walk.
    """
    stack: list[tuple[object, tuple]] = [(data, ())]
    seen = 0
    while stack:
        value, parts = stack.pop()
        seen += 1
        if seen > MAX_VALUES:
            yield InputError("MODEL", f"is too large: more than {MAX_VALUES} values"), True
            return
        if len(parts) > MAX_NESTING:
            problem = f"is nested more than {MAX_NESTING} levels deep"
            yield InputError(_path(parts) or "MODEL", problem), True
            return
        if isinstance(value, float) and not math.isfinite(value):
            problem = "must be a finite number (not NaN or Infinity)"
            yield InputError(_path(parts) or "MODEL", problem), False
        elif isinstance(value, str) and not _is_unicode(value):
            yield InputError(_path(parts) or "MODEL", _SURROGATE), False
        elif isinstance(value, dict):
            bad_keys = [k for k in value if isinstance(k, str) and not _is_unicode(k)]
            if bad_keys:
                yield InputError(_path(parts) or "MODEL", f"a key {_SURROGATE}"), True
                return
            stack.extend((v, (*parts, k)) for k, v in reversed(list(value.items())))
        elif isinstance(value, list | tuple):
            stack.extend((v, (*parts, i)) for i, v in reversed(list(enumerate(value))))


# ---------------------------------------------------------------- stage 3: pydantic errors


def _plain_message(err: dict) -> tuple[str, str]:
    """(extra path, plain message) for one pydantic error."""
    kind = err["type"]
    ctx = err.get("ctx") or {}
    given = err.get("input")
    got = f" (got {_show(given)})"
    if kind == "value_error" and isinstance(ctx.get("error"), _ProblemError):
        return ctx["error"].sub, ctx["error"].problem
    if kind == "missing":
        return "", "is required"
    if kind in ("float_type", "float_parsing", "int_type", "int_parsing"):
        if _is_number(given):
            return "", "is too large"
        return "", "must be a number" + got
    if kind == "finite_number":
        return "", "must be a finite number (not NaN or Infinity)"
    if kind == "string_type":
        return "", "must be text" + got
    if kind in ("list_type", "tuple_type"):
        return "", "must be a list" + got
    if kind in ("dict_type", "model_type", "model_attributes_type"):
        if not err["loc"]:
            return "", "the model file must be a JSON object"
        return "", "must be an object" + got
    if kind == "literal_error":
        expected = str(ctx.get("expected", "")).replace("'", '"')
        return "", f"must be {expected}" + got
    bounds = {
        "greater_than": ("gt", ">"),
        "greater_than_equal": ("ge", ">="),
        "less_than": ("lt", "<"),
        "less_than_equal": ("le", "<="),
    }
    if kind in bounds:
        name, sign = bounds[kind]
        limit = ctx.get(name)
        return "", f"must be {sign} {limit:g}" + got if _is_number(limit) else err["msg"]
    if kind == "string_too_short":
        return "", "must not be empty"
    if kind == "too_short":
        return "", f"must have at least {ctx.get('min_length')} items"
    if kind == "too_long":
        return "", f"must have at most {ctx.get('max_length')} items"
    if kind == "bool_type":
        return "", "must be true or false" + got
    if kind == "value_error":
        return "", str(ctx.get("error", err["msg"]))
    return "", str(err["msg"])


def _structure_problems(exc: ValidationError) -> list[InputError]:
    out = []
    for err in exc.errors(include_url=False):
        sub, problem = _plain_message(err)
        field = _join(_path(err["loc"]), sub)
        out.append(InputError(field or "MODEL", problem))
    return out


# ---------------------------------------------------------------- stage 4: cross-references


def _reference_problems(m: dict) -> Iterator[InputError]:
    """Cross-field rules on a structurally valid, normalised model.

    Units first (a broken unit list makes every reference to a unit look wrong), then the
    other sections in document order.
    """
    units = m["units"]
    unit_names = [u["name"] for u in units]
    non_basal = set(unit_names[:-1])
    order = {name: i for i, name in enumerate(unit_names)}

    def unit_problem(name: str, need_base: bool = True) -> str | None:
        if name not in order:
            return f"{_show(name)} is not one of the units ({_names(unit_names)})"
        if need_base and name not in non_basal:
            return f"{_show(name)} is the basal unit, which has no base (no boundary below it)"
        return None

    if len(units) < 2:
        yield InputError("units", "needs at least 2 units (the last one is the basal unit)")
    first_at: dict[str, int] = {}
    for i, unit in enumerate(units):
        if unit["name"] in first_at:
            yield InputError(
                f"units[{i}].name",
                f"{_show(unit['name'])} is used twice (also units[{first_at[unit['name']]}])",
            )
        first_at.setdefault(unit["name"], i)
        is_basal = i == len(units) - 1
        if is_basal and len(units) >= 2 and unit["thickness_m"] is not None:
            yield InputError(
                f"units[{i}].thickness_m",
                "the basal (last) unit has no thickness; remove it or add a unit below",
            )
        if not is_basal:
            for key in ("thickness_m", "correlation"):
                if unit[key] is None:
                    yield InputError(
                        f"units[{i}].{key}",
                        "is required on every unit but the basal (last) one",
                    )

    site = to_shapely(m["site"])
    area_m2 = float(site.area)
    spacing = m["grid_spacing_m"]
    # a spacing so small that its square underflows to 0 gives "infinitely many" cells
    cells = area_m2 / spacing**2 if spacing**2 > 0 else math.inf
    if cells > MAX_GRID_CELLS:
        finest = math.ceil(math.sqrt(area_m2 / MAX_GRID_CELLS) * 10) / 10
        yield InputError(
            "grid_spacing_m",
            f"{_num(spacing)} m gives about {cells:.3g} grid cells over the site "
            f"({area_m2:.0f} m2); at most {MAX_GRID_CELLS} are allowed, so use at least "
            f"{finest:g} m",
        )
    elif cells < 1:
        yield InputError(
            "grid_spacing_m",
            f"{_num(spacing)} m is coarser than the site ({area_m2:.0f} m2); use a finer spacing",
        )

    for z, zone in enumerate(m["zones"]):
        for name in zone["units"]:
            problem = unit_problem(name)
            if problem:
                yield InputError(f"zones[{z}].units.{_key(name)}", problem)

    seen: dict[str, int] = {}
    for b, boi in enumerate(m["boundaries_of_interest"]):
        problem = unit_problem(boi["base_of"])
        if problem:
            yield InputError(f"boundaries_of_interest[{b}].base_of", problem)
        elif boi["base_of"] in seen:
            yield InputError(
                f"boundaries_of_interest[{b}].base_of",
                f"{_show(boi['base_of'])} is listed twice "
                f"(also boundaries_of_interest[{seen[boi['base_of']]}])",
            )
        seen.setdefault(boi["base_of"], b)

    for b, bound in enumerate(m["bounds"]):
        problem = unit_problem(bound["base_of"])
        if problem:
            yield InputError(f"bounds[{b}].base_of", problem)

    methods: dict[str, dict] = {}
    for k, method in enumerate(m["methods"]):
        if method["id"] in methods:
            yield InputError(f"methods[{k}].id", f"{_show(method['id'])} is used twice")
        methods.setdefault(method["id"], method)
        for c, name in enumerate(method["cannot_penetrate"]):
            problem = unit_problem(name, need_base=False)
            if problem:
                yield InputError(f"methods[{k}].cannot_penetrate[{c}]", problem)
        for name in method["precision_m"]:
            problem = unit_problem(name)
            if problem:
                yield InputError(f"methods[{k}].precision_m.{_key(name)}", problem)

    def method_problem(method_id: str) -> str | None:
        if method_id in methods:
            return None
        return f"{_show(method_id)} is not one of the method ids ({_names(list(methods))})"

    existing = m["existing"]
    yield from _probe_site_problems(site, existing, "existing")
    ids: dict[str, int] = {}
    for p, probe in enumerate(existing):
        at = f"existing[{p}]"
        if probe["id"] in ids:
            yield InputError(
                f"{at}.id",
                f"{_show(probe['id'])} is used twice (also existing[{ids[probe['id']]}])",
            )
        ids.setdefault(probe["id"], p)
        problem = method_problem(probe["method"])
        if problem:
            yield InputError(f"{at}.method", problem)
        above: tuple[str, float] | None = None
        for name, depth in sorted(
            probe["observed"].items(), key=lambda kv: order.get(kv[0], len(order))
        ):
            field = f"{at}.observed.{_key(name)}"
            problem = unit_problem(name)
            if problem:
                yield InputError(field, problem)
                continue
            if depth > probe["final_depth_m"]:
                yield InputError(
                    field,
                    f"{_num(depth)} m is below the final depth {_num(probe['final_depth_m'])} m",
                )
            if above is not None and depth < above[1]:
                yield InputError(
                    field,
                    f"base at {_num(depth)} m is above the base of {_show(above[0])} at "
                    f"{_num(above[1])} m (depths must not decrease down the units; equal "
                    "depths record an absent unit)",
                )
            above = (name, depth)
        for name in probe["precision_m"]:
            problem = unit_problem(name)
            if problem:
                yield InputError(f"{at}.precision_m.{_key(name)}", problem)

    names: dict[str, int] = {}
    for i, layout in enumerate(m["layouts"]):
        if layout["name"] in names:
            yield InputError(
                f"layouts[{i}].name",
                f"{_show(layout['name'])} is used twice (also layouts[{names[layout['name']]}])",
            )
        names.setdefault(layout["name"], i)
        yield from _probe_site_problems(site, layout["probes"], f"layouts[{i}].probes")
        ids = {}
        for p, probe in enumerate(layout["probes"]):
            at = f"layouts[{i}].probes[{p}]"
            if probe["id"] in ids:
                yield InputError(
                    f"{at}.id",
                    f"{_show(probe['id'])} is used twice in this layout "
                    f"(also probes[{ids[probe['id']]}])",
                )
            ids.setdefault(probe["id"], p)
            problem = method_problem(probe["method"])
            if problem:
                yield InputError(f"{at}.method", problem)
            elif probe["depth_m"] is not None:
                limit = methods[probe["method"]]["max_depth_m"]
                if probe["depth_m"] > limit:
                    yield InputError(
                        f"{at}.depth_m",
                        f"{_num(probe['depth_m'])} m is deeper than the maximum depth of "
                        f"method {_show(probe['method'])} ({_num(limit)} m)",
                    )


def _probe_site_problems(
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
            f"probe {_show(probe['id'])} at ({probe['x']:g}, {probe['y']:g}) lies outside the site",
        )


# ---------------------------------------------------------------- public API


def _validate(data: object, first_only: bool) -> tuple[dict | None, list[InputError]]:
    problems: list[InputError] = []

    def stop() -> bool:
        return bool(problems) and first_only

    problems.extend(_size_problems(data))
    if problems:  # absurd sizes: do no further work at all
        return None, problems[:1] if first_only else problems
    for problem, fatal in _raw_problems(data):
        problems.append(problem)
        if stop() or fatal:
            return None, problems
    try:
        model = ModelFile.model_validate(data)
    except ValidationError as exc:
        known = {str(p) for p in problems}
        problems.extend(p for p in _structure_problems(exc) if str(p) not in known)
        return None, problems[:1] if first_only else problems
    if problems:
        return None, problems
    normal = model.model_dump(mode="json", by_alias=True)
    for layout in normal["layouts"]:  # optional layout fields stay absent, not null
        for key in LAYOUT_OPTIONAL_KEYS:
            if layout.get(key) is None:
                layout.pop(key, None)
    for problem in _reference_problems(normal):
        problems.append(problem)
        if stop():
            break
    if not problems:  # optional structure fields and stages (server/io/model_structure.py)
        problems.extend(islice(structure_problems(normal), 1 if first_only else None))
    return (None if problems else normal), problems


def validate_model(data: object) -> dict:
    """Validate a decoded model file and return it normalised (defaults filled, JSON-ready).

    Raises ``InputError(field, problem)`` for the first problem found.
    """
    normal, problems = _validate(data, first_only=True)
    if problems:
        raise problems[0]
    assert normal is not None
    return normal


def validate_all(data: object) -> list[InputError]:
    """Every problem found (best effort: cross-reference checks need a sound structure)."""
    return _validate(data, first_only=False)[1]


class _DuplicateKeyError(ValueError):
    pass


def _pairs_without_duplicates(pairs: list[tuple[str, Any]]) -> dict:
    out: dict = {}
    for key, value in pairs:
        if key in out:
            raise _DuplicateKeyError(key)
        out[key] = value
    return out


def parse_model_text(text: str) -> dict:
    """Decode model-file JSON text and validate it (see ``validate_model``)."""
    try:
        data = json.loads(text, object_pairs_hook=_pairs_without_duplicates)
    except json.JSONDecodeError as exc:
        raise InputError(
            "MODEL", f"is not valid JSON: {exc.msg} at line {exc.lineno} column {exc.colno}"
        ) from None
    except _DuplicateKeyError as exc:
        raise InputError(
            "MODEL", f"is not valid: the key {_show(exc.args[0])} appears twice in one object"
        ) from None
    except RecursionError:
        raise InputError("MODEL", "is nested too deeply") from None
    return validate_model(data)


def load_model_file(path: str | Path) -> dict:
    """Read, decode and validate a model file; every failure is an ``InputError``."""
    path = Path(path)
    try:
        if path.is_dir():
            raise InputError("MODEL", f"is a folder, not a file: {path}")
        size = path.stat().st_size
        if size > MAX_FILE_BYTES:
            raise InputError("MODEL", f"file is too large ({size} bytes; at most {MAX_FILE_BYTES})")
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError("MODEL", f"file not found: {path}") from None
    except OSError as exc:
        raise InputError("MODEL", f"cannot read {path}: {exc.strerror or exc}") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError("MODEL", f"is not UTF-8 text (byte {exc.start})") from None
    return parse_model_text(text)


def _format(value: object, indent: int, lead: int, width: int = 100) -> str:
    """JSON with containers kept on one line when they fit in ``width`` columns."""
    flat = json.dumps(value, ensure_ascii=False, allow_nan=False)
    if not isinstance(value, dict | list) or not value or indent + lead + len(flat) <= width:
        return flat
    pad = " " * (indent + 2)
    if isinstance(value, dict):
        items = []
        for k, v in value.items():
            key = json.dumps(k, ensure_ascii=False) + ": "
            items.append(pad + key + _format(v, indent + 2, len(key), width))
    else:
        items = [pad + _format(v, indent + 2, 0, width) for v in value]
    opener, closer = ("{", "}") if isinstance(value, dict) else ("[", "]")
    return opener + "\n" + ",\n".join(items) + "\n" + " " * indent + closer


def dump_model(model: dict) -> str:
    """Canonical model-file text: validated, keys in contract order, 2-space indent.

    Short objects and arrays stay on one line. Nulls that stand for "absent" (the basal
    unit's thickness and correlation, a probe's depth_m) are left out, as the contract
    writes them. Raises ``InputError`` if ``model`` is invalid.
    """
    normal = validate_model(model)
    for unit in normal["units"]:
        for key in ("thickness_m", "correlation"):
            if unit.get(key) is None:
                unit.pop(key, None)
    for layout in normal["layouts"]:
        for probe in layout["probes"]:
            if probe.get("depth_m") is None:
                probe.pop("depth_m", None)
    return _format(normal, 0, 0) + "\n"


def summarise_model(model: dict) -> str:
    """One line of counts for a validated model, e.g. for ``probewise validate``."""
    return (
        f"{len(model['units'])} units, {len(model['methods'])} methods, "
        f"{len(model['existing'])} existing probes, {len(model['layouts'])} layouts"
    )


def list_notes(model: dict) -> list[str]:
    """Things in a valid model worth a second look (allowed, not errors).

    Today: planned probes that lie inside an exclusion area (live services, water...).
    """
    notes = []
    exclusions = [(e["name"], to_shapely(e["geometry"])) for e in model["exclusions"]]
    for i, layout in enumerate(model["layouts"]):
        if not layout["probes"] or not exclusions:
            continue
        xs = np.array([p["x"] for p in layout["probes"]], dtype=float)
        ys = np.array([p["y"] for p in layout["probes"]], dtype=float)
        for name, geom in exclusions:
            for p in np.flatnonzero(shapely.intersects_xy(geom, xs, ys)):
                probe = layout["probes"][p]
                notes.append(
                    f"layouts[{i}].probes[{p}]: planned probe {_show(probe['id'])} lies in "
                    f"exclusion {_show(name)}"
                )
    return notes


def unique_name(wanted: str, taken: Iterable[str]) -> str:
    """``wanted``, or ``wanted (2)``, ``(3)``... when that name is already taken."""
    taken = set(taken)
    if wanted not in taken:
        return wanted
    n = 2
    while f"{wanted} ({n})" in taken:
        n += 1
    return f"{wanted} ({n})"


def unique_layout_name(model: dict, wanted: str) -> str:
    """A layout name not yet used in ``model`` (``wanted`` or ``wanted (n)``)."""
    return unique_name(wanted, (layout["name"] for layout in model.get("layouts") or []))
