"""The layouts of a model document as the Options page reads them: layouts and probes found
by name (a stale page's name is refused: 409), probe numbering, exclusion and site tests."""

from __future__ import annotations

import re
from typing import Any

import numpy as np
import shapely

from probewise.app.project import layout_position, model_layout
from probewise.io.model_file import to_shapely
from probewise.web.edits import EditRefused


def layout_index(model: dict[str, Any], name: str) -> int:
    i = layout_position(model, name)
    if i is None:
        raise EditRefused("layout", f"there is no layout named {name!r}; reload the page")
    return i


def probe_index(layout: dict[str, Any], probe_id: str, path: str) -> int:
    for j, probe in enumerate(layout.get("probes") or []):
        if str(probe["id"]) == probe_id:
            return j
    raise EditRefused(path, f"layout {layout['name']!r} has no probe {probe_id!r}; reload the page")


def method_kinds(model: dict[str, Any]) -> dict[str, str]:
    return {m["id"]: m.get("kind", "other") for m in model.get("methods") or []}


def next_probe_id(layout: dict[str, Any], method_id: str) -> str:
    """``<method>-NN``: the next number not used by this layout's probes of that prefix."""
    used = {str(p["id"]) for p in layout.get("probes") or []}
    pattern = re.compile(rf"^{re.escape(method_id)}-(\d+)$")
    numbers = [int(m.group(1)) for pid in used if (m := pattern.match(pid))]
    n = max(numbers, default=0) + 1
    while f"{method_id}-{n:02d}" in used:
        n += 1
    return f"{method_id}-{n:02d}"


def exclusion_hits(model: dict[str, Any], x: float, y: float) -> list[str]:
    """Names of the exclusions containing the point (on the edge counts)."""
    return [
        e["name"]
        for e in model.get("exclusions") or []
        if shapely.intersects_xy(to_shapely(e["geometry"]), x, y)
    ]


def inside_site(model: dict[str, Any], x: float, y: float) -> bool:
    return bool(shapely.intersects_xy(to_shapely(model["site"]), x, y))


def layout_warnings(model: dict[str, Any], name: str | None) -> list[str]:
    """Probes of a layout that lie in an exclusion (allowed, but worth a look)."""
    if name is None:
        return []
    exclusions = [(e["name"], to_shapely(e["geometry"])) for e in model.get("exclusions") or []]
    layout = model_layout(model, name)
    if not exclusions or not layout or not layout.get("probes"):
        return []
    xs = np.array([p["x"] for p in layout["probes"]], dtype=float)
    ys = np.array([p["y"] for p in layout["probes"]], dtype=float)
    out = []
    for exclusion, geometry in exclusions:
        for j in np.flatnonzero(shapely.intersects_xy(geometry, xs, ys)):
            out.append(f"{layout['probes'][j]['id']} lies in the exclusion \u201c{exclusion}\u201d")
    return out
