"""Figures of the decision pages, drawn with matplotlib (object API, Agg; no pyplot state).

- ``cost_gain_chart``: cost against information gain of every option, the Pareto front and
  the optimiser's cost-gain curves (SVG);
- ``uncertainty_maps``: one boundary's posterior std (or P5-P95 width) on the evaluation grid,
  before and after an option, on one colour scale (PNG);
- ``depth_section``: P5/P50/P95 of every boundary along a line, before and after (PNG).

The schedule's site plan is ``probewise.web.plan_plot``.

Inputs are plain numbers and GeoJSON-like geometry, so the figures do not depend on how the
core computes them. Drawing is serialised by a lock: matplotlib's font and text caches are
shared between threads.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from matplotlib.figure import Figure
from matplotlib.patches import PathPatch
from matplotlib.path import Path as MplPath
from matplotlib.ticker import FuncFormatter

from probewise.web.plot_style import (
    AREA_EDGE,
    CHOSEN,
    CURVE,
    EXCLUSION_EDGE,
    EXISTING_FACE,
    INK,
    INK_SOFT,
    KIND_STYLE,
    MAP_CMAP,
    PARETO,
    RULE,
    SITE_EDGE,
    SITE_FILL,
    ZONE_EDGE,
    draw_lock,
    to_bytes,
)
from probewise.web.section_plot import SectionBand, SectionProbe, depth_section
from probewise.web.site_map import polygon_rings

__all__ = [
    "ChartCurve",
    "ChartPoint",
    "GridRaster",
    "MapProbePoint",
    "SectionBand",
    "SectionProbe",
    "SiteShapes",
    "cost_gain_chart",
    "depth_section",
    "uncertainty_maps",
]


@dataclass(frozen=True)
class ChartPoint:
    name: str
    cost: float
    gain_bits: float
    pareto: bool
    chosen: bool = False


@dataclass(frozen=True)
class ChartCurve:
    label: str
    points: tuple[tuple[float, float], ...]  # (cost, gain bits)


@dataclass(frozen=True)
class MapProbePoint:
    id: str
    x: float
    y: float
    kind: str
    existing: bool = False


@dataclass(frozen=True)
class SiteShapes:
    """Polygons of the site for drawing: lists of rings ``[(x, y), ...]`` per feature."""

    outline: list[list[tuple[float, float]]]
    zones: list[list[list[tuple[float, float]]]] = field(default_factory=list)
    areas: list[list[list[tuple[float, float]]]] = field(default_factory=list)
    exclusions: list[list[list[tuple[float, float]]]] = field(default_factory=list)

    @classmethod
    def of_model(cls, model: dict[str, Any]) -> SiteShapes:
        def rings_of(key: str) -> list:
            return [polygon_rings(item.get("geometry")) for item in model.get(key) or []]

        return cls(
            outline=polygon_rings(model.get("site")),
            zones=rings_of("zones"),
            areas=rings_of("areas_of_interest"),
            exclusions=rings_of("exclusions"),
        )

    def bounds(self) -> tuple[float, float, float, float]:
        pts = np.array([p for ring in self.outline for p in ring], dtype=float).reshape(-1, 2)
        if not len(pts):
            return 0.0, 0.0, 1.0, 1.0
        return (
            float(pts[:, 0].min()),
            float(pts[:, 1].min()),
            float(pts[:, 0].max()),
            float(pts[:, 1].max()),
        )


# ------------------------------------------------------------------------------ helpers


def _money_axis(value: float, _pos: Any = None) -> str:
    return f"{value:,.0f}"


def _rings_path(rings: Sequence[Sequence[tuple[float, float]]]) -> MplPath | None:
    vertices, codes = [], []
    for ring in rings:
        if len(ring) < 3:
            continue
        vertices.extend(ring)
        vertices.append(ring[0])
        codes.extend([MplPath.MOVETO] + [MplPath.LINETO] * (len(ring) - 1) + [MplPath.CLOSEPOLY])
    if not vertices:
        return None
    return MplPath(np.asarray(vertices, dtype=float), codes)


def _draw_polygon(ax, rings, **style) -> None:
    path = _rings_path(rings)
    if path is not None:
        ax.add_patch(PathPatch(path, **style))


def _draw_site(ax, shapes: SiteShapes, *, filled: bool) -> None:
    _draw_polygon(
        ax,
        shapes.outline,
        facecolor=SITE_FILL if filled else "none",
        edgecolor=SITE_EDGE,
        linewidth=1.4,
        zorder=3 if not filled else 1,
    )
    for rings in shapes.zones:
        _draw_polygon(
            ax,
            rings,
            facecolor="none",
            edgecolor=ZONE_EDGE,
            linewidth=0.9,
            linestyle="--",
            zorder=3,
        )
    for rings in shapes.areas:
        _draw_polygon(ax, rings, facecolor="none", edgecolor=AREA_EDGE, linewidth=1.0, zorder=3)
    for rings in shapes.exclusions:
        _draw_polygon(
            ax,
            rings,
            facecolor="none",
            edgecolor=EXCLUSION_EDGE,
            hatch="////",
            linewidth=1.0,
            zorder=3,
        )


def _draw_probes(ax, probes: Sequence[MapProbePoint], *, labels: bool, size: float = 28) -> None:
    for existing in (True, False):
        group = [p for p in probes if p.existing == existing]
        for kind in sorted({p.kind for p in group}):
            mine = [p for p in group if p.kind == kind]
            marker, face = KIND_STYLE.get(kind, KIND_STYLE["other"])
            ax.scatter(
                [p.x for p in mine],
                [p.y for p in mine],
                s=size * (0.7 if existing else 1.0),
                marker=marker,
                facecolors=EXISTING_FACE if existing else face,
                edgecolors=INK,
                linewidths=0.7,
                zorder=5,
            )
        if labels:
            for p in group:
                ax.annotate(
                    p.id,
                    (p.x, p.y),
                    xytext=(4, 3),
                    textcoords="offset points",
                    fontsize=6.5,
                    color=INK_SOFT if existing else INK,
                    zorder=6,
                )


def _frame_map(ax, bounds, crs: str | None) -> None:
    min_x, min_y, max_x, max_y = bounds
    pad = 0.04 * max(max_x - min_x, max_y - min_y, 1.0)
    ax.set_xlim(min_x - pad, max_x + pad)
    ax.set_ylim(min_y - pad, max_y + pad)
    ax.set_aspect("equal")
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _p: f"{v:.0f}"))
    ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _p: f"{v:.0f}"))
    ax.tick_params(labelsize=7, colors=INK_SOFT)
    for label in ax.get_xticklabels():
        label.set_rotation(0)
    ax.set_xlabel(f"Easting (m), {crs}" if crs else "x (m), local site grid", fontsize=7.5)
    ax.set_ylabel("Northing (m)" if crs else "y (m)", fontsize=7.5)
    ax.locator_params(axis="x", nbins=5)
    ax.locator_params(axis="y", nbins=5)


def _map_figure_size(bounds, n_panels: int, width_in: float) -> tuple[float, float]:
    min_x, min_y, max_x, max_y = bounds
    aspect = max(max_y - min_y, 1.0) / max(max_x - min_x, 1.0)
    panel_w = width_in / n_panels
    panel_h = min(max(panel_w * aspect, 1.6), 6.5)
    return width_in, panel_h + 1.5


# ------------------------------------------------------------------------------ figures


def cost_gain_chart(
    points: Sequence[ChartPoint],
    curves: Sequence[ChartCurve] = (),
    *,
    currency: str = "",
) -> bytes:
    """Cost against information gain of each option, with the Pareto front: SVG bytes."""
    with draw_lock:
        fig = Figure(figsize=(7.2, 4.2), layout="constrained")
        ax = fig.add_subplot()
        ax.grid(True, color=RULE, linewidth=0.6)
        ax.set_axisbelow(True)
        _draw_curves_and_front(ax, points, curves)
        ax.scatter([0], [0], marker="x", color=INK_SOFT, s=30, zorder=4)
        ax.annotate(
            "existing information only",
            (0, 0),
            xytext=(6, 5),
            textcoords="offset points",
            fontsize=7,
            color=INK_SOFT,
        )
        _draw_options(ax, points)
        ax.set_xlabel(f"Cost ({currency})" if currency else "Cost")
        ax.set_ylabel("Information gain (bits)")
        ax.xaxis.set_major_formatter(FuncFormatter(_money_axis))
        costs = [p.cost for p in points] + [c for curve in curves for c, _ in curve.points]
        gains = [p.gain_bits for p in points] + [g for curve in curves for _, g in curve.points]
        # room on the right and above for the labels
        ax.set_xlim(0, max(costs, default=1.0) * 1.3 or 1.0)
        ax.set_ylim(0, max(gains, default=1.0) * 1.12 or 1.0)
        ax.legend(loc="lower right", fontsize=7.5, frameon=True, framealpha=0.9)
        return to_bytes(fig, "svg")


def _draw_curves_and_front(ax, points: Sequence[ChartPoint], curves: Sequence[ChartCurve]) -> None:
    """The optimiser's cost-gain curves (steps) and the Pareto front through the options."""
    for n, curve in enumerate(curves):
        if len(curve.points) < 2:
            continue
        xs, ys = zip(*sorted(curve.points), strict=True)
        ax.step(
            (0.0, *xs),
            (0.0, *ys),
            where="post",
            color=CURVE,
            linewidth=1.1,
            alpha=0.9 if n == 0 else 0.45,
            label="Optimiser's cost-gain curve" if n == 0 else None,
            zorder=2,
        )
    front = sorted((p for p in points if p.pareto), key=lambda p: p.cost)
    if front:
        ax.plot(
            [0.0] + [p.cost for p in front],
            [0.0] + [p.gain_bits for p in front],
            color=PARETO,
            linewidth=1.6,
            linestyle="--",
            label="Pareto front",
            zorder=3,
        )


