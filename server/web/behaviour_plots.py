"""Figures of the behaviour check (matplotlib, object API; SVG).

- ``domain_strips``: per parameter, the readings of fill, band and natural ground side by side
  (every reading a dot, a box from the quartiles, whiskers to the furthest reading within 1.5
  IQR, the median a bar), the counts under each column and the verdict above;
- ``probe_profile``: one probe's results against depth, the band between the maximum and
  minimum potential levels shaded.

Inputs are plain numbers, so the figures do not depend on how they were computed.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from matplotlib.figure import Figure

from probewise.web.plot_style import INK, INK_SOFT, RULE, draw_lock, to_bytes

# our own colours for the three domains: warm for fill, ochre for the band, teal for natural
DOMAIN_COLOURS = ("#a9561f", "#b8962e", "#2b7a80")
DOMAIN_LABELS = ("Fill", "Band", "Natural")
BAND_SHADE = "#f1e6c4"
LOG_SPAN = 30.0  # a positive parameter spanning more than this ratio is drawn on a log axis


@dataclass(frozen=True)
class StripPanel:
    """One parameter: its label and unit, the values of each domain and the verdict."""

    label: str
    unit: str
    values: tuple[np.ndarray, np.ndarray, np.ndarray]
    verdict: str


def _log_axis(values: Sequence[np.ndarray]) -> bool:
    joined = np.concatenate([v for v in values if len(v)] or [np.zeros(0)])
    if len(joined) < 2 or joined.min() <= 0:
        return False
    return joined.max() / joined.min() > LOG_SPAN


def _draw_panel(ax, panel: StripPanel, rng: np.random.Generator) -> None:
    log = _log_axis(panel.values)
    for d, values in enumerate(panel.values):
        colour = DOMAIN_COLOURS[d]
        if len(values) >= 3:
            ax.boxplot(
                values,
                positions=[d],
                widths=0.5,
                whis=1.5,
                showfliers=False,
                patch_artist=True,
                boxprops={"facecolor": "white", "edgecolor": colour, "linewidth": 1.0},
                medianprops={"color": colour, "linewidth": 2.0},
                whiskerprops={"color": colour},
                capprops={"color": colour},
            )
        elif len(values):
            ax.plot([d - 0.22, d + 0.22], [np.median(values)] * 2, color=colour, lw=2.0)
        jitter = rng.uniform(-0.16, 0.16, size=len(values))
        ax.scatter(d + jitter, values, s=9, color=colour, alpha=0.75, linewidths=0, zorder=3)
    ax.set_xticks(range(3))
    ax.set_xticklabels(
        [f"{name}\nn={len(v)}" for name, v in zip(DOMAIN_LABELS, panel.values, strict=True)],
        fontsize=8,
    )
    ax.set_xlim(-0.6, 2.6)
    if log:
        ax.set_yscale("log")
    unit = "" if panel.unit == "-" else f" ({panel.unit})"
    ax.set_ylabel(f"{panel.label}{unit}", fontsize=8, color=INK)
    ax.set_title(panel.verdict, fontsize=8.5, color=INK_SOFT)
    ax.grid(axis="y", color=RULE, linewidth=0.6)
    ax.set_axisbelow(True)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)


def domain_strips(panels: Sequence[StripPanel], columns: int = 3, seed: int = 0) -> bytes:
    """Small multiples of ``panels`` (SVG bytes); the jitter of the dots is seeded."""
    n = max(1, len(panels))
    cols = min(columns, n)
    rows = -(-n // cols)
    rng = np.random.default_rng(seed)
    with draw_lock:
        fig = Figure(figsize=(3.3 * cols, 2.9 * rows))
        for i, panel in enumerate(panels):
            _draw_panel(fig.add_subplot(rows, cols, i + 1), panel, rng)
        if not panels:
            ax = fig.add_subplot(1, 1, 1)
            ax.text(0.5, 0.5, "No test results to compare", ha="center", va="center")
            ax.set_axis_off()
        fig.tight_layout()
        return to_bytes(fig, "svg")


@dataclass(frozen=True)
class ProfileSeries:
    label: str
    unit: str
    depth_m: np.ndarray
    value: np.ndarray


def probe_profile(
    title: str,
    series: Sequence[ProfileSeries],
    band_m: tuple[float, float] | None,
    observed_m: float | None,
) -> bytes:
    """One probe's parameters against depth (SVG bytes), side by side, sharing the depth axis;
    ``band_m`` (least, greatest depth of the fill base) shaded, ``observed_m`` a dashed line."""
    n = max(1, len(series))
    with draw_lock:
        fig = Figure(figsize=(1.9 * n + 0.6, 3.6))
        first = None
        for i, s in enumerate(series):
            ax = fig.add_subplot(1, n, i + 1, sharey=first)
            first = first or ax
            if band_m is not None:
                ax.axhspan(band_m[0], band_m[1], color=BAND_SHADE, zorder=0, lw=0)
            if observed_m is not None:
                ax.axhline(observed_m, color=INK_SOFT, lw=0.9, ls="--")
            order = np.argsort(s.depth_m)
            ax.plot(s.value[order], s.depth_m[order], color=DOMAIN_COLOURS[2], lw=0.9)
            ax.scatter(s.value, s.depth_m, s=8, color=INK, zorder=3, linewidths=0)
            if _log_axis([s.value]):
                ax.set_xscale("log")
            unit = "" if s.unit == "-" else f" ({s.unit})"
            ax.set_xlabel(f"{s.label}{unit}", fontsize=8)
            ax.xaxis.set_label_position("top")
            ax.xaxis.tick_top()
            ax.tick_params(labelsize=7)
            ax.grid(color=RULE, linewidth=0.5)
            if i:
                ax.tick_params(labelleft=False)
        if first is not None:
            first.set_ylabel("Depth (m below ground)", fontsize=8)
            if not first.yaxis_inverted():
                first.invert_yaxis()
        fig.suptitle(title, fontsize=9, color=INK, y=0.02, va="bottom")
        fig.tight_layout(rect=(0, 0.06, 1, 1))
        return to_bytes(fig, "svg")
