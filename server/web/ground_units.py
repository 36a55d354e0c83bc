"""Units in a model document as the Ground model page needs them: a thickness range's mean and
standard deviation, renaming a unit everywhere it is named, and what refers to a unit."""

from __future__ import annotations

from typing import Any

from probewise.core.model import ThicknessRange
from probewise.core.priors import DEFAULT_SHAPE, presence_moments, thickness_moments
from probewise.web.summary import depth_limits


def moments_of(thickness: Any) -> tuple[float, float] | None:
    """(mean, std) of a thickness range dict, None when it is not a sound range."""
    try:
        rng = ThicknessRange(
            float(thickness["min"]),
            float(thickness["likely"]),
            float(thickness["max"]),
            str(thickness.get("shape", DEFAULT_SHAPE)),
        )
        if not rng.min_m <= rng.likely_m <= rng.max_m or rng.min_m >= rng.max_m:
            return None
        return thickness_moments(rng)
    except (TypeError, ValueError, KeyError):
        return None


def site_moments(thickness: Any, presence: Any) -> tuple[float, float] | None:
    """(mean, std) over the site of a locally present unit (None when presence is 1 or unset)."""
    moments = moments_of(thickness) if thickness else None
    if moments is None or presence is None:
        return None
    try:
        p = float(presence)
        return presence_moments(*moments, p) if p < 1.0 else None
    except (TypeError, ValueError):
        return None


def safe_depth_limits(model: dict) -> dict[str, tuple[float, float]]:
    try:
        return depth_limits(model)
    except (TypeError, ValueError, KeyError):
        return {}


def rename_unit(model: dict, old: str, new: str) -> None:
    """Rename every reference to unit ``old`` (dict keys keep their order)."""

    def renamed_keys(mapping: dict | None) -> dict | None:
        if not isinstance(mapping, dict) or old not in mapping:
            return mapping
        return {(new if k == old else k): v for k, v in mapping.items()}

    for zone in model.get("zones") or []:
        zone["units"] = renamed_keys(zone.get("units"))
    for key in ("boundaries_of_interest", "bounds", "elements"):
        for item in model.get(key) or []:
            if item.get("base_of") == old:
                item["base_of"] = new
    for method in model.get("methods") or []:
        method["cannot_penetrate"] = [
            new if n == old else n for n in method.get("cannot_penetrate") or []
        ]
        method["precision_m"] = renamed_keys(method.get("precision_m"))
    for probe in model.get("existing") or []:
        probe["observed"] = renamed_keys(probe.get("observed"))
        if "precision_m" in probe:
            probe["precision_m"] = renamed_keys(probe.get("precision_m"))


def unit_references(model: dict, name: str) -> list[str]:
    """What refers to unit ``name``, in words ("method CP (precision)")."""
    refs = []
    for zone in model.get("zones") or []:
        if name in (zone.get("units") or {}):
            refs.append(f"zone \u201c{zone['name']}\u201d (thickness override)")
    if any(b.get("base_of") == name for b in model.get("boundaries_of_interest") or []):
        refs.append("the boundaries of interest")
    count = sum(1 for b in model.get("bounds") or [] if b.get("base_of") == name)
    if count:
        refs.append(f"{count} hard bound{'s' if count > 1 else ''}")
    count = sum(1 for e in model.get("elements") or [] if e.get("base_of") == name)
    if count:
        refs.append(f"{count} design element{'s' if count > 1 else ''}")
    for method in model.get("methods") or []:
        uses = []
        if name in (method.get("precision_m") or {}):
            uses.append("precision")
        if name in (method.get("cannot_penetrate") or []):
            uses.append("cannot penetrate")
        if uses:
            refs.append(f"method {method['id']} ({', '.join(uses)})")
    probes = [
        p["id"]
        for p in model.get("existing") or []
        if name in (p.get("observed") or {}) or name in (p.get("precision_m") or {})
    ]
    if probes:
        shown = ", ".join(probes[:6]) + (", ..." if len(probes) > 6 else "")
        refs.append(f"{len(probes)} existing probe{'s' if len(probes) > 1 else ''} ({shown})")
    return refs
