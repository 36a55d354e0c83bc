"""A new site outline that leaves things outside: what lies outside, and the user's choice of
what to do with each kind, applied in the same save.

What the model file allows decides the choices (docs/model-file.md): every probe must lie in
the site, so existing probes outside can only be dropped (moving a probe that was dug would
falsify its record), while planned probes can be moved to the nearest point inside the new
outline or dropped. Zones, areas of interest, exclusions and depth bounds wholly outside may
stay (they then have no effect) or go. A design element must overlap the site, so one wholly
outside is dropped.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import shapely
from shapely.geometry import Point, shape
from shapely.ops import nearest_points

FEATURES = (
    ("zones", "zone"),
    ("areas_of_interest", "area of interest"),
    ("exclusions", "exclusion"),
    ("bounds", "depth bound"),
)
MOVE_INSET_M = 0.5  # a moved probe lands this far inside the outline (not on its edge)

# choice name -> (allowed choices, default)
CHOICES = {
    "existing": (("drop",), "drop"),
    "planned": (("move", "drop"), "move"),
    "features": (("keep", "drop"), "keep"),
    "elements": (("drop",), "drop"),
}


@dataclass
class Outside:
    """What a new outline leaves outside, by kind (names or ids, in model order)."""

    existing: list[str] = field(default_factory=list)
    planned: dict[str, list[str]] = field(default_factory=dict)  # layout name -> probe ids
    features: dict[str, list[str]] = field(default_factory=dict)  # section -> names
    elements: list[str] = field(default_factory=list)

    def __bool__(self) -> bool:
        return bool(self.existing or self.planned or self.features or self.elements)

    def lines(self) -> list[str]:
        """What lies outside, in words, one line per kind."""
        out = []
        if self.existing:
            out.append(f"{len(self.existing)} existing probe(s): {_listed(self.existing)}")
        for name, ids in self.planned.items():
            out.append(f"{len(ids)} planned probe(s) of the layout {name}: {_listed(ids)}")
        for section, what in FEATURES:
            names = self.features.get(section)
            if names:
                out.append(f"{len(names)} {what}(s) wholly outside: {_listed(names)}")
        if self.elements:
            out.append(f"{len(self.elements)} design element(s): {_listed(self.elements)}")
        return out


def _listed(items: list[str], limit: int = 12) -> str:
    shown = ", ".join(items[:limit])
    return shown + (f" and {len(items) - limit} more" if len(items) > limit else "")


def _geometry_of(item: dict) -> Any:
    geometry = item.get("geometry")
    return shape(geometry) if geometry else None


def find_outside(model: dict, site_geometry: dict) -> Outside:
    """What of ``model`` lies outside ``site_geometry`` (a point on the edge is inside);
    nothing for an invalid outline."""
    site = shape(site_geometry)
    found = Outside()
    if not site.is_valid:  # the model check refuses the outline itself, in its own words
        return found
    found.existing = [
        str(p["id"])
        for p in model.get("existing") or []
        if not site.intersects(Point(p["x"], p["y"]))
    ]
    for layout in model.get("layouts") or []:
        ids = [
            str(p["id"])
            for p in layout.get("probes") or []
            if not site.intersects(Point(p["x"], p["y"]))
        ]
        if ids:
            found.planned[layout["name"]] = ids
    for section, _what in FEATURES:
        names = []
        for n, item in enumerate(model.get(section) or [], start=1):
            geometry = _geometry_of(item)
            if geometry is not None and not site.intersects(geometry):
                names.append(str(item.get("name") or item.get("base_of") or f"{section} {n}"))
        if names:
            found.features[section] = names
    found.elements = [
        str(e["name"])
        for e in model.get("elements") or []
        if not shapely.intersection(shape(e["geometry"]), site).area > 0
    ]
    return found


def moved_inside(site: Any, x: float, y: float) -> tuple[float, float]:
    """The nearest point MOVE_INSET_M inside the outline (on the edge if it is too thin)."""
    inner = site.buffer(-MOVE_INSET_M)
    target = inner if not inner.is_empty else site
    point = nearest_points(target, Point(x, y))[0]
    return round(point.x, 2), round(point.y, 2)


def apply_choices(model: dict, site_geometry: dict, choices: dict[str, str]) -> list[str]:
    """Set the new outline and deal with what lies outside it; returns what was done."""
    site = shape(site_geometry)
    model["site"] = site_geometry
    done: list[str] = []
    if not site.is_valid:
        return done

    def inside(p: dict) -> bool:
        return site.intersects(Point(p["x"], p["y"]))

    existing = model.get("existing") or []
    kept = [p for p in existing if inside(p)]
    if len(kept) < len(existing):
        model["existing"] = kept
        done.append(f"dropped {len(existing) - len(kept)} existing probe(s)")
    moved = dropped = 0
    for layout in model.get("layouts") or []:
        probes = []
        for p in layout.get("probes") or []:
            if inside(p):
                probes.append(p)
            elif choices.get("planned") == "move":
                p = {**p}
                p["x"], p["y"] = moved_inside(site, float(p["x"]), float(p["y"]))
                probes.append(p)
                moved += 1
            else:
                dropped += 1
        layout["probes"] = probes
    if moved:
        done.append(f"moved {moved} planned probe(s) inside")
    if dropped:
        done.append(f"dropped {dropped} planned probe(s)")
    if choices.get("features") == "drop":
        for section, what in FEATURES:
            items = model.get(section) or []
            left = [i for i in items if (g := _geometry_of(i)) is None or site.intersects(g)]
            if len(left) < len(items):
                model[section] = left
                done.append(f"dropped {len(items) - len(left)} {what}(s)")
    elements = model.get("elements") or []
    left = [e for e in elements if shapely.intersection(shape(e["geometry"]), site).area > 0]
    if len(left) < len(elements):
        model["elements"] = left
        done.append(f"dropped {len(elements) - len(left)} design element(s)")
    return done


def read_choices(raw: dict[str, str]) -> dict[str, str]:
    """The posted choices, each one of its allowed values (else its default)."""
    out = {}
    for name, (allowed, default) in CHOICES.items():
        value = raw.get(f"outside_{name}", default)
        out[name] = value if value in allowed else default
    return out
