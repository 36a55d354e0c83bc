"""Figures of the value of an investigation (matplotlib, object API, Agg; docs/model.md
"The value of an investigation"):

- ``value_chart``: expected saving and net value of every option against its GI cost, the
  option of highest net value marked (PNG);
- ``design_level_maps``: one element's design (cautious) level on the cells it covers, now and
  expected after an option, on one colour scale (PNG).

Inputs are plain numbers and rings, so the figures do not depend on how the core computes them.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter

from probewise.web.plot_style import (
    CHOSEN,
    CURVE,
    INK,
    INK_SOFT,
    KIND_STYLE,
    PARETO,
    RULE,
    SITE_EDGE,
    draw_lock,
    to_bytes,
)
from probewise.web.plots import GridRaster, MapProbePoint

DEPTH_CMAP = "YlGnBu"  # light = shallow, dark = deep; prints in grey too


@dataclass(frozen=True)
class ValuePoint:
    """One option on the value chart (money of the project)."""

    name: str
    gi_cost: float
    expected_saving: float
    net_value: float
    chosen: bool = False


def optimum_of(points: Sequence[ValuePoint]) -> ValuePoint | None:
    """The option of highest net value (the cheaper of equals, then by name)."""
    if not points:
        return None
    return min(points, key=lambda p: (-p.net_value, p.gi_cost, p.name))


def _money(value: float, _pos=None) -> str:
    return f"{value:,.0f}"


def value_chart(points: Sequence[ValuePoint], *, currency: str = "") -> bytes:
    """Expected saving and net value against GI cost, break-even line, optimum starred: PNG."""
    best = optimum_of(points)
    with draw_lock:
        fig = Figure(figsize=(7.2, 4.2), layout="constrained")
        ax = fig.add_subplot()
        ax.grid(True, color=RULE, linewidth=0.6)
        ax.set_axisbelow(True)
        top_cost = max((p.gi_cost for p in points), default=1.0) * 1.35 or 1.0
        ax.plot([0, top_cost], [0, top_cost], color=INK_SOFT, linewidth=0.9, linestyle=":",
                label="Saving = GI cost (break-even)")  # fmt: skip
        ax.axhline(0.0, color=INK_SOFT, linewidth=0.8)
        for p in points:
            ax.plot([p.gi_cost, p.gi_cost], [p.net_value, p.expected_saving], color=RULE,
                    linewidth=1.2, zorder=2)  # fmt: skip
        ax.scatter([p.gi_cost for p in points], [p.expected_saving for p in points], s=42,
                   marker="o", facecolors=CURVE, edgecolors=INK, linewidths=0.8, zorder=4,
                   label="Expected saving")  # fmt: skip
        ax.scatter([p.gi_cost for p in points], [p.net_value for p in points], s=42, marker="s",
                   facecolors=PARETO, edgecolors=INK, linewidths=0.8, zorder=4,
                   label="Net value (saving less GI cost)")  # fmt: skip
        for p in points:
            label = p.name if len(p.name) <= 34 else p.name[:32] + "\u2026"
            ax.annotate(label, (p.gi_cost, p.net_value), xytext=(7, -3), textcoords="offset points",
                        fontsize=7.5, color=INK, fontweight="bold" if p.chosen else "normal",
                        zorder=6)  # fmt: skip
        if best is not None:
            ax.scatter([best.gi_cost], [best.net_value], s=260, marker="*", facecolors="none",
                       edgecolors=CHOSEN, linewidths=1.6, zorder=5,
                       label=f"Highest net value: {best.name[:40]}")  # fmt: skip
        ax.set_xlim(0, top_cost)
        ax.set_xlabel(f"GI cost ({currency})" if currency else "GI cost")
        ax.set_ylabel(f"Money ({currency})" if currency else "Money")
        ax.xaxis.set_major_formatter(FuncFormatter(_money))
        ax.yaxis.set_major_formatter(FuncFormatter(_money))
        ax.legend(loc="best", fontsize=7.5, frameon=True, framealpha=0.9)
        return to_bytes(fig, "png", dpi=130)


def _bounds_of(rings: Sequence[Sequence[tuple[float, float]]]) -> tuple[float, float, float, float]:
    pts = np.array([p for ring in rings for p in ring], dtype=float).reshape(-1, 2)
    if not len(pts):
        return 0.0, 0.0, 1.0, 1.0
    return (
        float(pts[:, 0].min()),
        float(pts[:, 1].min()),
        float(pts[:, 0].max()),
        float(pts[:, 1].max()),
    )


def _draw_rings(ax, rings, **style) -> None:
    for ring in rings:
        if len(ring) >= 2:
            xs, ys = zip(*[*ring, ring[0]], strict=True)
            ax.plot(xs, ys, **style)


def design_level_maps(
    raster: GridRaster,
    panels: Sequence[tuple[str, np.ndarray]],
    footprint: Sequence[Sequence[tuple[float, float]]],
    site: Sequence[Sequence[tuple[float, float]]],
    probes: Sequence[MapProbePoint],
    *,
    title: str,
    quantity_label: str,
    crs: str | None,
) -> bytes:
    """Side-by-side maps of one element's design level, framed on its footprint: PNG bytes.

    ``panels``: (panel title, values per grid cell ``(n,)``, NaN outside the element).
    """
    min_x, min_y, max_x, max_y = _bounds_of(footprint)
    pad = 0.08 * max(max_x - min_x, max_y - min_y, 1.0)
    frame = (min_x - pad, max_x + pad, min_y - pad, max_y + pad)
    aspect = (frame[3] - frame[2]) / max(frame[1] - frame[0], 1.0)
    panel_w = 4.5
    with draw_lock:
        fig = Figure(figsize=(9.0, min(max(panel_w * aspect, 1.8), 4.5) + 1.5),
                     layout="constrained")  # fmt: skip
        axes = fig.subplots(1, len(panels), squeeze=False)[0]
        finite = [v[np.isfinite(v)] for _, v in panels]
        low = min((float(v.min()) for v in finite if v.size), default=0.0)
        high = max((float(v.max()) for v in finite if v.size), default=1.0)
        high = high if high > low else low + 0.01
        image = None
        for ax, (panel_title, values) in zip(axes, panels, strict=True):
            image = ax.imshow(raster.image(values), origin="lower", extent=raster.extent,
                              cmap=DEPTH_CMAP, vmin=low, vmax=high, interpolation="nearest",
                              zorder=1)  # fmt: skip
            _draw_rings(ax, site, color=SITE_EDGE, linewidth=1.2, zorder=3)
            _draw_rings(ax, footprint, color=INK, linewidth=1.4, linestyle="--", zorder=3)
            for p in probes:
                if frame[0] <= p.x <= frame[1] and frame[2] <= p.y <= frame[3]:
                    marker, face = KIND_STYLE.get(p.kind, KIND_STYLE["other"])
                    ax.scatter([p.x], [p.y], s=14 if p.existing else 20, marker=marker,
                               facecolors="#9aa3a9" if p.existing else face, edgecolors=INK,
                               linewidths=0.6, zorder=5)  # fmt: skip
            ax.set_xlim(frame[0], frame[1])
            ax.set_ylim(frame[2], frame[3])
            ax.set_aspect("equal")
            ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _p: f"{v:.0f}"))
            ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _p: f"{v:.0f}"))
            ax.tick_params(labelsize=7, colors=INK_SOFT)
            ax.locator_params(axis="x", nbins=4)
            ax.set_xlabel(f"Easting (m), {crs}" if crs else "x (m), local site grid", fontsize=7.5)
            ax.set_ylabel("Northing (m)" if crs else "y (m)", fontsize=7.5)
            ax.set_title(panel_title, fontsize=9)
        if image is not None:
            bar = fig.colorbar(image, ax=list(axes), orientation="horizontal", shrink=0.5,
                               aspect=40, pad=0.02)  # fmt: skip
            bar.set_label(quantity_label, fontsize=8)
            bar.ax.tick_params(labelsize=7)
        fig.suptitle(title, fontsize=10, fontweight="bold")
        return to_bytes(fig, "png", dpi=130)
