"""Existing probes in from AGS files: AGS4 (parsed by python-ags4) and AGS3 (our own reader).

The location group (LOCA in AGS4, HOLE in AGS3) gives position, type, ground level and final
depth, GEOL the layers. Each layer is placed in a project unit by its geology code
(GEOL_GEOL, else GEOL_LEG, else GEOL_DESC) or by text rules on its description
(server/io/probes_mapping.py); the layer rules of server/io/probes_common.py turn the layers
into observed bases. Rows are counted within their group, with the file's line number beside
them.
"""

from __future__ import annotations

import io
from collections import Counter
from collections.abc import Callable
from typing import Any

from probewise.errors import InputError, OptionNeededError
from probewise.io.probes_ags3 import group_records, looks_like_ags3, parse_ags3
from probewise.io.probes_common import (
    Ags4Hole,
    Ags4Holes,
    Ags4Layer,
    ImportResult,
    _decode,
    _ids,
    _method_lookup,
    _number,
    _unit_lookup,
    observed_from_layers,
    probes_outside_site,
    resolve_mapping,
)
from probewise.io.probes_mapping import TextRule, decide_layers, undecided_error


def read_ags(data: bytes, *, filename: str = "file.ags") -> Ags4Holes:
    """Locations and layers from an AGS4 or an AGS3 file, told apart by their first row."""
    if not data or not data.strip():
        raise InputError(filename, "is empty")
    if looks_like_ags3(_decode(data)):
        return read_ags3(data, filename=filename)
    return read_ags4(data, filename=filename)


def read_ags4(data: bytes, *, filename: str = "file.ags") -> Ags4Holes:
    """Locations (LOCA) and their layers (GEOL) from an AGS4 file, parsed by python-ags4."""
    from python_ags4 import AGS4

    if not data or not data.strip():
        raise InputError(filename, "is empty")
    text = _decode(data)
    try:
        tables, _headings, _lines = AGS4.AGS4_to_dataframe(io.StringIO(text), get_line_numbers=True)
    except AGS4.AGS4Error as exc:
        raise InputError(filename, f"is not a readable AGS4 file: {exc}") from None
    except Exception as exc:  # a DATA row before any HEADING, ragged rows and the like
        raise InputError(filename, f"is not a readable AGS4 file ({type(exc).__name__})") from None
    if not tables:
        why = " (it looks like AGS3: read it as AGS3)" if looks_like_ags3(text) else ""
        raise InputError(filename, f"has no AGS4 GROUP rows; is it an AGS4 file?{why}")
    for group, what in (("LOCA", "locations"), ("GEOL", "geology layers")):
        if group not in tables:
            raise InputError(
                filename, f"has no {group} group ({what}); both LOCA and GEOL are needed"
            )
    return _build_holes(
        filename,
        "AGS4",
        (_ags_rows(tables["LOCA"], "LOCA"), set(tables["LOCA"].columns)),
        (_ags_rows(tables["GEOL"], "GEOL"), set(tables["GEOL"].columns)),
    )


def read_ags3(data: bytes, *, filename: str = "file.ags") -> Ags4Holes:
    """Locations (HOLE) and their layers (GEOL) from an AGS3 file (server/io/probes_ags3.py)."""
    if not data or not data.strip():
        raise InputError(filename, "is empty")
    text = _decode(data)
    if text.lstrip("\ufeff \r\n").startswith('"GROUP"'):
        raise InputError(filename, 'is an AGS4 file ("GROUP" rows), not AGS3; read it as AGS4')
    groups = parse_ags3(text, filename)
    if not groups:
        raise InputError(filename, 'has no AGS3 group rows ("**GROUP"); is it an AGS3 file?')
    for group, what in (("HOLE", "locations"), ("GEOL", "geology layers")):
        if group not in groups:
            raise InputError(
                filename, f"has no {group} group ({what}); both HOLE and GEOL are needed"
            )
    return _build_holes(
        filename,
        "AGS3",
        (group_records(groups["HOLE"]), groups["HOLE"].all_headings),
        (group_records(groups["GEOL"]), groups["GEOL"].all_headings),
    )


Rows = tuple[list[tuple[str, dict[str, str]]], set[str]]  # (where, {heading: text}), headings


def _required(headings: set[str], group: str, filename: str, names: tuple[str, ...]) -> None:
    missing = [h for h in names if h not in headings]
    if missing:
        raise InputError(f"{filename} {group}", f"missing heading(s) {', '.join(missing)}")


