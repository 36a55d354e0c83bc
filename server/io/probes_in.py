"""Existing probes in from CSV/XLSX tables and AGS4 files, as model-file "existing" entries.

Tables come in two documented layouts (docs/import-formats.md):
- wide: one row per probe, columns id, method, x, y, final_depth_m and one column per
  boundary, headed ``base:<unit name>`` (or the exact unit name), holding the depth of the
  base of that unit; optional ``precision:<unit name>`` columns override the method's precision;
- long: one row per layer, columns id, method, x, y, final_depth_m, unit, top_m, base_m.

AGS4 files are parsed by python-ags4: LOCA gives position, type and final depth, GEOL the
layers. The user maps each geology code (GEOL_GEOL, else GEOL_LEG, else GEOL_DESC) to a
project unit; the base of the deepest layer mapped to a unit becomes the observed base of
that unit. A layer that reaches the final depth has no observed base (the probe ended in it).

Nothing here writes a store. Row numbers in messages are spreadsheet rows (the header is
row 1); AGS4 rows are counted within their group, with the file's line number beside them.
"""

from __future__ import annotations

import copy
import csv
import io
import math
import re
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from server.errors import InputError, OptionNeededError

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


@dataclass(frozen=True)
class Ags4Holes:
    filename: str
    holes: tuple[Ags4Hole, ...]
    problems: tuple[str, ...] = ()  # e.g. GEOL rows naming a location missing from LOCA


@dataclass(frozen=True)
class ImportResult:
    probes: list[dict]
    outside_site: list[str]
    problems: list[str]  # holes left out, with the reason
    notes: list[str] = field(default_factory=list)

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


def _observed_from_layers(
    layers: list[tuple[float | None, float, int | None, str]],
    final_depth_m: float,
    units: list[str],
    who: str,
) -> tuple[dict[str, float], list[InputError], list[str]]:
    """Observed unit bases of one probe from its layers.

    ``layers``: (top_m or None, base_m, unit index or None for "left out", where). The base of
    the deepest layer mapped to a unit is that unit's observed base, unless the layer reaches
    the final depth (the probe ended inside the unit). ``who`` names the probe in messages.
    Returns (observed, problems, notes).
    """
    problems: list[InputError] = []
    notes: list[str] = []
    ordered = sorted(layers, key=lambda t: (t[0] if t[0] is not None else t[1], t[1]))
    last_base = None
    last_unit = None  # (index, where) of the deepest mapped layer so far
    deepest: dict[int, float] = {}
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
        if unit is None:
            continue
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
    observed: dict[str, float] = {}
    above: tuple[str, float] | None = None
    for unit, base in sorted(deepest.items()):
        if unit == len(units) - 1:
            continue  # the basal unit has no base
        if base >= final_depth_m - DEPTH_TOL_M:
            notes.append(f"ended in {units[unit]} at {base:g} m, so its base was not reached")
            continue
        if above is not None and base <= above[1] + DEPTH_TOL_M and not problems:
            problems.append(
                InputError(
                    f"{who}, base of {units[unit]}",
                    f"{base:g} m is not below the base of {above[0]} ({above[1]:g} m); "
                    "bases must deepen in unit order",
                )
            )
        observed[units[unit]] = base
        above = (units[unit], base)
    return observed, problems, notes


# ---------------------------------------------------------------------------------------------
# Tables (CSV, XLSX)


def _decode(data: bytes) -> str:
    for encoding in ("utf-8-sig", "cp1252"):
        try:
            return data.decode(encoding)
        except UnicodeDecodeError:
            continue
    return data.decode("latin-1")


