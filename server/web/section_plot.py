"""The depth section figure: P5/P50/P95 of every boundary along a line, before and after."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from matplotlib.figure import Figure

from probewise.web.plot_style import (
    BOUNDARY_COLOURS,
    EXISTING_FACE,
    INK,
    INK_SOFT,
    KIND_STYLE,
    RULE,
    draw_lock,
    to_bytes,
)


@dataclass(frozen=True)
class SectionBand:
    """P5/P50/P95 (m) of one boundary at the section's sample points, ``(n,)`` each."""

    name: str
    p05_m: np.ndarray
    p50_m: np.ndarray
    p95_m: np.ndarray
    # hard bounds from the site history (the maximum and minimum potential levels as depths),
    # ``nan`` where no history rule bounds the boundary; None when none does anywhere
    history_min_m: np.ndarray | None = None
    history_max_m: np.ndarray | None = None


@dataclass(frozen=True)
class SectionProbe:
    id: str
    distance_m: float
    depth_m: float
    kind: str
    existing: bool


def depth_section(
    distance_m: np.ndarray,
    panels: Sequence[tuple[str, Sequence[SectionBand], Sequence[SectionProbe]]],
    *,
    title: str,
    width_in: float = 9.0,
) -> bytes:
    """P5-P95 bands and P50 lines of every boundary along a line, one panel per state: PNG.

    Depth is positive down (the axis is inverted); every panel has the same depth axis.
    """
    deepest = 0.0
    for _, bands, probes in panels:
        for band in bands:
            deepest = max(deepest, float(np.nanmax(band.p95_m)))
        for probe in probes:
            deepest = max(deepest, probe.depth_m)
    deepest = deepest * 1.05 + 0.5
    with draw_lock:
        fig = Figure(figsize=(width_in, 2.6 * len(panels) + 0.9), layout="constrained")
        axes = fig.subplots(len(panels), 1, squeeze=False, sharex=True)[:, 0]
        for ax, (panel_title, bands, probes) in zip(axes, panels, strict=True):
            ax.grid(True, color=RULE, linewidth=0.5)
            ax.set_axisbelow(True)
            _draw_bands(ax, distance_m, bands)
            _draw_probes(ax, probes, float(distance_m[-1] - distance_m[0]) or 1.0)
            ax.set_ylim(deepest, 0)
            ax.set_xlim(float(distance_m[0]), float(distance_m[-1]))
            ax.set_ylabel("Depth below ground (m)")
            ax.set_title(panel_title, fontsize=9, loc="left", pad=14)
        axes[-1].set_xlabel("Distance along the section (m)")
        handles, labels = axes[0].get_legend_handles_labels()
        fig.legend(handles, labels, loc="outside lower center", ncols=2, fontsize=7, frameon=False)
        fig.suptitle(title, fontsize=10, fontweight="bold")
        return to_bytes(fig, "png", dpi=130)


def _draw_bands(ax, distance_m: np.ndarray, bands: Sequence[SectionBand]) -> None:
    """Each boundary's P5-P95 band and P50 line, one colour per boundary."""
    for n, band in enumerate(bands):
        colour = BOUNDARY_COLOURS[n % len(BOUNDARY_COLOURS)]
        ax.fill_between(
            distance_m,
            band.p05_m,
            band.p95_m,
            color=colour,
            alpha=0.28,
            linewidth=0,
            label=f"Base of {band.name}: P5\u2013P95",
        )
        ax.plot(
            distance_m,
            band.p50_m,
            color=colour,
            linewidth=1.3,
            label=f"Base of {band.name}: P50",
        )
        if band.history_min_m is not None:
            for edge, which in ((band.history_min_m, "highest"), (band.history_max_m, "lowest")):
                ax.plot(
                    distance_m,
                    edge,
                    color=colour,
                    linewidth=1.0,
                    linestyle=(0, (4, 2)) if which == "highest" else (0, (1, 1.5)),
                    label=f"Base of {band.name}: {which} potential level (history)",
                )


def _draw_probes(ax, probes: Sequence[SectionProbe], span: float) -> None:
    """Probes as lines down to their depth, symbols at the ground, ids where they can be read
    (``span``: the section's length, m)."""
    last_label = -np.inf
    for probe in sorted(probes, key=lambda p: p.distance_m):
        marker, face = KIND_STYLE.get(probe.kind, KIND_STYLE["other"])
        ax.plot(
            [probe.distance_m, probe.distance_m],
            [0, probe.depth_m],
            color=INK_SOFT if probe.existing else INK,
            linewidth=1.6 if not probe.existing else 1.0,
            linestyle=":" if probe.existing else "-",
            zorder=5,
        )
        ax.scatter(
            [probe.distance_m],
            [0],
            marker=marker,
            facecolors=EXISTING_FACE if probe.existing else face,
            edgecolors=INK,
            s=26,
            zorder=6,
            clip_on=False,
        )
        if probe.distance_m - last_label < 0.035 * span:
            continue  # too close to the last label to read; the symbol stays
        last_label = probe.distance_m
        ax.annotate(
            probe.id,
            (probe.distance_m, 0),
            xytext=(0, 5),
            textcoords="offset points",
            ha="center",
            fontsize=6.5,
            color=INK_SOFT if probe.existing else INK,
            annotation_clip=False,
        )