def _build_holes(filename: str, fmt: str, hole_rows: Rows, geol_rows: Rows) -> Ags4Holes:
    """Holes with their layers from the rows of the location group and of GEOL."""
    g = "HOLE" if fmt == "AGS3" else "LOCA"  # the location group and the prefix of its headings
    key = f"{g}_ID"
    _required(hole_rows[1], g, filename, (key, f"{g}_NATE", f"{g}_NATN", f"{g}_FDEP"))
    _required(geol_rows[1], "GEOL", filename, (key, "GEOL_TOP", "GEOL_BASE"))
    if not geol_rows[1] & {"GEOL_GEOL", "GEOL_LEG", "GEOL_DESC"}:
        raise InputError(f"{filename} GEOL", "has none of GEOL_GEOL, GEOL_LEG, GEOL_DESC to map")

    holes: dict[str, dict] = {}
    for where, row in hole_rows[0]:
        hid = row[key].strip()
        if not hid:
            raise InputError(f"{filename} {where}, {key}", "empty")
        if hid in holes:
            raise InputError(f"{filename} {where}, {key}", f"'{hid}' repeats {holes[hid]['where']}")

        def num(heading: str, row: dict = row, where: str = where) -> float | None:
            return _number(row.get(heading, ""), f"{filename} {where}, {heading}")

        holes[hid] = {
            "id": hid,
            "type": row.get(f"{g}_TYPE", "").strip(),
            "x": num(f"{g}_NATE"),
            "y": num(f"{g}_NATN"),
            "final_depth_m": num(f"{g}_FDEP"),
            "ground_level_m": num(f"{g}_GL"),
            "layers": [],
            "where": where,
        }
    problems = []
    for where, row in geol_rows[0]:
        hid = row[key].strip()
        top = _number(row["GEOL_TOP"], f"{filename} {where}, GEOL_TOP")
        base = _number(row["GEOL_BASE"], f"{filename} {where}, GEOL_BASE")
        for heading, value in (("GEOL_TOP", top), ("GEOL_BASE", base)):
            if value is None:
                raise InputError(
                    f"{filename} {where}, {heading}", "empty; a layer needs a top and a base"
                )
        geology = row.get("GEOL_GEOL", "").strip()
        legend = row.get("GEOL_LEG", "").strip()
        description = " ".join(row.get("GEOL_DESC", "").split())
        layer = Ags4Layer(
            top_m=top,
            base_m=base,
            code=geology or legend or description or "(blank)",
            legend=legend,
            geology=geology,
            description=description,
            where=where,
        )
        if hid not in holes:
            problems.append(f"{filename} {where}: location '{hid}' is not in {g}; layer left out")
            continue
        holes[hid]["layers"].append(layer)
    return Ags4Holes(
        filename=filename,
        holes=tuple(Ags4Hole(**{**h, "layers": tuple(h["layers"])}) for h in holes.values()),
        problems=tuple(problems),
        format=fmt,
    )


def _ags_rows(frame: Any, group: str) -> list[tuple[str, dict]]:
    """DATA rows of one AGS4 group as (where, {heading: text})."""
    out = []
    n = 0
    for record in frame.to_dict("records"):
        if record.get("HEADING") != "DATA":
            continue
        n += 1
        line = record.get("line_number")
        where = f"{group} row {n}" + (f" (line {line})" if line else "")
        out.append((where, {k: ("" if v is None else str(v)) for k, v in record.items()}))
    return out