def _read_table(data: bytes, filename: str) -> tuple[list[str], list[tuple[int, list[str]]], str]:
    """(headings, [(row number, cells)], delimiter) from CSV text or the first XLSX sheet."""
    if len(data) > MAX_TABLE_BYTES:
        raise InputError(filename, f"is over the {MAX_TABLE_BYTES / 1e6:.0f} MB limit")
    if Path(filename).suffix.lower() == ".xlsx":
        return _read_xlsx(data, filename)
    text = _decode(data)
    if not text.strip():
        raise InputError(filename, "is empty")
    # The heading row decides the separator: the candidate it holds most of (comma on a tie),
    # which copes with semicolon files from locales that write decimal commas.
    first = next(line for line in text.splitlines() if line.strip())
    delimiter = max((",", ";", "\t"), key=first.count)
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    rows: list[tuple[int, list[str]]] = []
    header: list[str] | None = None
    try:
        for cells in reader:
            if not any(c.strip() for c in cells):
                continue
            if header is None:
                header = cells
            else:
                rows.append((reader.line_num, cells))
    except csv.Error as exc:
        raise InputError(f"{filename} row {reader.line_num}", f"unreadable CSV ({exc})") from None
    if header is None:
        raise InputError(filename, "has no header row")
    return [h.strip() for h in header], rows, delimiter


def _read_xlsx(data: bytes, filename: str) -> tuple[list[str], list[tuple[int, list[str]]], str]:
    import openpyxl  # a declared dependency (pyproject.toml)

    try:
        book = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises several kinds for a bad file
        raise InputError(filename, f"cannot be read as a spreadsheet ({exc})") from None
    sheet = book.worksheets[0]
    header = None
    rows = []
    for n, values in enumerate(sheet.iter_rows(values_only=True), start=1):
        cells = ["" if v is None else (v if isinstance(v, int | float) else str(v)) for v in values]
        if not any(str(c).strip() for c in cells):
            continue
        if header is None:
            header = [str(c).strip() for c in cells]
        else:
            rows.append((n, cells))
    book.close()
    if header is None:
        raise InputError(filename, "has no header row")
    return header, rows, ","


def _recognise_columns(
    header: list[str], model: dict, filename: str, long: bool
) -> tuple[dict[str, int], dict[str, int], dict[str, int], dict[str, str]]:
    """Map headings to what they hold: (fixed columns, base columns, precision columns, labels)."""
    units, by_lower = _unit_lookup(model)
    basal = units[-1] if units else None
    fixed_names = LONG_COLUMNS if long else WIDE_COLUMNS
    fixed: dict[str, int] = {}
    bases: dict[str, int] = {}
    precisions: dict[str, int] = {}
    labels: dict[str, str] = {}

    def claim(target: dict, key: str, i: int, label: str) -> None:
        if key in target:
            raise InputError(
                f"{filename} column {header[i]}", f"repeats column {header[target[key]]}"
            )
        target[key] = i
        labels[header[i]] = label

    for i, head in enumerate(header):
        low = head.strip().lower()
        prefix, _, rest = low.partition(":")
        if low in fixed_names:
            claim(fixed, low, i, low)
        elif not long and prefix in ("base", "precision") and rest:
            name = by_lower.get(rest.strip())
            if name is None:
                raise InputError(
                    f"{filename} column {head}",
                    f"'{head.partition(':')[2].strip()}' is not a unit of the model "
                    f"(units: {', '.join(units)})",
                )
            if name == basal:
                raise InputError(f"{filename} column {head}", f"{name} is the basal unit: no base")
            if prefix == "base":
                claim(bases, name, i, f"base of {name} (m)")
            else:
                claim(precisions, name, i, f"precision of base of {name} (m)")
        elif not long and low in by_lower and by_lower[low] != basal:
            claim(bases, by_lower[low], i, f"base of {by_lower[low]} (m)")
        else:
            labels[head] = "ignored"
    return fixed, bases, precisions, labels


