"""The printed site plan of the schedule (matplotlib): the site, its areas and exclusions, and
every probe in the symbols of the screen maps (``probewise.web.symbols``), with a legend, a
scale bar and a north arrow.

Labels stay readable with many probes: each probe's id goes to the first of eight places
around its symbol (then eight further out, with a leader) that overlaps no symbol and no
label already placed; a probe with no free place is numbered instead, and the figure's key
lists the numbers with their ids. ``plan_figure`` returns the image bytes,
``plan_with_placement`` also what was placed where (the tests read it).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.legend_handler import HandlerBase
from matplotlib.lines import Line2D
from matplotlib.patches import PathPatch, Polygon
from matplotlib.path import Path as MplPath
from matplotlib.text import Text

from probewise.web.plot_style import (
    AREA_EDGE,
    EXCLUSION_EDGE,
    INK,
    ZONE_EDGE,
    draw_lock,
    symbol_marker,
    to_bytes,
)
from probewise.web.plots import SiteShapes, _draw_site, _frame_map, _map_figure_size
from probewise.web.symbols import code_font_px, short_code, symbol_colours, symbol_of

SYMBOL_WIDTH_PT = 15.0  # a symbol's width on paper
LABEL_FONT_PT = 6.0
CODE_FONT_SCALE = 0.72  # the code's size in points per SVG pixel of the screen symbol
DPI = 150
ANGLES = (0, 180, 30, -30, 150, -150, 90, -90, 60, -60, 120, -120)  # label places, first free wins
# where the north arrow and the scale bar sit (axes fractions): labels keep out
KEEP_CLEAR_NORTH = ((0.93, 0.78), (1.0, 1.0))
KEEP_CLEAR_SCALE = ((0.0, 0.0), (0.3, 0.13))


@dataclass(frozen=True)
class PlanProbe:
    id: str
    x: float
    y: float
    kind: str
    code: str  # the method's short code, drawn in the symbol
    existing: bool = False


@dataclass(frozen=True)
class Placement:
    """Where the labels went, in display pixels: ``labels`` {id: (x0, y0, x1, y1)},
    ``symbols`` {id: box}, ``numbered`` {number: id} for probes with no room for a label."""

    labels: dict[str, tuple[float, float, float, float]]
    symbols: dict[str, tuple[float, float, float, float]]
    numbered: dict[int, str]


marker_path = symbol_marker


def marker_size(kind: str) -> float:
    """scatter's ``s`` (points squared) for a symbol SYMBOL_WIDTH_PT wide: matplotlib scales a
    path marker so that twice its largest coordinate spans sqrt(s) points."""
    outline = np.abs(np.array(symbol_of(kind).outline, dtype=float))
    width = 2 * outline[:, 0].max()
    extent = 2 * outline.max()
    return (SYMBOL_WIDTH_PT * extent / width) ** 2


class _SymbolHandler(HandlerBase):
    """Legend entries drawn as the probe symbol with the method's code in it."""

    def __init__(self, kind: str, code: str, existing: bool):
        super().__init__()
        self.kind, self.code, self.existing = kind, code, existing

    def create_artists(
        self, legend, orig_handle, xdescent, ydescent, width, height, fontsize, trans
    ):
        fill, edge, ink = symbol_colours(self.kind, self.existing)
        outline = np.array(symbol_of(self.kind).outline, dtype=float) * np.array([1.0, -1.0])
        scale = height * 0.5
        cx, cy = -xdescent + width / 2, -ydescent + height / 2  # as matplotlib's own handlers
        patch = Polygon(
            outline * scale + [cx, cy],
            closed=True,
            facecolor=fill,
            edgecolor=edge,
            linewidth=1.0 if self.existing else 0.6,
            transform=trans,
        )
        text_y = cy - symbol_of(self.kind).text_y * scale
        label = Text(
            cx,
            text_y,
            short_code(self.code),
            transform=trans,
            ha="center",
            va="center",
            fontsize=code_font_px(self.code) * 0.6,
            color=ink,
            fontweight="bold",
        )
        return [patch, label]


def _draw_symbols(ax, probes: Sequence[PlanProbe]) -> None:
    for existing in (True, False):
        for kind in sorted({p.kind for p in probes if p.existing == existing}):
            mine = [p for p in probes if p.existing == existing and p.kind == kind]
            fill, edge, _ink = symbol_colours(kind, existing)
            ax.scatter(
                [p.x for p in mine],
                [p.y for p in mine],
                s=marker_size(kind),
                marker=marker_path(kind),
                facecolors=fill,
                edgecolors=edge,
                linewidths=1.0 if existing else 0.5,
                zorder=5 if existing else 6,
            )
    for p in probes:
        _fill, _edge, ink = symbol_colours(p.kind, p.existing)
        ax.annotate(
            short_code(p.code),
            (p.x, p.y),
            xytext=(0, -symbol_of(p.kind).text_y * SYMBOL_WIDTH_PT / 2.9),
            textcoords="offset points",
            ha="center",
            va="center_baseline",
            fontsize=code_font_px(p.code) * CODE_FONT_SCALE,
            fontweight="bold",
            color=ink,
            zorder=7,
        )


