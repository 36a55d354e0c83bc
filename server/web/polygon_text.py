"""Polygons as editable text: one "x, y" position a line, a blank line before a hole, "---"
between the parts of a multi-part outline."""

from __future__ import annotations

import re

from probewise.errors import InputError
from probewise.numbers import read_number

MAX_TEXT_POSITIONS = 20_000
MULTI_SEPARATOR = "---"


def _position_text(position: list[float]) -> str:
    def exact(value: float) -> str:
        text = repr(float(value))
        return text[:-2] if text.endswith(".0") else text

    return f"{exact(position[0])}, {exact(position[1])}"


def polygon_text(geometry: dict | None) -> str:
    """A GeoJSON Polygon/MultiPolygon as editable lines (closing positions left out)."""
    if not geometry:
        return ""
    kind = geometry.get("type")
    polygons = (
        [geometry.get("coordinates") or []]
        if kind == "Polygon"
        else geometry.get("coordinates") or []
    )
    blocks = []
    for rings in polygons:
        ring_texts = []
        for ring in rings:
            points = ring[:-1] if len(ring) > 1 and ring[0] == ring[-1] else ring
            ring_texts.append("\n".join(_position_text(p) for p in points))
        blocks.append("\n\n".join(ring_texts))
    return f"\n{MULTI_SEPARATOR}\n".join(blocks)


def parse_polygon_text(text: str, path: str, *, allow_multi: bool = False) -> dict:
    """Lines of "x, y" -> a GeoJSON Polygon (or MultiPolygon); InputError names the line."""
    polygons: list[list[list[list[float]]]] = [[[]]]
    count = 0
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if line == MULTI_SEPARATOR:
            if not allow_multi:
                raise InputError(path, f"line {number}: only the site outline may have parts")
            polygons.append([[]])
            continue
        if not line:
            if polygons[-1][-1]:
                polygons[-1].append([])  # a blank line after a ring: a hole follows
            continue
        parts = [p for p in re.split(r"[,;\t ]+", line) if p]
        if len(parts) != 2:
            raise InputError(path, f"line {number}: '{line[:40]}' is not one 'x, y' pair")
        try:
            values = [read_number(part, path) for part in parts]
        except InputError as exc:
            raise InputError(path, f"line {number}: {exc.problem}") from None
        count += 1
        if count > MAX_TEXT_POSITIONS:
            raise InputError(path, f"has more than {MAX_TEXT_POSITIONS} positions")
        polygons[-1][-1].append(values)
    out = []
    for rings in polygons:
        rings = [r for r in rings if r]
        if not rings:
            continue
        closed = []
        for r, ring in enumerate(rings):
            if len(ring) > 1 and ring[0] == ring[-1]:
                ring = ring[:-1]
            what = "the outline" if r == 0 else f"hole {r}"
            if len({tuple(p) for p in ring}) < 3:
                raise InputError(path, f"{what} needs at least 3 different points")
            closed.append([*ring, ring[0]])
        out.append(closed)
    if not out:
        raise InputError(path, "is empty: give at least 3 'x, y' lines")
    if len(out) == 1:
        return {"type": "Polygon", "coordinates": out[0]}
    return {"type": "MultiPolygon", "coordinates": out}