def preview_csv(
    data: bytes,
    model: dict,
    *,
    filename: str = "probes.csv",
    method_default: str | None = None,
    mapping: dict[str, str] | None = None,
) -> ProbePreview:
    """Read a probe table and say what would be imported, row by row, without importing.

    File-level faults (no header, a missing required column, a column naming an unknown unit)
    raise InputError; row-level faults are collected in ``problems``. ``mapping`` (long layout
    only) maps codes in the unit column to unit names, like the AGS4 mapping.
    """
    header, rows, delimiter = _read_table(data, filename)
    low_header = {h.strip().lower() for h in header}
    long = "unit" in low_header
    fixed, bases, precisions, labels = _recognise_columns(header, model, filename, long)
    required = ["id", "x", "y", "final_depth_m"] + (["unit", "base_m"] if long else [])
    if method_default is None:
        required.insert(1, "method")
    missing = [c for c in required if c not in fixed]
    if missing:
        raise InputError(
            filename,
            f"missing column(s) {', '.join(missing)}; found: {', '.join(header)} "
            "(see docs/import-formats.md)",
        )
    methods = _method_lookup(model)
    if method_default is not None and method_default.lower() not in methods:
        raise InputError(
            "default method", f"'{method_default}' is not a method of the model ({_ids(model)})"
        )
    decimal_comma = delimiter != ","
    if long:
        probes, errors, notes = _parse_long(
            rows, header, fixed, model, filename, method_default, methods, mapping, decimal_comma
        )
    else:
        probes, errors, notes = _parse_wide(
            rows,
            header,
            fixed,
            bases,
            precisions,
            model,
            filename,
            method_default,
            methods,
            decimal_comma,
        )
    return ProbePreview(
        format="long" if long else "wide",
        columns=labels,
        rows=len(rows),
        probes=probes,
        problems=[str(e) for e in errors],
        outside_site=probes_outside_site(model, probes),
        notes=notes,
        errors=errors,
    )


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


def _probe_head(
    cells: list,
    header: list[str],
    fixed: dict[str, int],
    where: str,
    method_default: str | None,
    methods: dict[str, str],
    decimal_comma: bool,
    model: dict,
) -> dict:
    """id, method, x, y, final_depth_m of one row (InputError on the first bad cell)."""

    def num(col: str) -> float | None:
        return _number(_cell(cells, fixed.get(col)), f"{where}, column {col}", decimal_comma)

    pid = _text(_cell(cells, fixed["id"]))
    if not pid:
        raise InputError(f"{where}, column id", "empty; every probe needs an id")
    method_text = _text(_cell(cells, fixed.get("method")))
    if not method_text:
        if method_default is None:
            raise InputError(f"{where}, column method", "empty and no default method given")
        method_text = method_default
    method = methods.get(method_text.lower())
    if method is None:
        raise InputError(
            f"{where}, column method",
            f"'{method_text}' is not a method of the model ({_ids(model)})",
        )
    head = {"id": pid, "method": method}
    for col in ("x", "y", "final_depth_m"):
        value = num(col)
        if value is None:
            raise InputError(f"{where}, column {col}", "empty")
        head[col] = value
    if head["final_depth_m"] <= 0:
        raise InputError(f"{where}, column final_depth_m", f"{head['final_depth_m']:g} is not > 0")
    return head


def _parse_wide(
    rows, header, fixed, bases, precisions, model, filename, method_default, methods, decimal_comma
) -> tuple[list[dict], list[InputError], list[str]]:
    units, _ = _unit_lookup(model)
    probes: list[dict] = []
    errors: list[InputError] = []
    seen: dict[str, str] = {}
    for row_number, cells in rows:
        where = f"{filename} row {row_number}"
        try:
            probe = _probe_head(
                cells, header, fixed, where, method_default, methods, decimal_comma, model
            )
            if probe["id"] in seen:
                raise InputError(
                    f"{where}, column id", f"'{probe['id']}' repeats {seen[probe['id']]}"
                )
            observed: dict[str, float] = {}
            last = None
            for name in units:  # unit order, so depth order can be checked
                if name not in bases:
                    continue
                col = header[bases[name]]
                depth = _number(_cell(cells, bases[name]), f"{where}, column {col}", decimal_comma)
                if depth is None:
                    continue
                if depth < 0:
                    raise InputError(f"{where}, column {col}", f"{depth:g} is above ground level")
                if depth > probe["final_depth_m"] + DEPTH_TOL_M:
                    raise InputError(
                        f"{where}, column {col}",
                        f"{depth:g} m is below the final depth {probe['final_depth_m']:g} m",
                    )
                if last is not None and depth <= last[1] + DEPTH_TOL_M:
                    raise InputError(
                        f"{where}, column {col}",
                        f"{depth:g} m is above the base of {last[0]} ({last[1]:g} m); "
                        "bases must deepen in unit order",
                    )
                observed[name] = depth
                last = (name, depth)
            probe["observed"] = observed
            precision = {}
            for name, i in precisions.items():
                value = _number(_cell(cells, i), f"{where}, column {header[i]}", decimal_comma)
                if value is None:
                    continue
                if value <= 0:
                    raise InputError(f"{where}, column {header[i]}", f"{value:g} is not > 0")
                precision[name] = value
            if precision:
                probe["precision_m"] = precision
        except InputError as exc:
            errors.append(exc)
            continue
        seen[probe["id"]] = f"row {row_number}"
        probes.append(probe)
    return probes, errors, []


