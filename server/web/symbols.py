"""The probe symbols of every map: one shape per method kind with the method's short code in
it, drawn the same on screen (SVG site plan, Leaflet maps) and in print (matplotlib plan).

Our own scheme: a planned probe is a solid shape in its kind's colour with the code in white;
an existing probe is the same shape hollow (white, outlined and lettered in the kind's colour).
Shapes: borehole a rounded capsule, CPT a cone pointing down, DMT a blade (long hexagon),
trial pit a rectangle, anything else a clipped-corner tag. Outlines are given once, as
vertices in symbol units (x right, y down, within |x| <= 1.45, |y| <= 1.1); SVG paths,
Leaflet icons and matplotlib markers are all made from them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from markupsafe import Markup, escape

PX_PER_UNIT = 8.0  # SVG pixels per symbol unit: a symbol is about 23 x 17 px on screen
CODE_CHARS = 4  # at most this many characters of the method's code fit in a symbol
WHITE = "#ffffff"


def _capsule(n: int = 10) -> tuple[tuple[float, float], ...]:
    """A stadium: two half circles of radius 1 joined by straight sides, 2.8 wide."""
    points = []
    for i in range(n + 1):  # right end, top to bottom
        a = -math.pi / 2 + math.pi * i / n
        points.append((0.4 + math.cos(a), math.sin(a)))
    for i in range(n + 1):  # left end, bottom to top
        a = math.pi / 2 + math.pi * i / n
        points.append((-0.4 + math.cos(a), math.sin(a)))
    return tuple((round(x, 3), round(y, 3)) for x, y in points)


@dataclass(frozen=True)
class Symbol:
    kind: str
    label: str  # the kind in words, for legends
    outline: tuple[tuple[float, float], ...]
    colour: str
    text_y: float  # where the code's centre sits (symbol units, y down)

    def svg_path(self, scale: float = PX_PER_UNIT) -> str:
        points = " L".join(f"{x * scale:.2f} {y * scale:.2f}" for x, y in self.outline)
        return f"M{points} Z"


SYMBOLS: dict[str, Symbol] = {
    "borehole": Symbol("borehole", "Borehole", _capsule(), "#22303a", 0.0),
    "cpt": Symbol(
        "cpt",
        "CPT",
        ((-1.45, -1.0), (1.45, -1.0), (1.45, 0.25), (0.0, 1.1), (-1.45, 0.25)),
        "#1f6f78",
        -0.2,
    ),
    "dmt": Symbol(
        "dmt",
        "DMT",
        ((-1.45, 0.0), (-0.95, -1.0), (0.95, -1.0), (1.45, 0.0), (0.95, 1.0), (-0.95, 1.0)),
        "#4f6f2a",
        0.0,
    ),
    "trial_pit": Symbol(
        "trial_pit",
        "Trial pit",
        ((-1.35, -0.95), (1.35, -0.95), (1.35, 0.95), (-1.35, 0.95)),
        "#9a4a17",
        0.0,
    ),
    "other": Symbol(
        "other",
        "Other",
        (
            (-1.0, -1.0),
            (1.0, -1.0),
            (1.4, -0.6),
            (1.4, 0.6),
            (1.0, 1.0),
            (-1.0, 1.0),
            (-1.4, 0.6),
            (-1.4, -0.6),
        ),
        "#6a4a7a",
        0.0,
    ),
}


def symbol_of(kind: str) -> Symbol:
    return SYMBOLS.get(kind, SYMBOLS["other"])


def short_code(code: str) -> str:
    """The method code as it fits in a symbol (the full code is in the legend)."""
    return code[:CODE_CHARS]


def code_font_px(code: str) -> float:
    return 7.5 if len(short_code(code)) <= 2 else 6.5 if len(short_code(code)) == 3 else 5.6


def symbol_colours(kind: str, existing: bool) -> tuple[str, str, str]:
    """(fill, outline, text) of a symbol."""
    colour = symbol_of(kind).colour
    return (WHITE, colour, colour) if existing else (colour, "#111a20", WHITE)


def symbol_svg(kind: str, code: str, existing: bool = False) -> Markup:
    """The SVG elements of one symbol drawn at the origin (place it with a transform)."""
    sym = symbol_of(kind)
    fill, edge, ink = symbol_colours(kind, existing)
    text = short_code(code)
    return Markup(
        f'<path class="probe-shape" d="{sym.svg_path()}" fill="{fill}" stroke="{edge}" '
        f'stroke-width="{1.6 if existing else 1}"/>'
        f'<text class="probe-code" x="0" y="{sym.text_y * PX_PER_UNIT:.2f}" '
        f'text-anchor="middle" dominant-baseline="central" fill="{ink}" '
        f'font-size="{code_font_px(text)}">{escape(text)}</text>'
    )


def symbols_json() -> dict[str, dict[str, object]]:
    """What static/js/sitemap.js needs to draw the same symbols as the server."""
    return {
        kind: {
            "label": sym.label,
            "path": sym.svg_path(),
            "colour": sym.colour,
            "text_y": round(sym.text_y * PX_PER_UNIT, 2),
        }
        for kind, sym in SYMBOLS.items()
    }


def methods_drawn(model: dict, method_ids: set[str] | list[str]) -> list[dict[str, str]]:
    """The methods of ``method_ids`` in catalogue order, as legends list them (id, name, kind);
    an id the catalogue lacks is listed as kind "other"."""
    wanted = set(method_ids)
    out = [
        {"id": m["id"], "name": m.get("name", ""), "kind": m.get("kind", "other")}
        for m in model.get("methods") or []
        if m["id"] in wanted
    ]
    known = {m["id"] for m in out}
    out.extend({"id": i, "name": "", "kind": "other"} for i in sorted(wanted - known))
    return out
