"""Validated model-file dict ("probewise/1") -> ``probewise.core.model.Project``.

Names become indices: unit ``i`` is the i-th unit top down and boundary ``k`` is the base of
unit ``k``. The dict is assumed valid (``probewise.io.model_file.validate_model``); optional fields
may be absent. Coordinates stay in project coordinates; the core localises them itself.
"""

from __future__ import annotations

import contextlib
import math

import numpy as np

from probewise.app.requirements import with_requirements
from probewise.core.analysis import reading_precision_m
from probewise.core.bounds import BoundsConflictError, depth_bounds
from probewise.core.grid import EmptyGridError, evaluation_grid_capped
from probewise.core.history import reference_level_m
from probewise.core.model import (
    AreaOfInterest,
    BoundaryOfInterest,
    ChoiceConsequence,
    Correlation,
    CostItems,
    DepthBound,
    DesignElement,
    ExistingProbe,
    FormerEnvironment,
    GroundLevel,
    GroundModel,
    HistoryRule,
    Layout,
    Method,
    PlannedProbe,
    Polygon,
    Project,
    QuantityConsequence,
    RefusalRule,
    Settlement,
    Site,
    ThicknessRange,
    Unit,
    Zone,
)
from probewise.core.priors import DEFAULT_SHAPE
from probewise.errors import InputError
from probewise.io.model_programme import COST_ITEM_KEYS


def core_polygon(geometry: dict) -> Polygon:
    """GeoJSON Polygon or MultiPolygon -> Polygon of all rings of all parts (even-odd)."""
    kind = geometry.get("type")
    coords = geometry.get("coordinates") or []
    parts = [coords] if kind == "Polygon" else list(coords) if kind == "MultiPolygon" else None
    if parts is None:
        raise ValueError(f"not a Polygon or MultiPolygon: {kind!r}")
    rings = tuple(
        np.asarray([pt[:2] for pt in ring], dtype=float).reshape(-1, 2)
        for part in parts
        for ring in part
        if len(ring) >= 3
    )
    return Polygon(rings)


def core_range(spec: dict) -> ThicknessRange:
    return ThicknessRange(
        float(spec["min"]),
        float(spec["likely"]),
        float(spec["max"]),
        spec.get("shape", DEFAULT_SHAPE),
    )


def _unit_index(model: dict) -> dict[str, int]:
    return {u["name"]: i for i, u in enumerate(model["units"])}


def core_ground(model: dict) -> GroundModel:
    """Units, zones, boundaries of interest and bounds of a model dict."""
    index = _unit_index(model)
    units = []
    for u in model["units"]:
        thick = u.get("thickness_m")
        corr = u.get("correlation")
        units.append(
            Unit(
                name=u["name"],
                thickness=core_range(thick) if thick else None,
                correlation=(
                    Correlation(corr["model"], float(corr["range_m"]), float(u.get("nugget", 0.0)))
                    if corr
                    else None
                ),
                description=u.get("description", "") or "",
                presence=float(u.get("presence") or 1.0),
                spread_multiplier=float(u.get("spread_multiplier", 1.0)),
                mean_shift_m=float(u.get("mean_shift_m", 0.0)),
            )
        )
    zones = tuple(
        Zone(
            name=z["name"],
            polygon=core_polygon(z["geometry"]),
            thickness={
                index[name]: core_range(spec["thickness_m"])
                for name, spec in (z.get("units") or {}).items()
            },
            transition_m=float(z.get("transition_m") or 0.0),
        )
        for z in model.get("zones") or []
    )
    interest = tuple(
        BoundaryOfInterest(index[b["base_of"]], float(b["weight"]), float(b["tolerance_m"]))
        for b in model.get("boundaries_of_interest") or []
    )
    bounds = tuple(
        DepthBound(
            index[b["base_of"]],
            float(b["min_depth_m"]),
            float(b["max_depth_m"]),
            core_polygon(b["geometry"]) if b.get("geometry") else None,
        )
        for b in model.get("bounds") or []
    )
    pairs = tuple(
        (*sorted((index[p["units"][0]], index[p["units"][1]])), float(p["rho"]))
        for p in model.get("thickness_correlation") or []
    )
    return GroundModel(
        tuple(units),
        zones,
        interest,
        bounds,
        thickness_correlation=pairs,
        ground_level=core_ground_level(model.get("ground_level")),
        history=tuple(core_history_rule(r, model) for r in model.get("history") or []),
    )