def _parse_long(
    rows, header, fixed, model, filename, method_default, methods, mapping, decimal_comma
) -> tuple[list[dict], list[InputError], list[str]]:
    units, by_lower = _unit_lookup(model)
    code_to_unit = _resolve_mapping(mapping or {}, model) if mapping else {}
    groups: dict[str, dict] = {}  # id -> {"head", "layers", "bad"}
    errors: list[InputError] = []
    for row_number, cells in rows:
        where = f"{filename} row {row_number}"
        pid = _text(_cell(cells, fixed["id"]))
        if not pid:
            errors.append(InputError(f"{where}, column id", "empty; every row needs a probe id"))
            continue
        group = groups.setdefault(pid, {"head": None, "layers": [], "bad": False, "rows": []})
        group["rows"].append(row_number)
        try:
            # probe columns may be left blank on the rows after a probe's first
            blank = all(not _text(_cell(cells, fixed.get(c))) for c in ("x", "y", "final_depth_m"))
            if group["head"] is None or not blank:
                head = _probe_head(
                    cells, header, fixed, where, method_default, methods, decimal_comma, model
                )
                if group["head"] is None:
                    group["head"] = head
                else:
                    for col in ("method", "x", "y", "final_depth_m"):
                        if head[col] != group["head"][col]:
                            raise InputError(
                                f"{where}, column {col}",
                                f"{_shown(head[col])} differs from "
                                f"{_shown(group['head'][col])} on row "
                                f"{group['rows'][0]} of probe {pid}",
                            )
            code = _text(_cell(cells, fixed["unit"]))
            if code in code_to_unit:
                unit = code_to_unit[code]
            elif code.lower() in by_lower:
                unit = units.index(by_lower[code.lower()])
            else:
                raise InputError(
                    f"{where}, column unit",
                    f"'{code}' is not a unit of the model ({', '.join(units)}) nor a mapped code",
                )
            top = _number(_cell(cells, fixed.get("top_m")), f"{where}, column top_m", decimal_comma)
            base = _number(_cell(cells, fixed["base_m"]), f"{where}, column base_m", decimal_comma)
            if base is None:
                raise InputError(f"{where}, column base_m", "empty")
            group["layers"].append((top, base, unit, where))
        except InputError as exc:
            errors.append(exc)
            group["bad"] = True
    probes: list[dict] = []
    notes: list[str] = []
    for pid, group in groups.items():
        if group["bad"] or group["head"] is None:
            continue
        head = group["head"]
        observed, problems, hole_notes = _observed_from_layers(
            group["layers"], head["final_depth_m"], units, f"{filename} probe {pid}"
        )
        if problems:
            errors.extend(problems)
            continue
        notes.extend(f"{pid}: {n}" for n in hole_notes)
        probes.append({**head, "observed": observed})
    return probes, errors, notes


def parse_csv(
    data: bytes,
    model: dict,
    *,
    filename: str = "probes.csv",
    method_default: str | None = None,
    mapping: dict[str, str] | None = None,
    leave_outside: bool = False,
) -> list[dict]:
    """Existing-probe dicts from a table; InputError on the first bad row (nothing imported).

    Probes outside the site are refused with their ids listed, unless ``leave_outside``, when
    they are left out (the caller lists them from ``preview_csv``).
    """
    preview = preview_csv(
        data, model, filename=filename, method_default=method_default, mapping=mapping
    )
    if preview.errors:
        first = preview.errors[0]
        more = len(preview.errors) - 1
        suffix = f" (and {more} more problem{'s' if more > 1 else ''})" if more else ""
        raise InputError(first.field, first.problem + suffix)
    if not preview.probes:
        raise InputError(filename, "has no probe rows")
    if preview.outside_site and not leave_outside:
        raise outside_error(filename, preview.outside_site)
    return preview.importable