def ags4_legends(holes: Ags4Holes) -> list[tuple[str, str, int]]:
    """(code, description, layer count) per geology code, shallowest first, for mapping."""
    tops: dict[str, list[float]] = {}
    descriptions: dict[str, Counter] = {}
    for hole in holes.holes:
        for layer in hole.layers:
            tops.setdefault(layer.code, []).append(layer.top_m)
            descriptions.setdefault(layer.code, Counter())[layer.description] += 1

    def median(v: list[float]) -> float:
        s = sorted(v)
        return s[len(s) // 2]

    codes = sorted(tops, key=lambda c: (median(tops[c]), c))
    return [(c, descriptions[c].most_common(1)[0][0], len(tops[c])) for c in codes]


def ags4_to_existing(
    holes: Ags4Holes,
    model: dict,
    mapping: dict[str, str],
    method_by_type: dict[str, str] | None = None,
    default_method: str | None = None,
    text_rules: list[TextRule] | None = None,
) -> ImportResult:
    """Existing-probe dicts from AGS holes, with layers mapped to project units.

    ``mapping``: geology code -> unit name, or "-"/"" to leave that code out. Layers of a code
    not in ``mapping`` go by the first of ``text_rules`` that matches their description
    (server/io/probes_mapping.py); every layer must be placed one way or the other.
    ``method_by_type``: location type (LOCA_TYPE, HOLE_TYPE) -> method id; a type equal to a
    method id maps to it; otherwise ``default_method``. Holes whose layers break the model's
    rules (order of units, bases below the final depth...) are left out and listed in
    ``problems``; holes outside the site are listed in ``outside_site`` and left out of
    ``importable`` (the model file admits no probe outside the site).
    """
    units, _ = _unit_lookup(model)
    code_to_unit = resolve_mapping(mapping, model)
    decided = decide_layers(holes, code_to_unit, list(text_rules or []), model)
    if decided.undecided:
        raise undecided_error(decided.undecided)
    method_of = _method_chooser(holes, model, method_by_type, default_method)
    probes: list[dict] = []
    problems = list(holes.problems)
    notes: list[str] = []
    name = holes.filename
    for hole in holes.holes:
        final = _final_depth(hole, holes, problems, notes)
        if final is None:
            continue
        layers = [
            (layer.top_m, layer.base_m, decided.unit_of[(hole.id, n)], f"{name} {layer.where}")
            for n, layer in enumerate(hole.layers)
        ]
        observed, layer_problems, hole_notes = observed_from_layers(
            layers, final, units, f"{name} location {hole.id}"
        )
        if layer_problems:
            problems.extend(f"{e}; {hole.id} left out" for e in layer_problems)
            continue
        notes.extend(f"{hole.id}: {n}" for n in hole_notes)
        probe = {
            "id": hole.id,
            "method": method_of(hole),
            "x": hole.x,
            "y": hole.y,
            "final_depth_m": final,
            "observed": observed,
        }
        if hole.ground_level_m is not None:
            probe["ground_level_m"] = hole.ground_level_m
        probes.append(probe)
    return ImportResult(
        probes=probes,
        outside_site=probes_outside_site(model, probes),
        problems=problems,
        notes=notes,
        rule_hits=decided.hits,
        layers_by_code=decided.by_code,
    )


def _method_chooser(
    holes: Ags4Holes,
    model: dict,
    method_by_type: dict[str, str] | None,
    default_method: str | None,
) -> Callable[[Ags4Hole], str | None]:
    """hole -> method id, checked to give every location type a method of the model."""
    methods = _method_lookup(model)
    by_type = {}
    for hole_type, method in (method_by_type or {}).items():
        if method.lower() not in methods:
            raise InputError(
                f"method for {hole_type}",
                f"'{method}' is not a method of the model ({_ids(model)})",
            )
        by_type[hole_type] = methods[method.lower()]
    if default_method is not None:
        if default_method.lower() not in methods:
            raise InputError(
                "default method", f"'{default_method}' is not a method of the model ({_ids(model)})"
            )
        default_method = methods[default_method.lower()]

    def method_of(hole: Ags4Hole) -> str | None:
        if hole.type in by_type:
            return by_type[hole.type]
        return methods.get(hole.type.lower()) or default_method

    untyped = sorted({h.type or "(blank)" for h in holes.holes if method_of(h) is None})
    if untyped:
        raise OptionNeededError(
            "method",
            f"no method for location type(s) {', '.join(untyped)}; choose a method for each "
            "type or a default method",
            "method_by_type",
        )
    return method_of


def _final_depth(
    hole: Ags4Hole, holes: Ags4Holes, problems: list[str], notes: list[str]
) -> float | None:
    """The hole's final depth (the deepest layer base when none is given); None: left out."""
    name, g = holes.filename, holes.hole_group
    if hole.x is None or hole.y is None:
        problems.append(f"{name} {hole.where}: {hole.id} has no {g}_NATE/{g}_NATN; left out")
        return None
    final = hole.final_depth_m
    if final is None:
        final = max((layer.base_m for layer in hole.layers), default=None)
        if final is None:
            problems.append(
                f"{name} {hole.where}: {hole.id} has no {g}_FDEP and no layers; left out"
            )
            return None
        notes.append(
            f"{hole.id}: no {g}_FDEP; final depth taken as the deepest layer base {final:g} m"
        )
    if final <= 0:
        problems.append(f"{name} {hole.where}, {g}_FDEP: {final:g} is not > 0; {hole.id} left out")
        return None
    return final
