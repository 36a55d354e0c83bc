"""Shared pieces of the probe readers: results, number parsing, the layer rules.

The layer rules (``observed_from_layers``) turn one probe's layers into observed unit bases;
every reader (tables in server/io/probes_table.py, AGS files in server/io/probes_ags.py) uses
them, so absent units, the end of a probe and the order checks behave the same everywhere.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any

from probewise.errors import InputError, OptionNeededError

# Depths closer than this (m) count as equal: a layer ending at the final depth, order checks.
DEPTH_TOL_M = 1e-6
MAX_TABLE_BYTES = 20 * 1024 * 1024

WIDE_COLUMNS = ("id", "method", "x", "y", "final_depth_m")
LONG_COLUMNS = WIDE_COLUMNS + ("unit", "top_m", "base_m")
IGNORE_CODES = ("", "-")  # mapping values that leave a geology code out


# ---------------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True)
class ProbePreview:
    """What a table import would do, for the user to check before importing."""

    format: str  # "wide" or "long"
    columns: dict[str, str]  # heading -> what is read from it ("ignored" when nothing)
    rows: int  # data rows read
    probes: list[dict]  # the probes that parsed, as model-file "existing" entries
    problems: list[str]  # "field: problem", one per bad row or cell
    outside_site: list[str]  # ids of probes outside the site outline (listed, not importable)
    notes: list[str] = field(default_factory=list)
    errors: list[InputError] = field(default_factory=list, repr=False)

    @property
    def importable(self) -> list[dict]:
        """The parsed probes inside the site (the model file admits no others)."""
        return _inside(self.probes, self.outside_site)


@dataclass(frozen=True)
class Ags4Layer:
    top_m: float
    base_m: float
    code: str  # the mapping key: GEOL_GEOL, else GEOL_LEG, else GEOL_DESC
    legend: str
    geology: str
    description: str
    where: str  # "GEOL row 3 (line 27)"


@dataclass(frozen=True)
class Ags4Hole:
    id: str
    type: str
    x: float | None
    y: float | None
    final_depth_m: float | None
    layers: tuple[Ags4Layer, ...]
    where: str  # "LOCA row 2 (line 14)"
    ground_level_m: float | None = None  # LOCA_GL (AGS4), HOLE_GL (AGS3)


@dataclass(frozen=True)
class Ags4Holes:
    filename: str
    holes: tuple[Ags4Hole, ...]
    problems: tuple[str, ...] = ()  # e.g. GEOL rows naming a location missing from LOCA
    format: str = "AGS4"  # or "AGS3"

    @property
    def hole_group(self) -> str:
        """The group of the locations: LOCA in AGS4, HOLE in AGS3."""
        return "HOLE" if self.format == "AGS3" else "LOCA"


@dataclass(frozen=True)
class ImportResult:
    probes: list[dict]
    outside_site: list[str]
    problems: list[str]  # holes left out, with the reason
    notes: list[str] = field(default_factory=list)
    rule_hits: list = field(default_factory=list)  # probes_mapping.RuleHits, per text rule
    layers_by_code: int = 0  # layers placed by the code mapping

    @property
    def importable(self) -> list[dict]:
        """The probes inside the site (the model file admits no others)."""
        return _inside(self.probes, self.outside_site)


def _inside(probes: list[dict], outside: list[str]) -> list[dict]:
    left_out = set(outside)
    return [p for p in probes if p["id"] not in left_out]


# ---------------------------------------------------------------------------------------------
# Shared helpers


def _unit_lookup(model: dict) -> tuple[list[str], dict[str, str]]:
    names = [u["name"] for u in model.get("units", [])]
    return names, {n.lower(): n for n in names}


def _method_lookup(model: dict) -> dict[str, str]:
    return {m["id"].lower(): m["id"] for m in model.get("methods", [])}


def _number(text: Any, where: str, decimal_comma: bool = False) -> float | None:
    """A finite float, None for an empty cell, InputError for text."""
    if text is None:
        return None
    if isinstance(text, int | float) and not isinstance(text, bool):
        value = float(text)
    else:
        s = str(text).strip()
        if s == "":
            return None
        if decimal_comma and re.fullmatch(r"[-+]?\d+,\d+", s):
            s = s.replace(",", ".")
        try:
            value = float(s)
        except ValueError:
            raise InputError(where, f"'{s}' is not a number") from None
    if not math.isfinite(value):
        raise InputError(where, f"'{text}' is not a finite number")
    return value


def _site_shape(model: dict) -> Any:
    from shapely.geometry import shape

    return shape(model["site"]) if model.get("site") else None


def probes_outside_site(model: dict, probes: list[dict]) -> list[str]:
    """Ids of probes whose location is not inside (or on the edge of) the site outline."""
    from shapely.geometry import Point

    site = _site_shape(model)
    if site is None:
        return []
    return [p["id"] for p in probes if not site.covers(Point(p["x"], p["y"]))]


def observed_from_layers(
    layers: list[tuple[float | None, float, int | None, str]],
    final_depth_m: float,
    units: list[str],
    who: str,
) -> tuple[dict[str, float], list[InputError], list[str]]:
    """Observed unit bases of one probe from its layers.

    ``layers``: (top_m or None, base_m, unit index or None for "left out", where). The base of
    the deepest layer mapped to a unit is that unit's observed base, unless the layer reaches
    the final depth (the probe ended inside the unit). A unit the probe passed without meeting
    it (a deeper unit was met) is absent there: its base is recorded at the base of the unit
    above (ground level, 0 m, for the first unit), so equal depths record the absence, as the
    model file says. ``who`` names the probe in messages. Returns (observed, problems, notes).
    """
    problems: list[InputError] = []
    notes: list[str] = []
    ordered = sorted(layers, key=lambda t: (t[0] if t[0] is not None else t[1], t[1]))
    last_base = None
    last_unit = None  # (index, where) of the deepest mapped layer so far
    deepest: dict[int, float] = {}
    first_top: dict[int, float | None] = {}  # shallowest top of each unit met
    logged: list[tuple[float, float]] = []  # (top, base) of every layer with a top
    for top, base, unit, where in ordered:
        if top is not None and base < top - DEPTH_TOL_M:
            problems.append(InputError(where, f"base {base:g} m is above top {top:g} m"))
            continue
        if base > final_depth_m + DEPTH_TOL_M:
            problems.append(
                InputError(where, f"base {base:g} m is below the final depth {final_depth_m:g} m")
            )
            continue
        if top is not None and last_base is not None and top < last_base - DEPTH_TOL_M:
            problems.append(InputError(where, f"top {top:g} m overlaps the layer above"))
        last_base = base
        if top is not None:
            logged.append((top, base))
        if unit is None:
            continue
        first_top.setdefault(unit, top)
        if last_unit is not None and unit < last_unit[0]:
            problems.append(
                InputError(
                    where,
                    f"{units[unit]} lies below {units[last_unit[0]]} ({last_unit[1]}), "
                    "against the unit order of the model",
                )
            )
        last_unit = (unit, where)
        deepest[unit] = base
    met = _Met(deepest, first_top, logged)
    observed = _bases_with_absent(met, final_depth_m, units, who, problems, notes)
    return observed, problems, notes


@dataclass(frozen=True)
class _Met:
    """The units one probe met: deepest base and shallowest top of each, and what was logged."""

    deepest: dict[int, float]
    first_top: dict[int, float | None]
    logged: list[tuple[float, float]]  # (top, base), sorted by top

    def unlogged(self, from_m: float, to_m: float | None) -> tuple[float, float] | None:
        """The first stretch of [from_m, to_m] that no layer covers (None: all logged).

        Layers left out of the mapping count as logged; an unknown ``to_m`` (layers without
        tops) is taken as logged.
        """
        if to_m is None:
            return None
        cursor = from_m
        for top, base in self.logged:
            if cursor >= to_m - DEPTH_TOL_M:
                return None
            if base <= cursor + DEPTH_TOL_M:
                continue
            if top > cursor + DEPTH_TOL_M:
                return cursor, min(top, to_m)
            cursor = base
        return (cursor, to_m) if cursor < to_m - DEPTH_TOL_M else None


def _bases_with_absent(
    met: _Met,
    final_depth_m: float,
    units: list[str],
    who: str,
    problems: list[InputError],
    notes: list[str],
) -> dict[str, float]:
    """Observed bases in unit order from the units met (see observed_from_layers).

    An absent unit is recorded only where the log is continuous from the base of the unit
    above to the top of the next unit met: a stretch with no layer at all may hide the unit.
    """
    observed: dict[str, float] = {}
    deepest = met.deepest
    deepest_met = max(deepest, default=-1)
    above: tuple[str, float] | None = None  # None: ground level
    known = True  # the base of the unit above is known
    for k, name in enumerate(units[:-1]):  # the basal unit has no base
        if k in deepest:
            base = deepest[k]
            if base >= final_depth_m - DEPTH_TOL_M:
                notes.append(f"ended in {name} at {base:g} m, so its base was not reached")
                break
            if above is not None and base < above[1] - DEPTH_TOL_M and not problems:
                problems.append(
                    InputError(
                        f"{who}, base of {name}",
                        f"{base:g} m is above the base of {above[0]} ({above[1]:g} m); "
                        "bases must not rise in unit order",
                    )
                )
            known = True
        elif k < deepest_met:
            if not known:
                continue
            base = above[1] if above is not None else 0.0
            below = min(u for u in deepest if u > k)
            gap = met.unlogged(base, met.first_top.get(below))
            if gap is not None:
                notes.append(
                    f"no layer logged from {gap[0]:g} to {gap[1]:g} m, so {name} is not "
                    "recorded as absent"
                )
                known = False
                continue
            notes.append(absent_note(name, base, above[0] if above is not None else None))
        else:
            break
        observed[name] = base
        above = (name, base)
    return observed


def absent_note(unit: str, base_m: float, unit_above: str | None) -> str:
    """The note that says where an absent unit's base was recorded."""
    where = f"the base of {unit_above}" if unit_above else "ground level"
    return f"no {unit} met: absent, its base recorded at {base_m:g} m ({where})"