def core_ground_level(spec: dict | None) -> GroundLevel | None:
    """``ground_level``: a constant or surveyed points ``(m, 3)`` of x, y, level."""
    if not spec:
        return None
    if spec.get("points"):
        pts = np.array([(p["x"], p["y"], p["level_m"]) for p in spec["points"]], dtype=float)
        return GroundLevel(spec.get("datum") or "", points=pts)
    return GroundLevel(spec.get("datum") or "", level_m=float(spec["level_m"]))


def core_history_rule(spec: dict, model: dict) -> HistoryRule:
    """One ``history`` entry; named reference levels resolved to the project datum."""
    index = _unit_index(model)
    ref = model.get("reference_levels") or {}
    table = {r["name"]: float(r["level_m"]) for r in ref.get("levels") or []}
    shift = float(ref.get("datum_shift_m") or 0.0)

    def band(b: dict) -> tuple[float, float]:
        return (
            reference_level_m(b["level_min"], table, shift),
            reference_level_m(b["level_max"], table, shift),
        )

    environments = tuple(
        FormerEnvironment(e["name"], core_polygon(e["geometry"]), *band(e))
        for e in spec.get("environments") or []
    )
    settle = spec.get("settlement")
    settlement = None
    if settle:
        settlement = Settlement(
            compressible_unit=index[settle["compressible_unit"]],
            cc_min=float(settle["cc"]["min"]),
            cc_max=float(settle["cc"]["max"]),
            e0=float(settle["e0"]),
            unit_weight_kn_m3=float(settle["unit_weight_kn_m3"]),
            fill_unit_weight_kn_m3=float(settle["fill_unit_weight_kn_m3"]),
            surcharge_kpa=float(settle.get("surcharge_kpa") or 0.0),
            **({"sublayer_m": float(settle["sublayer_m"])} if settle.get("sublayer_m") else {}),
        )
    outside = spec.get("outside")
    return HistoryRule(
        name=spec["name"],
        boundary=index[spec["base_of"]],
        environments=environments,
        outside=band(outside) if outside else None,
        settlement=settlement,
    )


def check_history_bounds(project: Project) -> None:
    """InputError when a history rule leaves no depth with another bound anywhere on the
    evaluation grid or at a probe (docs/model.md "Levels and site history")."""
    if not project.ground.history:
        return
    origin = np.asarray(project.origin)
    probes = [(p.x, p.y) for p in project.existing]
    probes += [(p.x, p.y) for lay in project.layouts for p in lay.probes]
    xy = [np.array(probes, dtype=float).reshape(-1, 2) - origin]
    with contextlib.suppress(EmptyGridError):
        xy.append(evaluation_grid_capped(project.site, project.origin)[0].xy)
    try:
        depth_bounds(project.ground, np.vstack(xy), project.origin)
    except BoundsConflictError as exc:
        raise InputError(exc.field, exc.problem) from None


def core_method(spec: dict, model: dict) -> Method:
    """One method: refusal = shallowest unit it cannot penetrate; precision per boundary."""
    index = _unit_index(model)
    n_bnd = len(model["units"]) - 1
    precision = [math.nan] * n_bnd
    for name, tau in (spec.get("precision_m") or {}).items():
        if index[name] < n_bnd:
            precision[index[name]] = float(tau)
    cost = spec["cost"]
    return Method(
        id=spec["id"],
        name=spec.get("name", spec["id"]),
        kind=spec.get("kind", "other"),
        mobilisation=float(cost.get("mobilisation", 0.0)),
        per_location=float(cost.get("per_location", 0.0)),
        per_metre=float(cost.get("per_metre", 0.0)),
        metres_per_day=float(spec["metres_per_day"]),
        max_depth_m=float(spec["max_depth_m"]),
        embedment_m=float(spec.get("embedment_m", 0.0)),
        precision_m=tuple(precision),
        **core_method_programme(spec, index),
    )


