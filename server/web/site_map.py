"""The site drawn as SVG: geometry in the project CRS turned into screen paths on the server.

The drawing keeps the CRS's own proportions (one scale for x and y), north (or the local
grid's +y) up, with coordinate ticks, a scale bar and a north arrow. Templates only place the
pieces computed here (templates/_site_map.html).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from typing import Any

from shapely.geometry import shape

from probewise.web.symbols import methods_drawn

MAX_FRAME_W_PX = 860.0
MAX_FRAME_H_PX = 520.0
MARGIN_LEFT_PX = 76.0
MARGIN_TOP_PX = 16.0
MARGIN_RIGHT_PX = 56.0
MARGIN_BOTTOM_PX = 84.0
PAD_FRACTION = 0.05  # empty border around the features, as a share of the larger span


@dataclass(frozen=True)
class MapShape:
    name: str
    tag: str  # short key drawn on the map ("Z1", "A2", "X1"), spelled out beside it
    path: str  # SVG path data in screen pixels (even-odd rule handles holes)
    label_x: float
    label_y: float
    note: str = ""
    anchor: str = "middle"  # text-anchor that keeps the label inside the frame


@dataclass(frozen=True)
class MapProbe:
    id: str
    method: str
    kind: str
    x: float  # screen px
    y: float
    world_x: float
    world_y: float


@dataclass(frozen=True)
class MapTick:
    at_px: float
    label: str


@dataclass(frozen=True)
class ScaleBar:
    x: float
    y: float
    length_px: float
    half_px: float
    label: str


@dataclass(frozen=True)
class SiteMap:
    width: float
    height: float
    frame_x: float
    frame_y: float
    frame_w: float
    frame_h: float
    site: MapShape | None
    zones: list[MapShape]
    areas: list[MapShape]
    exclusions: list[MapShape]
    probes: list[MapProbe]
    x_ticks: list[MapTick]
    y_ticks: list[MapTick]
    x_caption: str
    y_caption: str
    scale_bar: ScaleBar
    north_x: float
    north_y: float
    north_label: str
    probe_kinds: list[str]
    probe_methods: list[dict[str, str]]  # legend: the methods of the probes drawn


def polygon_rings(geometry: dict[str, Any] | None) -> list[list[tuple[float, float]]]:
    """The rings of a GeoJSON Polygon or MultiPolygon (other types give none)."""
    if not geometry:
        return []
    kind = geometry.get("type")
    coordinates = geometry.get("coordinates") or []
    if kind == "Polygon":
        polygons = [coordinates]
    elif kind == "MultiPolygon":
        polygons = coordinates
    else:
        return []
    return [
        [(float(p[0]), float(p[1])) for p in ring]
        for polygon in polygons
        for ring in polygon
        if len(ring) >= 3
    ]


def nice_step(span: float, target_count: int) -> float:
    """A 1-2-5 step that cuts ``span`` into about ``target_count`` pieces."""
    if span <= 0 or not math.isfinite(span):
        return 1.0
    raw = span / target_count
    magnitude = 10 ** math.floor(math.log10(raw))
    for factor in (1, 2, 5, 10):
        if factor * magnitude >= raw:
            return factor * magnitude
    return 10 * magnitude


def nice_length_at_most(length: float) -> float:
    """The largest 1-2-5 number not above ``length``."""
    if length <= 0 or not math.isfinite(length):
        return 1.0
    magnitude = 10 ** math.floor(math.log10(length))
    for factor in (5, 2, 1):
        if factor * magnitude <= length:
            return factor * magnitude
    return magnitude


def format_coordinate(value: float, step: float) -> str:
    decimals = max(0, -math.floor(math.log10(step))) if step > 0 else 0
    text = f"{value:.{decimals}f}"
    return "0" if text.strip("-0.") == "" else text


def format_length_m(length_m: float) -> str:
    if length_m >= 1000:
        return f"{length_m / 1000:g} km"
    return f"{length_m:g} m"


class Projection:
    """World metres -> screen pixels (y flipped so north is up)."""

    def __init__(self, bounds: tuple[float, float, float, float]):
        min_x, min_y, max_x, max_y = bounds
        span_x = max(max_x - min_x, 1e-9)
        span_y = max(max_y - min_y, 1e-9)
        pad = PAD_FRACTION * max(span_x, span_y, 1.0)
        self.min_x, self.max_x = min_x - pad, max_x + pad
        self.min_y, self.max_y = min_y - pad, max_y + pad
        world_w = self.max_x - self.min_x
        world_h = self.max_y - self.min_y
        self.scale = min(MAX_FRAME_W_PX / world_w, MAX_FRAME_H_PX / world_h)
        self.frame_w = world_w * self.scale
        self.frame_h = world_h * self.scale

    def x(self, world_x: float) -> float:
        return MARGIN_LEFT_PX + (world_x - self.min_x) * self.scale

    def y(self, world_y: float) -> float:
        return MARGIN_TOP_PX + (self.max_y - world_y) * self.scale

    def path(self, rings: Iterable[Sequence[tuple[float, float]]]) -> str:
        parts = []
        for ring in rings:
            points = " L".join(f"{self.x(x):.1f} {self.y(y):.1f}" for x, y in ring)
            parts.append(f"M{points} Z")
        return " ".join(parts)


def label_point(geometry: dict[str, Any], rings: list) -> tuple[float, float]:
    """A point inside the polygon for its label (bounding-box centre if shapely refuses)."""
    try:
        point = shape(geometry).representative_point()
        if not point.is_empty:
            return point.x, point.y
    except Exception:  # noqa: BLE001 - a bad geometry still gets drawn, label placed roughly
        pass
    xs = [x for ring in rings for x, _ in ring]
    ys = [y for ring in rings for _, y in ring]
    return (min(xs) + max(xs)) / 2, (min(ys) + max(ys)) / 2


def feature_bounds(model: dict[str, Any]) -> tuple[float, float, float, float]:
    xs: list[float] = []
    ys: list[float] = []
    geometries = [model.get("site")]
    for key in ("zones", "areas_of_interest", "exclusions"):
        geometries += [item.get("geometry") for item in model.get(key) or []]
    for geometry in geometries:
        for ring in polygon_rings(geometry):
            xs += [x for x, _ in ring]
            ys += [y for _, y in ring]
    for probe in model.get("existing") or []:
        xs.append(float(probe["x"]))
        ys.append(float(probe["y"]))
    if not xs:
        return 0.0, 0.0, 100.0, 100.0
    return min(xs), min(ys), max(xs), max(ys)


def map_shapes(
    projection: Projection,
    items: list[dict[str, Any]],
    prefix: str,
    note_of=lambda item: "",
) -> list[MapShape]:
    """Labelled map shapes of a section's polygons (``Z1``, ``A2``...), in the frame."""
    shapes = []
    for number, item in enumerate(items, start=1):
        rings = polygon_rings(item.get("geometry"))
        if not rings:
            continue
        lx, ly = label_point(item["geometry"], rings)
        label_x = projection.x(lx)
        shapes.append(
            MapShape(
                name=str(item.get("name", "")),
                tag=f"{prefix}{number}",
                path=projection.path(rings),
                label_x=round(label_x, 1),
                label_y=round(projection.y(ly), 1),
                note=note_of(item),
                anchor=anchor_for(label_x, projection),
            )
        )
    return shapes