def _overlaps(box, boxes) -> bool:
    x0, y0, x1, y1 = box
    return any(x0 < b[2] and b[0] < x1 and y0 < b[3] and b[1] < y1 for b in boxes)


def _place_labels(ax, fig, probes: Sequence[PlanProbe]) -> Placement:
    """Greedy placement in display pixels (see the module notes); draws the labels."""
    FigureCanvasAgg(fig).draw()  # fixes the layout so that data -> pixels is final
    fig.set_layout_engine("none")
    px_per_pt = DPI / 72.0
    half_w = SYMBOL_WIDTH_PT * px_per_pt / 2
    half_h = half_w * 0.75
    xy = ax.transData.transform(np.array([[p.x, p.y] for p in probes], dtype=float))
    symbols = {
        p.id: (x - half_w, y - half_h, x + half_w, y + half_h)
        for p, (x, y) in zip(probes, xy, strict=True)
    }
    frame = ax.get_window_extent()
    taken = list(symbols.values())
    for (fx0, fy0), (fx1, fy1) in (KEEP_CLEAR_NORTH, KEEP_CLEAR_SCALE):  # arrow and scale bar
        (x0, y0), (x1, y1) = ax.transAxes.transform([(fx0, fy0), (fx1, fy1)])
        taken.append((x0, y0, x1, y1))
    labels: dict[str, tuple[float, float, float, float]] = {}
    numbered: dict[int, str] = {}
    text_h = LABEL_FONT_PT * px_per_pt * 1.15
    char_w = LABEL_FONT_PT * px_per_pt * 0.62
    # planned probes first: their labels matter most
    order = sorted(range(len(probes)), key=lambda i: (probes[i].existing, i))
    for i in order:
        p, (x, y) = probes[i], xy[i]
        w = char_w * len(p.id) + 2
        placed = None
        for ring, gap in ((0, 1.5), (1, 12.0), (2, 24.0)):
            for angle in ANGLES:
                dx, dy = math.cos(math.radians(angle)), math.sin(math.radians(angle))
                ax_ = x + dx * (half_w + gap + (w / 2 if dx else 0)) - w / 2
                ay_ = y + dy * (half_h + gap + (text_h / 2 if dy else 0)) - text_h / 2
                box = (ax_, ay_, ax_ + w, ay_ + text_h)
                inside = (
                    box[0] >= frame.x0
                    and box[2] <= frame.x1
                    and box[1] >= frame.y0
                    and box[3] <= frame.y1
                )
                if inside and not _overlaps(box, taken):
                    placed = (box, ring)
                    break
            if placed:
                break
        if placed is None:
            numbered[len(numbered) + 1] = p.id
            continue
        box, ring = placed
        taken.append(box)
        labels[p.id] = box
        centre = ((box[0] + box[2]) / 2, (box[1] + box[3]) / 2)
        data_centre = ax.transData.inverted().transform(centre)
        ax.annotate(
            p.id,
            (p.x, p.y),
            xytext=data_centre,
            textcoords="data",
            ha="center",
            va="center",
            fontsize=LABEL_FONT_PT,
            color=INK if not p.existing else "#4a5560",
            zorder=8,
            arrowprops=(
                {
                    "arrowstyle": "-",
                    "color": "#7a858c",
                    "linewidth": 0.4,
                    "shrinkA": 0,
                    "shrinkB": half_w / px_per_pt,
                }
                if ring
                else None
            ),
        )
    for n, probe_id in numbered.items():
        p = next(q for q in probes if q.id == probe_id)
        ax.annotate(
            str(n),
            (p.x, p.y),
            xytext=(half_w / px_per_pt + 1, 0),
            textcoords="offset points",
            fontsize=LABEL_FONT_PT - 1,
            color="#4a5560",
            va="center",
            zorder=8,
        )
    return Placement(labels=labels, symbols=symbols, numbered=numbered)


def nice_length_m(span_m: float) -> float:
    """A round scale bar length (1, 2 or 5 x 10^n m) of at most a fifth of ``span_m``."""
    target = max(span_m / 5.0, 1e-9)
    magnitude = 10 ** math.floor(math.log10(target))
    return next(f * magnitude for f in (5, 2, 1) if f * magnitude <= target)