def outside_error(filename: str, ids: list[str]) -> InputError:
    """The refusal for probes outside the site, naming them (``leave_outside`` resolves it)."""
    shown = ", ".join(ids[:10]) + (f" and {len(ids) - 10} more" if len(ids) > 10 else "")
    return OptionNeededError(
        filename,
        f"{len(ids)} probe(s) lie outside the site: {shown}; check the coordinates and the CRS, "
        "or leave them out",
        "leave_outside",
    )


# ---------------------------------------------------------------------------------------------
# AGS4


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
        raise InputError(filename, "has no AGS4 GROUP rows; is it an AGS4 file?")
    for group, what in (("LOCA", "locations"), ("GEOL", "geology layers")):
        if group not in tables:
            raise InputError(
                filename, f"has no {group} group ({what}); both LOCA and GEOL are needed"
            )

    loca = _ags_rows(
        tables["LOCA"], "LOCA", filename, ("LOCA_ID", "LOCA_NATE", "LOCA_NATN", "LOCA_FDEP")
    )
    geol = _ags_rows(tables["GEOL"], "GEOL", filename, ("LOCA_ID", "GEOL_TOP", "GEOL_BASE"))
    if not any(h in tables["GEOL"].columns for h in ("GEOL_GEOL", "GEOL_LEG", "GEOL_DESC")):
        raise InputError(f"{filename} GEOL", "has none of GEOL_GEOL, GEOL_LEG, GEOL_DESC to map")

    holes: dict[str, dict] = {}
    for where, row in loca:
        hid = row["LOCA_ID"].strip()
        if not hid:
            raise InputError(f"{filename} {where}, LOCA_ID", "empty")
        if hid in holes:
            raise InputError(
                f"{filename} {where}, LOCA_ID", f"'{hid}' repeats {holes[hid]['where']}"
            )
        holes[hid] = {
            "id": hid,
            "type": row.get("LOCA_TYPE", "").strip(),
            "x": _number(row["LOCA_NATE"], f"{filename} {where}, LOCA_NATE"),
            "y": _number(row["LOCA_NATN"], f"{filename} {where}, LOCA_NATN"),
            "final_depth_m": _number(row["LOCA_FDEP"], f"{filename} {where}, LOCA_FDEP"),
            "layers": [],
            "where": where,
        }
    problems = []
    for where, row in geol:
        hid = row["LOCA_ID"].strip()
        top = _number(row["GEOL_TOP"], f"{filename} {where}, GEOL_TOP")
        base = _number(row["GEOL_BASE"], f"{filename} {where}, GEOL_BASE")
        for heading, value in (("GEOL_TOP", top), ("GEOL_BASE", base)):
            if value is None:
                raise InputError(
                    f"{filename} {where}, {heading}", "empty; a layer needs a top and a base"
                )
        geology = row.get("GEOL_GEOL", "").strip()
        legend = row.get("GEOL_LEG", "").strip()
        description = row.get("GEOL_DESC", "").strip()
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
            problems.append(f"{filename} {where}: location '{hid}' is not in LOCA; layer left out")
            continue
        holes[hid]["layers"].append(layer)
    return Ags4Holes(
        filename=filename,
        holes=tuple(Ags4Hole(**{**h, "layers": tuple(h["layers"])}) for h in holes.values()),
        problems=tuple(problems),
    )


def _ags_rows(
    frame: Any, group: str, filename: str, required: tuple[str, ...]
) -> list[tuple[str, dict]]:
    """DATA rows of one AGS4 group as (where, {heading: text}); required headings checked."""
    missing = [h for h in required if h not in frame.columns]
    if missing:
        raise InputError(f"{filename} {group}", f"missing heading(s) {', '.join(missing)}")
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