def map_probes(projection: Projection, model: dict[str, Any]) -> list[MapProbe]:
    """The existing probes in the frame."""
    kinds = {m["id"]: m.get("kind", "other") for m in model.get("methods") or []}
    return [
        MapProbe(
            id=str(p["id"]),
            method=str(p["method"]),
            kind=kinds.get(p["method"], "other"),
            x=round(projection.x(float(p["x"])), 1),
            y=round(projection.y(float(p["y"])), 1),
            world_x=float(p["x"]),
            world_y=float(p["y"]),
        )
        for p in model.get("existing") or []
    ]


def map_ticks(projection: Projection) -> tuple[list[MapTick], list[MapTick]]:
    """Round-numbered ticks along x and y (about five each)."""
    x_step = nice_step(projection.max_x - projection.min_x, 5)
    y_step = nice_step(projection.max_y - projection.min_y, 5)
    x_ticks = [
        MapTick(round(projection.x(v), 1), format_coordinate(v, x_step))
        for v in tick_values(projection.min_x, projection.max_x, x_step)
    ]
    y_ticks = [
        MapTick(round(projection.y(v), 1), format_coordinate(v, y_step))
        for v in tick_values(projection.min_y, projection.max_y, y_step)
    ]
    return x_ticks, y_ticks


def map_scale_bar(projection: Projection) -> ScaleBar:
    """A scale bar of a round length, about a quarter of the frame's width, below the frame."""
    world_w = projection.max_x - projection.min_x
    bar_m = nice_length_at_most(world_w / 4)
    bar_px = bar_m * projection.scale
    frame_bottom = MARGIN_TOP_PX + projection.frame_h
    return ScaleBar(
        x=MARGIN_LEFT_PX,
        y=round(frame_bottom + 58, 1),
        length_px=round(bar_px, 1),
        half_px=round(bar_px / 2, 1),
        label=format_length_m(bar_m),
    )