def core_method_programme(spec: dict, index: dict[str, int]) -> dict:
    """A method's refusal rules, proof of refusal, rigs and moves (defaults when absent): a
    rule takes over ``cannot_penetrate`` for its unit (``refusal_unit`` is recomputed)."""
    rules = []
    for rule in spec.get("refusal") or []:
        predrill = rule.get("predrill") or {}
        rules.append(
            RefusalRule(
                unit=index[rule["unit"]],
                chance=float(rule.get("chance", 1.0)),
                predrill_per_metre=(float(predrill.get("per_metre", 0.0)) if predrill else None),
                predrill_metres_per_day=(float(predrill["metres_per_day"]) if predrill else None),
            )
        )
    ruled = {r.unit for r in rules}
    blocked = [index[n] for n in spec.get("cannot_penetrate") or [] if index[n] not in ruled]
    proves = spec.get("proves_refusal")
    return {
        "refusal_unit": min(blocked) if blocked else None,
        "refusals": tuple(rules),
        "proves_refusal": True if proves is None else bool(proves),
        "rigs": int(spec.get("rigs", 1)),
        "move_days": float(spec.get("move_days", 0.0)),
    }


def core_cost_items(model: dict) -> CostItems:
    """The project's cost items (``cost_items``; none when absent)."""
    spec = model.get("cost_items") or {}
    return CostItems(**{k: float(v) for k, v in spec.items() if k in COST_ITEM_KEYS})


def core_existing(spec: dict, model: dict, methods: dict[str, Method]) -> ExistingProbe:
    """An existing probe; the precision of each recorded depth is resolved here:
    the probe's override, else its method's, else the method's coarsest, else 0.5 m."""
    index = _unit_index(model)
    observed = {index[name]: float(d) for name, d in (spec.get("observed") or {}).items()}
    override = {index[name]: float(t) for name, t in (spec.get("precision_m") or {}).items()}
    method = methods.get(spec["method"])
    precision = {k: reading_precision_m(method, k, override.get(k)) for k in observed}
    return ExistingProbe(
        id=str(spec["id"]),
        method=spec["method"],
        x=float(spec["x"]),
        y=float(spec["y"]),
        final_depth_m=float(spec.get("final_depth_m") or max(observed.values(), default=0.0)),
        observed=observed,
        precision_m=precision,
        stage=spec.get("stage"),
        ground_level_m=None
        if spec.get("ground_level_m") is None
        else float(spec["ground_level_m"]),
    )


def core_layout(spec: dict) -> Layout:
    """A model-file layout -> Layout (``depth_m`` None when not given)."""
    return Layout(
        name=spec["name"],
        probes=tuple(
            PlannedProbe(
                id=str(p["id"]),
                method=p["method"],
                x=float(p["x"]),
                y=float(p["y"]),
                depth_m=None if p.get("depth_m") is None else float(p["depth_m"]),
            )
            for p in spec.get("probes") or []
        ),
    )


def core_element(spec: dict, model: dict) -> DesignElement:
    """A design element: its boundary by index, its consequence as a dataclass."""
    con = spec["consequence"]
    if con["kind"] == "quantity":
        consequence = QuantityConsequence(
            float(con["rate_per_m3"]), float(con.get("reference_depth_m", 0.0))
        )
    else:
        consequence = ChoiceConsequence(
            float(con["threshold_depth_m"]),
            float(con["cheaper_cost"]),
            float(con["robust_cost"]),
            con.get("basis", "mean"),
        )
    return DesignElement(
        name=spec["name"],
        polygon=core_polygon(spec["geometry"]),
        boundary=_unit_index(model)[spec["base_of"]],
        adverse=spec["adverse"],
        design_fractile=float(spec.get("design_fractile", 0.95)),
        consequence=consequence,
    )


def to_core(model: dict) -> Project:
    """The whole validated model dict as a core Project."""
    methods = {m["id"]: core_method(m, model) for m in model.get("methods") or []}
    site = Site(
        outline=core_polygon(model["site"]),
        grid_spacing_m=float(model["grid_spacing_m"]),
        areas_of_interest=tuple(
            AreaOfInterest(a["name"], core_polygon(a["geometry"]), float(a["weight"]))
            for a in model.get("areas_of_interest") or []
        ),
        exclusions=tuple(core_polygon(e["geometry"]) for e in model.get("exclusions") or []),
        exclusion_names=tuple(e["name"] for e in model.get("exclusions") or []),
    )
    project = Project(
        name=model.get("name", ""),
        crs=model.get("crs"),
        currency=model.get("currency") or "",
        site=site,
        ground=core_ground(model),
        methods=methods,
        existing=tuple(core_existing(e, model, methods) for e in model.get("existing") or []),
        layouts=tuple(core_layout(lay) for lay in model.get("layouts") or []),
        elements=tuple(core_element(e, model) for e in model.get("elements") or []),
        costs=core_cost_items(model),
    )
    check_history_bounds(project)
    return with_requirements(project, model)
