"""Existing probes in from CSV/XLSX tables (layouts in docs/import-formats.md).

- wide: one row per probe, columns id, method, x, y, final_depth_m and one column per
  boundary, headed ``base:<unit name>`` (or the exact unit name), holding the depth of the
  base of that unit; optional ``precision:<unit name>`` columns override the method's precision;
- long: one row per layer, columns id, method, x, y, final_depth_m, unit, top_m, base_m.

Row numbers in messages are spreadsheet rows (the header is row 1).
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

from probewise.errors import InputError
from probewise.io.probes_common import (
    DEPTH_TOL_M,
    LONG_COLUMNS,
    MAX_TABLE_BYTES,
    WIDE_COLUMNS,
    ProbePreview,
    _cell,
    _decode,
    _ids,
    _method_lookup,
    _number,
    _shown,
    _text,
    _unit_lookup,
    absent_note,
    observed_from_layers,
    outside_error,
    probes_outside_site,
    resolve_mapping,
)


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
    import openpyxl  # comes with python-ags4

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
    notes: list[str] = []
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
            observed = _wide_bases(cells, header, bases, units, probe, where, decimal_comma)
            notes.extend(
                f"{probe['id']}: {absent_note(name, depth, above)}"
                for name, depth, above in observed.pop(ABSENT_KEY, [])
            )
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
    return probes, errors, notes


ABSENT_KEY = "\0absent"  # where _wide_bases hands back the absent units it inferred


def _wide_bases(cells, header, bases, units, probe, where, decimal_comma) -> dict:
    """Observed bases of one wide row, in unit order, with absent units filled in.

    An empty cell of a unit whose column is present, above a unit whose base is given, means
    the probe passed that unit's position without meeting it: the unit is absent and its base
    is recorded at the base of the unit above (0 m for the first unit), when that is known.
    Equal depths are accepted (an absent unit); rising depths are refused.
    """
    given: dict[int, float | None] = {}
    for k, name in enumerate(units):  # unit order, so depth order can be checked
        if name not in bases:
            continue
        col = header[bases[name]]
        depth = _number(_cell(cells, bases[name]), f"{where}, column {col}", decimal_comma)
        given[k] = depth
        if depth is None:
            continue
        if depth < 0:
            raise InputError(f"{where}, column {col}", f"{depth:g} is above ground level")
        if depth > probe["final_depth_m"] + DEPTH_TOL_M:
            raise InputError(
                f"{where}, column {col}",
                f"{depth:g} m is below the final depth {probe['final_depth_m']:g} m",
            )
    deepest_given = max((k for k, d in given.items() if d is not None), default=-1)
    observed: dict = {}
    absent = []
    last: tuple[str, float] | None = None
    for k, depth in given.items():
        name = units[k]
        if depth is None:
            known_above = k == 0 or (last is not None and last[0] == units[k - 1])
            if k > deepest_given or not known_above:
                continue
            depth = last[1] if last is not None else 0.0
            absent.append((name, depth, last[0] if last is not None else None))
        elif last is not None and depth < last[1] - DEPTH_TOL_M:
            raise InputError(
                f"{where}, column {header[bases[name]]}",
                f"{depth:g} m is above the base of {last[0]} ({last[1]:g} m); "
                "bases must not rise in unit order",
            )
        observed[name] = depth
        last = (name, depth)
    if absent:
        observed[ABSENT_KEY] = absent
    return observed


def _parse_long(
    rows, header, fixed, model, filename, method_default, methods, mapping, decimal_comma
) -> tuple[list[dict], list[InputError], list[str]]:
    units, by_lower = _unit_lookup(model)
    code_to_unit = resolve_mapping(mapping or {}, model) if mapping else {}
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
        observed, problems, hole_notes = observed_from_layers(
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