def build_site_map(model: dict[str, Any]) -> SiteMap:
    """Everything the template needs to draw the site of a (validated) model."""
    projection = Projection(feature_bounds(model))

    site_rings = polygon_rings(model.get("site"))
    site = None
    if site_rings:
        lx, ly = label_point(model["site"], site_rings)
        site = MapShape("Site", "", projection.path(site_rings), projection.x(lx), projection.y(ly))

    probes = map_probes(projection, model)

    x_ticks, y_ticks = map_ticks(projection)

    zones, areas, exclusions = spread_labels(
        [
            map_shapes(projection, model.get("zones") or [], "Z"),
            map_shapes(
                projection,
                model.get("areas_of_interest") or [],
                "A",
                lambda item: f"weight {item.get('weight', 1):g}",
            ),
            map_shapes(projection, model.get("exclusions") or [], "X"),
        ]
    )

    crs = model.get("crs")
    if crs:
        x_caption, y_caption, north_label = f"Easting (m), {crs}", "Northing (m)", "N"
    else:
        x_caption, y_caption, north_label = "x (m), local site grid", "y (m)", "+y"

    frame_bottom = MARGIN_TOP_PX + projection.frame_h
    scale_bar = map_scale_bar(projection)
    return SiteMap(
        width=round(MARGIN_LEFT_PX + projection.frame_w + MARGIN_RIGHT_PX, 1),
        height=round(frame_bottom + MARGIN_BOTTOM_PX, 1),
        frame_x=MARGIN_LEFT_PX,
        frame_y=MARGIN_TOP_PX,
        frame_w=round(projection.frame_w, 1),
        frame_h=round(projection.frame_h, 1),
        site=site,
        zones=zones,
        areas=areas,
        exclusions=exclusions,
        probes=probes,
        x_ticks=x_ticks,
        y_ticks=y_ticks,
        x_caption=x_caption,
        y_caption=y_caption,
        scale_bar=scale_bar,
        north_x=round(MARGIN_LEFT_PX + projection.frame_w + MARGIN_RIGHT_PX / 2, 1),
        north_y=MARGIN_TOP_PX + 8,
        north_label=north_label,
        probe_kinds=sorted({p.kind for p in probes}),
        probe_methods=methods_drawn(model, {p.method for p in probes}),
    )


LABEL_GAP_PX = 13.0


def spread_labels(groups: list[list[MapShape]]) -> list[list[MapShape]]:
    """Nudge a label down until it clears the labels placed before it (tags are short)."""
    placed: list[tuple[float, float]] = []
    out = []
    for group in groups:
        moved = []
        for item in group:
            x, y = item.label_x, item.label_y
            for _ in range(20):
                if all(
                    abs(x - px) > 2 * LABEL_GAP_PX or abs(y - py) > LABEL_GAP_PX
                    for px, py in placed
                ):
                    break
                y += LABEL_GAP_PX
            placed.append((x, y))
            moved.append(replace(item, label_y=round(y, 1)))
        out.append(moved)
    return out


def anchor_for(x_px: float, projection: Projection) -> str:
    """Labels near the frame's sides grow inwards."""
    share = (x_px - MARGIN_LEFT_PX) / projection.frame_w
    if share < 0.25:
        return "start"
    if share > 0.75:
        return "end"
    return "middle"


def tick_values(low: float, high: float, step: float) -> list[float]:
    first = math.ceil(low / step) * step
    count = int(math.floor((high - first) / step + 1e-9)) + 1
    return [first + i * step for i in range(max(count, 0))]
