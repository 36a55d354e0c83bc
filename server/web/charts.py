"""Small server-side charts (matplotlib, Agg, SVG): a unit's thickness distribution.

matplotlib is imported inside the drawing function so the app starts fast; figures are built
with the object API (no pyplot state), under a lock because the routes run in threads. The
density and the mean and standard deviation come from the one registry of thickness shapes,
probewise.core.priors (the numbers the model uses).
"""

from __future__ import annotations

import io
import math
import re
import threading
from collections import OrderedDict
from functools import lru_cache

import numpy as np

from probewise.core.model import ThicknessRange
from probewise.core.priors import thickness_distribution, thickness_moments

# Palette of static/css/probewise.css: ink, teal, clay and their soft tints.
INK = "#22303a"
INK_SOFT = "#55636d"
TEAL = "#2b7a80"
TEAL_SOFT = "#dcefef"
CLAY = "#a9561f"
RULE = "#dcd6c8"

_draw_lock = threading.Lock()


def thickness_density(rng: ThicknessRange, n: int = 201) -> tuple[np.ndarray, np.ndarray]:
    """Thickness values (m) across [min, max] and the prior density there, shapes (n,)."""
    x = np.linspace(float(rng.min_m), float(rng.max_m), n)
    pdf = thickness_distribution(rng).pdf(x)
    return x, np.where(np.isfinite(pdf), pdf, 0.0)


def _fmt(value: float) -> str:
    return f"{value:.2f}".rstrip("0").rstrip(".")


@lru_cache(maxsize=256)
def thickness_chart_svg(shape: str, min_m: float, likely_m: float, max_m: float) -> bytes:
    """A small SVG of the thickness density with min/likely/max marked and mean ± std shaded."""
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    rng = ThicknessRange(min_m, likely_m, max_m, shape)
    mean, std = thickness_moments(rng)
    x, pdf = thickness_density(rng)
    top = float(pdf.max()) if pdf.size and math.isfinite(pdf.max()) and pdf.max() > 0 else 1.0
    settings = {
        "svg.fonttype": "none",  # text stays text: small files, page font
        "svg.hashsalt": "probewise",  # stable ids: the same chart gives the same bytes
        "font.size": 9,
        "font.family": "sans-serif",
        "axes.edgecolor": RULE,
        "axes.labelcolor": INK_SOFT,
        "xtick.color": INK_SOFT,
        "xtick.labelcolor": INK_SOFT,
    }
    # Ticks at min, likely and max (coincident ones share a label).
    ticks: list[tuple[float, str]] = []
    for value, name in ((min_m, "min"), (likely_m, "likely"), (max_m, "max")):
        if ticks and abs(ticks[-1][0] - value) < 1e-9:
            ticks[-1] = (value, f"{ticks[-1][1].split(chr(10))[0]} = {name}\n{_fmt(value)}")
        else:
            ticks.append((value, f"{name}\n{_fmt(value)}"))
    with _draw_lock, rc_context(settings):
        fig = Figure(figsize=(3.4, 1.55), dpi=72)
        ax = fig.add_axes((0.06, 0.36, 0.88, 0.6))
        span = max_m - min_m
        ax.axvspan(mean - std, mean + std, color=CLAY, alpha=0.13, lw=0)
        ax.fill_between(x, pdf, color=TEAL_SOFT, lw=0)
        ax.plot(x, pdf, color=TEAL, lw=1.6)
        ax.axvline(mean, color=CLAY, lw=1.3)
        ax.text(
            mean + 0.02 * span,
            top * 1.06,
            "mean \u00b1 std",
            ha="left",
            va="top",
            fontsize=8,
            color=CLAY,
        )
        ax.set_xticks([t[0] for t in ticks], [t[1] for t in ticks])
        ax.set_xlim(min_m - 0.06 * span, max_m + 0.06 * span)
        ax.set_ylim(0, top * 1.08)
        ax.set_yticks([])
        ax.tick_params(axis="x", length=3, pad=2, labelsize=9)
        for side in ("top", "right", "left"):
            ax.spines[side].set_visible(False)
        fig.patch.set_alpha(0.0)
        ax.patch.set_alpha(0.0)
        buffer = io.BytesIO()
        fig.savefig(buffer, format="svg", metadata={"Date": None, "Creator": "probewise"})
    return styles_as_attributes(buffer.getvalue().decode("utf-8")).encode("utf-8")


_STYLE_ATTR = re.compile(r'\sstyle="([^"]*)"')
_STYLE_ELEMENT = re.compile(r"<style[^>]*>\*\{([^}]*)\}</style>\s*")


def styles_as_attributes(svg: str) -> str:
    """matplotlib's inline CSS as SVG presentation attributes, which a strict
    Content-Security-Policy (no inline styles) allows when the image is opened on its own."""

    def attributes(declarations: str) -> str:
        out = []
        for declaration in declarations.split(";"):
            name, _, value = declaration.partition(":")
            if name.strip() and value.strip():
                out.append(f' {name.strip()}="{value.strip()}"')
        return "".join(out)

    defaults = ""
    match = _STYLE_ELEMENT.search(svg)
    if match:  # "*{stroke-linejoin: round; ...}": inherited from the root group instead
        defaults = attributes(match.group(1))
        svg = svg[: match.start()] + svg[match.end() :]
    svg = _STYLE_ATTR.sub(lambda m: attributes(m.group(1)), svg)
    return svg.replace('<g id="figure_1">', f'<g id="figure_1"{defaults}>', 1)


class ChartCache:
    """Chart bytes by (project id, revision, unit index): revisions never change, so an entry
    never goes stale; the oldest entries leave first."""

    def __init__(self, size: int = 512):
        self.size = size
        self._items: OrderedDict[tuple, bytes] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, key: tuple) -> bytes | None:
        with self._lock:
            value = self._items.get(key)
            if value is not None:
                self._items.move_to_end(key)
            return value

    def put(self, key: tuple, value: bytes) -> None:
        with self._lock:
            self._items[key] = value
            self._items.move_to_end(key)
            while len(self._items) > self.size:
                self._items.popitem(last=False)


thickness_charts = ChartCache()