# ---------------------------------------------------------------------------------------------
# Cells and messages


def _shown(value: Any) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _ids(model: dict) -> str:
    return ", ".join(m["id"] for m in model.get("methods", [])) or "none"


def _cell(cells: list, i: int | None) -> Any:
    if i is None or i >= len(cells):
        return ""
    return cells[i]


def _text(value: Any) -> str:
    if isinstance(value, float) and value.is_integer():
        return str(int(value))  # a spreadsheet id 12 arrives as 12.0
    return str(value).strip()


def outside_error(filename: str, ids: list[str]) -> InputError:
    """The refusal for probes outside the site, naming them (``leave_outside`` resolves it)."""
    shown = ", ".join(ids[:10]) + (f" and {len(ids) - 10} more" if len(ids) > 10 else "")
    return OptionNeededError(
        filename,
        f"{len(ids)} probe(s) lie outside the site: {shown}; check the coordinates and the CRS, "
        "or leave them out",
        "leave_outside",
    )


def _decode(data: bytes) -> str:
    for encoding in ("utf-8-sig", "cp1252"):
        try:
            return data.decode(encoding)
        except UnicodeDecodeError:
            continue
    return data.decode("latin-1")


def resolve_mapping(mapping: dict[str, str], model: dict) -> dict[str, int | None]:
    """code -> unit index (None = left out); unit names matched case-insensitively."""
    units, by_lower = _unit_lookup(model)
    out: dict[str, int | None] = {}
    for code, unit in mapping.items():
        text = (unit or "").strip()
        if text in IGNORE_CODES:
            out[code] = None
            continue
        name = by_lower.get(text.lower())
        if name is None:
            raise InputError(
                f"mapping {code}", f"'{text}' is not a unit of the model ({', '.join(units)})"
            )
        out[code] = units.index(name)
    return out