def _scale_bar_and_north(ax, bounds, crs: str | None) -> None:
    x_lo, x_hi = ax.get_xlim()
    y_lo, y_hi = ax.get_ylim()
    length = nice_length_m(x_hi - x_lo)
    x0 = x_lo + 0.04 * (x_hi - x_lo)
    y0 = y_lo + 0.05 * (y_hi - y_lo)
    bar_h = 0.012 * (y_hi - y_lo)
    for n, colour in enumerate((INK, "#ffffff")):
        ax.add_patch(
            Polygon(
                [
                    (x0 + n * length / 2, y0),
                    (x0 + (n + 1) * length / 2, y0),
                    (x0 + (n + 1) * length / 2, y0 + bar_h),
                    (x0 + n * length / 2, y0 + bar_h),
                ],
                facecolor=colour,
                edgecolor=INK,
                linewidth=0.6,
                zorder=9,
            )
        )
    ax.text(x0, y0 + 2.2 * bar_h, "0", ha="center", fontsize=6.5, color=INK, zorder=9)
    ax.text(
        x0 + length,
        y0 + 2.2 * bar_h,
        f"{length:g} m",
        ha="center",
        fontsize=6.5,
        color=INK,
        zorder=9,
    )
    label = "N" if crs else "+y"
    ax.annotate(
        label,
        xy=(0.965, 0.95),
        xytext=(0.965, 0.83),
        xycoords="axes fraction",
        textcoords="axes fraction",
        ha="center",
        va="top",
        fontsize=8,
        fontweight="bold",
        color=INK,
        arrowprops={"arrowstyle": "-|>", "color": INK, "linewidth": 1.2},
        zorder=9,
    )


def plan_figure(shapes: SiteShapes, probes: Sequence[PlanProbe], **options) -> bytes:
    """The schedule's site plan as image bytes (see ``plan_with_placement``)."""
    return plan_with_placement(shapes, probes, **options)[0]


def plan_with_placement(
    shapes: SiteShapes,
    probes: Sequence[PlanProbe],
    *,
    title: str,
    crs: str | None,
    legend_methods: Sequence[dict[str, str]],
    legend_existing: Sequence[dict[str, str]] = (),
    kind_labels: dict[str, str] | None = None,
    width_in: float = 7.5,
    fmt: str = "png",
) -> tuple[bytes, Placement]:
    """The schedule's site plan: image bytes (PNG or PDF/SVG by ``fmt``) and the labels' places.

    ``legend_methods``/``legend_existing``: the planned and existing probes' methods (id, name,
    kind) in the order the legend lists them.
    """
    kind_labels = kind_labels or {}
    bounds = shapes.bounds()
    with draw_lock:
        w, h = _map_figure_size(bounds, 1, width_in)
        fig = Figure(figsize=(w, h + 0.4), layout="constrained", dpi=DPI)
        ax = fig.add_subplot()
        _draw_site(ax, shapes, filled=True)
        _draw_symbols(ax, probes)
        _frame_map(ax, bounds, crs)
        ax.set_title(title, fontsize=10, fontweight="bold")
        handles, labels, handler_map = [], [], {}
        for existing, group in ((False, legend_methods), (True, legend_existing)):
            for m in group:
                handle = Line2D([], [], linestyle="none")
                handles.append(handle)
                handler_map[handle] = _SymbolHandler(m["kind"], m["id"], existing)
                what = "existing" if existing else "planned"
                kind = kind_labels.get(m["kind"], m["kind"])
                name = f" ({m['name']})" if m.get("name") and m["name"] != m["id"] else ""
                labels.append(f"{m['id']}: {kind}, {what}{name}")
        for present, patch, text in (
            (
                shapes.exclusions,
                {"edgecolor": EXCLUSION_EDGE, "hatch": "////"},
                "Exclusion (no probes)",
            ),
            (shapes.areas, {"edgecolor": AREA_EDGE}, "Area of interest"),
            (shapes.zones, {"edgecolor": ZONE_EDGE, "linestyle": "--"}, "Zone"),
        ):
            if present:
                handles.append(
                    PathPatch(MplPath([(0, 0), (1, 0), (1, 1)]), facecolor="none", **patch)
                )
                labels.append(text)
        if handles:
            fig.legend(
                handles,
                labels,
                handler_map=handler_map,
                loc="outside lower center",
                ncols=2,
                fontsize=6.5,
                frameon=False,
                handlelength=2.4,
                handleheight=1.6,
            )
        placement = _place_labels(ax, fig, probes) if probes else Placement({}, {}, {})
        _scale_bar_and_north(ax, bounds, crs)
        return to_bytes(fig, fmt, dpi=DPI), placement
