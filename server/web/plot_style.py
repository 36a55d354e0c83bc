"""What every figure shares: matplotlib settings, the palette, probe symbols, the drawing
lock (matplotlib's font and text caches are shared between threads) and the byte output."""

from __future__ import annotations

import io
import threading

import matplotlib
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.path import Path as MplPath

from probewise.web.symbols import SYMBOLS, symbol_of

matplotlib.rcParams.update(
    {
        "svg.fonttype": "none",  # text stays text: searchable and sharp when printed
        "svg.hashsalt": "probewise",  # stable ids: the same figure gives the same bytes
        "font.size": 9,
        "axes.titlesize": 10,
        "axes.labelsize": 9,
        "font.family": "DejaVu Sans",
    }
)

draw_lock = threading.Lock()

INK = "#22303a"
INK_SOFT = "#55636d"
RULE = "#dcd6c8"
SITE_FILL = "#efe8d8"
SITE_EDGE = "#6b5a43"
AREA_EDGE = "#a9561f"
ZONE_EDGE = "#2b7a80"
EXCLUSION_EDGE = "#a33526"
PARETO = "#a9561f"
CURVE = "#2b7a80"
CHOSEN = "#1f6fd1"
MAP_CMAP = "YlOrBr"  # light = well known, dark = uncertain; prints in grey too


def symbol_marker(kind: str) -> MplPath:
    """A kind's probe symbol outline as a matplotlib marker (y up; scaled by ``s``)."""
    outline = np.array(symbol_of(kind).outline, dtype=float) * np.array([1.0, -1.0])
    return MplPath(np.vstack([outline, outline[:1]]), closed=True)


# kind: (marker, face colour): the shapes and colours of the screen maps (symbols.py)
KIND_STYLE = {kind: (symbol_marker(kind), sym.colour) for kind, sym in SYMBOLS.items()}
EXISTING_FACE = "#ffffff"  # existing probes are hollow, as on the screen maps
BOUNDARY_COLOURS = ("#a9561f", "#2b7a80", "#4f7a3a", "#7a4f9a", "#a33526", "#3a5f9a", "#8a7a2a")


def to_bytes(fig: Figure, fmt: str, dpi: int = 150) -> bytes:
    FigureCanvasAgg(fig)
    buffer = io.BytesIO()
    metadata = {"Software": None} if fmt == "png" else {"Date": None, "Creator": None}
    fig.savefig(
        buffer, format=fmt, dpi=dpi, metadata=metadata, bbox_inches="tight", pad_inches=0.06
    )
    return buffer.getvalue()