def _draw_options(ax, points: Sequence[ChartPoint]) -> None:
    """Every option as a labelled point, and legend entries for the point styles."""
    for p in points:
        ax.scatter(
            [p.cost],
            [p.gain_bits],
            s=70 if p.chosen else 42,
            marker="o",
            facecolors=PARETO if p.pareto else "#ffffff",
            edgecolors=CHOSEN if p.chosen else INK,
            linewidths=2.2 if p.chosen else 1.0,
            zorder=5,
        )
        label = p.name if len(p.name) <= 34 else p.name[:32] + "\u2026"
        ax.annotate(
            label,
            (p.cost, p.gain_bits),
            xytext=(7, -3),
            textcoords="offset points",
            fontsize=7.5,
            color=INK,
            fontweight="bold" if p.chosen else "normal",
            zorder=6,
        )
    # legend entries for the point styles
    ax.scatter([], [], s=42, facecolors=PARETO, edgecolors=INK, label="Pareto-efficient option")
    ax.scatter([], [], s=42, facecolors="#ffffff", edgecolors=INK, label="Dominated option")
    if any(p.chosen for p in points):
        ax.scatter(
            [],
            [],
            s=70,
            facecolors="none",
            edgecolors=CHOSEN,
            linewidths=2.2,
            label="Chosen option",
        )