def _resolve_mapping(mapping: dict[str, str], model: dict) -> dict[str, int | None]:
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


def ags4_to_existing(
    holes: Ags4Holes,
    model: dict,
    mapping: dict[str, str],
    method_by_type: dict[str, str] | None = None,
    default_method: str | None = None,
) -> ImportResult:
    """Existing-probe dicts from AGS4 holes, with geology codes mapped to project units.

    ``mapping``: geology code -> unit name, or "-"/"" to leave that code out. Every code in
    the file must be mapped. ``method_by_type``: LOCA_TYPE -> method id; a type equal to a
    method id maps to it; otherwise ``default_method``. Holes whose layers break the model's
    rules (order of units, bases below the final depth...) are left out and listed in
    ``problems``; holes outside the site are listed in ``outside_site`` and left out of
    ``importable`` (the model file admits no probe outside the site).
    """
    units, _ = _unit_lookup(model)
    methods = _method_lookup(model)
    code_to_unit = _resolve_mapping(mapping, model)
    unmapped = [c for c, _d, _n in ags4_legends(holes) if c not in code_to_unit]
    if unmapped:
        raise InputError(
            "mapping",
            f"no unit for geology code(s) {', '.join(unmapped)}; map each one to a unit "
            "or leave it out",
        )
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

    probes: list[dict] = []
    problems = list(holes.problems)
    notes: list[str] = []
    name = holes.filename
    for hole in holes.holes:
        if hole.x is None or hole.y is None:
            problems.append(f"{name} {hole.where}: {hole.id} has no LOCA_NATE/LOCA_NATN; left out")
            continue
        final = hole.final_depth_m
        if final is None:
            final = max((layer.base_m for layer in hole.layers), default=None)
            if final is None:
                problems.append(
                    f"{name} {hole.where}: {hole.id} has no LOCA_FDEP and no layers; left out"
                )
                continue
            notes.append(
                f"{hole.id}: no LOCA_FDEP; final depth taken as the deepest layer base {final:g} m"
            )
        if final <= 0:
            problems.append(
                f"{name} {hole.where}, LOCA_FDEP: {final:g} is not > 0; {hole.id} left out"
            )
            continue
        layers = [
            (layer.top_m, layer.base_m, code_to_unit[layer.code], f"{name} {layer.where}")
            for layer in hole.layers
        ]
        observed, layer_problems, hole_notes = _observed_from_layers(
            layers, final, units, f"{name} location {hole.id}"
        )
        if layer_problems:
            problems.extend(f"{e}; {hole.id} left out" for e in layer_problems)
            continue
        notes.extend(f"{hole.id}: {n}" for n in hole_notes)
        probes.append(
            {
                "id": hole.id,
                "method": method_of(hole),
                "x": hole.x,
                "y": hole.y,
                "final_depth_m": final,
                "observed": observed,
            }
        )
    return ImportResult(
        probes=probes,
        outside_site=probes_outside_site(model, probes),
        problems=problems,
        notes=notes,
    )


# ---------------------------------------------------------------------------------------------
# Into the model


def merge_existing(model: dict, probes: list[dict], mode: str = "append") -> dict:
    """A new model with the probes added to (or replacing) its existing probes.

    Refuses an id that appears twice among the probes or, when appending, that the model
    already holds. The result is checked against the model-file schema.
    """
    if mode not in ("append", "replace"):
        raise InputError("mode", f"'{mode}' is not append or replace")
    seen: set[str] = set()
    for p in probes:
        if p["id"] in seen:
            raise InputError(f"existing {p['id']}", "the id appears twice in the import")
        seen.add(p["id"])
    out = copy.deepcopy(model)
    current = [] if mode == "replace" else list(out.get("existing") or [])
    held = {p["id"] for p in current}
    clash = [pid for pid in seen if pid in held]
    if clash:
        raise InputError(
            f"existing {sorted(clash)[0]}",
            f"already in the model ({len(clash)} id(s) clash); replace the existing probes "
            "or rename the imported ones",
        )
    out["existing"] = current + copy.deepcopy(probes)
    from server.io.model_file import validate_model

    validate_model(out)
    return out
