"""What static/js/sitemap.js draws on every map page, in project coordinates."""

from __future__ import annotations

import math
from typing import Any

from probewise.web.site_map import feature_bounds, label_point, polygon_rings
from probewise.web.symbols import methods_drawn, symbols_json


def build_map_data(model: dict, *, include_layouts: bool = True) -> dict[str, Any]:
    """Everything static/js/sitemap.js draws, in project coordinates (metres).

    ``origin``: a round point at the lower left of everything, subtracted on the map to keep
    numbers small. Probes carry their method's kind for the symbol.
    """
    methods = {
        m["id"]: {"name": m.get("name", m["id"]), "kind": m.get("kind", "other")}
        for m in model.get("methods") or []
    }

    def probe(p: dict, depth_key: str) -> dict[str, Any]:
        """A probe on the map, with its method's kind and its depth under ``depth_key``."""
        kind = methods.get(p["method"], {}).get("kind", "other")
        return {
            "id": p["id"],
            "method": p["method"],
            "kind": kind,
            "x": p["x"],
            "y": p["y"],
            depth_key: p.get(depth_key),
        }

    def features(key: str, tag: str) -> list[dict[str, Any]]:
        out = []
        for n, item in enumerate(model.get(key) or [], start=1):
            entry = {"tag": f"{tag}{n}", "name": item.get("name", ""), "geometry": item["geometry"]}
            rings = polygon_rings(item["geometry"])
            if rings:
                entry["label"] = list(label_point(item["geometry"], rings))
            if "weight" in item:
                entry["weight"] = item["weight"]
            out.append(entry)
        return out

    min_x, min_y, max_x, max_y = feature_bounds(model)
    layouts = []
    if include_layouts:
        for layout in model.get("layouts") or []:
            probes = [probe(p, "depth_m") for p in layout.get("probes") or []]
            layouts.append({"name": layout["name"], "probes": probes})
    return {
        "crs": model.get("crs"),
        "origin": [math.floor(min_x), math.floor(min_y)],
        "bounds": [min_x, min_y, max_x, max_y],
        "site": model.get("site"),
        "zones": features("zones", "Z"),
        "areas": features("areas_of_interest", "A"),
        "exclusions": features("exclusions", "X"),
        "existing": [probe(p, "final_depth_m") for p in model.get("existing") or []],
        "layouts": layouts,
        "methods": methods,
        "symbols": symbols_json(),
        "legend": {
            "existing": methods_drawn(model, {p["method"] for p in model.get("existing") or []}),
            "planned": methods_drawn(
                model, {p["method"] for lay in model.get("layouts") or [] for p in lay["probes"]}
            ),
        },
    }


def map_data(model: dict[str, Any]) -> dict[str, Any]:
    """The map without layouts (pages that draw one layout's probes themselves)."""
    return build_map_data(model, include_layouts=False)