@dataclass(frozen=True)
class GridRaster:
    """Where the evaluation grid's cells sit: ``index (n, 2)`` = (row from the bottom, column
    from the left) on a ``shape`` = (rows, cols) raster whose lower-left corner is
    ``corner`` (project coordinates) and cells ``spacing_m`` wide."""

    index: np.ndarray
    shape: tuple[int, int]
    corner: tuple[float, float]
    spacing_m: float

    def image(self, values: np.ndarray) -> np.ndarray:
        out = np.full(self.shape, np.nan)
        out[self.index[:, 0], self.index[:, 1]] = values
        return out

    @property
    def extent(self) -> tuple[float, float, float, float]:
        rows, cols = self.shape
        x0, y0 = self.corner
        return x0, x0 + cols * self.spacing_m, y0, y0 + rows * self.spacing_m


def uncertainty_maps(
    raster: GridRaster,
    panels: Sequence[tuple[str, np.ndarray, Sequence[MapProbePoint]]],
    shapes: SiteShapes,
    *,
    title: str,
    quantity_label: str,
    crs: str | None,
    width_in: float = 9.0,
) -> bytes:
    """Side-by-side maps of one quantity (m) on one colour scale: PNG bytes.

    ``panels``: (panel title, values per grid cell ``(n,)``, probes to draw).
    """
    bounds = shapes.bounds()
    with draw_lock:
        fig = Figure(figsize=_map_figure_size(bounds, len(panels), width_in), layout="constrained")
        axes = fig.subplots(1, len(panels), squeeze=False)[0]
        top = max((float(np.nanmax(v)) for _, v, _ in panels if np.isfinite(v).any()), default=1.0)
        top = top if top > 0 else 1.0
        image = None
        for ax, (panel_title, values, probes) in zip(axes, panels, strict=True):
            _draw_site(ax, shapes, filled=False)
            image = ax.imshow(
                raster.image(values),
                origin="lower",
                extent=raster.extent,
                cmap=MAP_CMAP,
                vmin=0.0,
                vmax=top,
                interpolation="nearest",
                zorder=1,
            )
            _draw_probes(ax, probes, labels=False, size=18)
            _frame_map(ax, bounds, crs)
            ax.set_title(panel_title, fontsize=9)
        if image is not None:
            bar = fig.colorbar(
                image, ax=list(axes), orientation="horizontal", shrink=0.5, aspect=40, pad=0.02
            )
            bar.set_label(quantity_label, fontsize=8)
            bar.ax.tick_params(labelsize=7)
        fig.suptitle(title, fontsize=10, fontweight="bold")
        return to_bytes(fig, "png", dpi=130)
