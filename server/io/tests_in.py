"""Test results by depth in, for existing probes: CSV tables and AGS4 files
(docs/import-formats.md "Test results").

CSV: one row per result, headings ``probe``, ``depth_m``, ``parameter``, ``value``, ``unit``.
AGS4 (python-ags4): the groups in ``AGS4_GROUPS``, each with the headings it needs. Every
problem names the file, the row or line and the field; nothing is returned unless the whole
file reads. ``merge_tests`` puts the results on the project's probes (append or replace).
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from typing import Any

from probewise.core.insitu import PARAMETER_BY_NAME, find_parameter
from probewise.errors import InputError
from probewise.io.model_tests import parameter_problem, unit_problem
from probewise.io.probes_common import _decode, _number


@dataclass(frozen=True)
class AgsColumn:
    """One AGS4 heading read as a parameter; ``default_unit`` where the file gives none."""

    heading: str
    parameter: str
    default_unit: str
    skip: tuple[str, ...] = ()  # texts that mean "no result" (a non-plastic PL is "NP")


@dataclass(frozen=True)
class AgsGroup:
    depth: str
    columns: tuple[AgsColumn, ...]
    required: tuple[str, ...]  # value headings the group must have (besides LOCA_ID, depth)


AGS4_GROUPS: dict[str, AgsGroup] = {
    "SCPT": AgsGroup(
        "SCPT_DPTH",
        (
            AgsColumn("SCPT_RES", "qc", "MPa"),
            AgsColumn("SCPT_FRES", "fs", "MPa"),
            AgsColumn("SCPT_PWP2", "u2", "MPa"),
        ),
        ("SCPT_RES",),
    ),
    "DMTT": AgsGroup(
        "DMTT_DPTH",
        (AgsColumn("DMTT_P0", "p0", "kPa"), AgsColumn("DMTT_P1", "p1", "kPa")),
        ("DMTT_P0",),
    ),
    "ISPT": AgsGroup("ISPT_TOP", (AgsColumn("ISPT_NVAL", "N", "blows"),), ("ISPT_NVAL",)),
    "LNMC": AgsGroup("SPEC_DPTH", (AgsColumn("LNMC_MC", "w", "%"),), ("LNMC_MC",)),
    "LLPL": AgsGroup(
        "SPEC_DPTH",
        (
            AgsColumn("LLPL_LL", "LL", "%"),
            AgsColumn("LLPL_PL", "PL", "%", ("NP",)),
            AgsColumn("LLPL_PI", "PI", "%", ("NP",)),
        ),
        ("LLPL_LL",),
    ),
    "CONG": AgsGroup(
        "SPEC_DPTH",
        (
            AgsColumn("CONG_IVR", "e0", "-"),
            AgsColumn("CONG_MCI", "w", "%"),
            AgsColumn("CONG_BDEN", "bulk_density", "Mg/m3"),
        ),
        ("CONG_IVR",),
    ),
    "TRIT": AgsGroup("SPEC_DPTH", (AgsColumn("TRIT_CU", "cu", "kPa"),), ("TRIT_CU",)),
}

CSV_HEADINGS = {
    "probe": ("probe", "id", "probe_id", "loca_id"),
    "depth_m": ("depth_m", "depth"),
    "parameter": ("parameter",),
    "value": ("value",),
    "unit": ("unit",),
}


@dataclass(frozen=True)
class TestsRead:
    """Results read from a file: probe id -> list of ``{"depth_m", "parameter", "value",
    "unit"}`` in file order, and a line per group or parameter for the preview."""

    by_probe: dict[str, list[dict]]
    counts: dict[str, int]

    @property
    def total(self) -> int:
        return sum(len(v) for v in self.by_probe.values())


def _probe_depths(model: dict) -> dict[str, float]:
    return {p["id"]: float(p["final_depth_m"]) for p in model.get("existing") or []}


def _check_result(where: str, probe: str, depth: float, finals: dict[str, float]) -> None:
    if probe not in finals:
        raise InputError(f"{where}, probe", f"'{probe}' is not an existing probe of the project")
    if depth < 0:
        raise InputError(f"{where}, depth", f"{depth:g} m is above ground level")
    if depth > finals[probe]:
        raise InputError(
            f"{where}, depth",
            f"{depth:g} m is below the final depth of {probe} ({finals[probe]:g} m)",
        )


def _csv_names(parameter: str, unit: str, where: str) -> tuple[str, str]:
    """The canonical parameter and unit names of a row (case ignored), or InputError."""
    spec = find_parameter(parameter)
    problem = parameter_problem(spec.name if spec else parameter)
    if problem:
        raise InputError(f"{where}, parameter", problem)
    problem = unit_problem(spec.name, unit)
    if problem:
        raise InputError(f"{where}, unit", problem)
    return spec.name, next(u for u in spec.units if u.lower() == unit.lower())


def read_tests_csv(data: bytes, model: dict, *, filename: str = "tests.csv") -> TestsRead:
    """Results from a CSV table (comma, semicolon or tab separated; heading row is line 1)."""
    text = _decode(data)
    if not text.strip():
        raise InputError(filename, "is empty")
    try:
        dialect = csv.Sniffer().sniff(text.splitlines()[0], delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    rows = list(csv.reader(io.StringIO(text), dialect))
    heads = [h.strip().lower() for h in rows[0]]
    col: dict[str, int] = {}
    for key, names in CSV_HEADINGS.items():
        hit = [i for i, h in enumerate(heads) if h in names]
        if not hit:
            raise InputError(f"{filename} line 1", f"has no '{key}' column ({', '.join(names)})")
        col[key] = hit[0]
    finals = _probe_depths(model)
    out: dict[str, list[dict]] = {}
    counts: dict[str, int] = {}
    names: dict[tuple[str, str], tuple[str, str]] = {}  # as written -> canonical
    for line, row in enumerate(rows[1:], start=2):
        if not any(cell.strip() for cell in row):
            continue
        where = f"{filename} line {line}"
        cells = {k: (row[i].strip() if i < len(row) else "") for k, i in col.items()}
        probe = cells["probe"]
        if not probe:
            raise InputError(f"{where}, probe", "empty")
        comma = dialect.delimiter != ","
        depth = _number(cells["depth_m"], f"{where}, depth_m", decimal_comma=comma)
        if depth is None:
            raise InputError(f"{where}, depth_m", "empty")
        _check_result(where, probe, depth, finals)
        key = (cells["parameter"], cells["unit"])
        if key not in names:
            names[key] = _csv_names(*key, where)
        name, unit = names[key]
        value = _number(cells["value"], f"{where}, value", decimal_comma=comma)
        if value is None:
            raise InputError(f"{where}, value", "empty")
        out.setdefault(probe, []).append(
            {"depth_m": depth, "parameter": name, "value": value, "unit": unit}
        )
        counts[name] = counts.get(name, 0) + 1
    if not out:
        raise InputError(filename, "has no result rows")
    return TestsRead(out, counts)


def _ags4_tables(data: bytes, filename: str) -> dict[str, Any]:
    from python_ags4 import AGS4

    if not data or not data.strip():
        raise InputError(filename, "is empty")
    try:
        tables, _headings, _lines = AGS4.AGS4_to_dataframe(
            io.StringIO(_decode(data)), get_line_numbers=True
        )
    except AGS4.AGS4Error as exc:
        raise InputError(filename, f"is not a readable AGS4 file: {exc}") from None
    except Exception as exc:  # ragged rows, a DATA row before its HEADING row
        raise InputError(filename, f"is not a readable AGS4 file ({type(exc).__name__})") from None
    return tables


def _ags_unit(records: list[dict], column: AgsColumn, where: str) -> str:
    """The unit the file's UNIT row gives the heading (its default when blank), checked."""
    given = next((r.get(column.heading) for r in records if r.get("HEADING") == "UNIT"), None)
    unit = (given or "").strip() or column.default_unit
    spec = PARAMETER_BY_NAME[column.parameter]
    match = next((u for u in spec.units if u.lower() == unit.lower()), None)
    if match is None:
        problem = unit_problem(column.parameter, unit)
        raise InputError(f"{where}, UNIT row, {column.heading}", problem or "unknown unit")
    return match


def read_tests_ags4(data: bytes, model: dict, *, filename: str = "tests.ags") -> TestsRead:
    """Results from the AGS4 groups of ``AGS4_GROUPS`` present in the file (at least one)."""
    tables = _ags4_tables(data, filename)
    present = [g for g in AGS4_GROUPS if g in tables]
    if not present:
        raise InputError(filename, f"has none of the groups {', '.join(AGS4_GROUPS)}")
    finals = _probe_depths(model)
    out: dict[str, list[dict]] = {}
    counts: dict[str, int] = {}
    for group in present:
        spec = AGS4_GROUPS[group]
        frame = tables[group]
        needed = ("LOCA_ID", spec.depth, *spec.required)
        missing = [h for h in needed if h not in frame.columns]
        if missing:
            raise InputError(
                f"{filename} {group}", f"missing heading(s) {', '.join(missing)} the group needs"
            )
        records = frame.to_dict("records")
        columns = [c for c in spec.columns if c.heading in frame.columns]
        units = {c.heading: _ags_unit(records, c, f"{filename} {group}") for c in columns}
        n = 0
        for record in records:
            if record.get("HEADING") != "DATA":
                continue
            n += 1
            line = record.get("line_number")
            where = f"{filename} {group} row {n}" + (f" (line {line})" if line else "")
            probe = str(record.get("LOCA_ID") or "").strip()
            depth = _number(record.get(spec.depth), f"{where}, {spec.depth}")
            if not probe or depth is None:
                raise InputError(f"{where}", f"needs LOCA_ID and {spec.depth}")
            _check_result(where, probe, depth, finals)
            for c in columns:
                text = str(record.get(c.heading) or "").strip()
                if text in c.skip:
                    continue
                value = _number(text, f"{where}, {c.heading}")
                if value is None:
                    continue
                out.setdefault(probe, []).append(
                    {
                        "depth_m": depth,
                        "parameter": c.parameter,
                        "value": value,
                        "unit": units[c.heading],
                    }
                )
                counts[f"{group} {c.parameter}"] = counts.get(f"{group} {c.parameter}", 0) + 1
    if not out:
        raise InputError(filename, "has no results in its test groups")
    return TestsRead(out, counts)


def read_tests(data: bytes, model: dict, *, filename: str) -> TestsRead:
    """CSV or AGS4 by the file's first row (an AGS4 file opens with a "GROUP" row)."""
    text = _decode(data).lstrip("\ufeff \r\n")
    if text.startswith('"GROUP"'):
        return read_tests_ags4(data, model, filename=filename)
    return read_tests_csv(data, model, filename=filename)


def merge_tests(model: dict, read: TestsRead, mode: str = "append") -> dict:
    """A copy of ``model`` with the results on their probes: ``append`` adds them after the
    probe's results, ``replace`` replaces the results of the probes the file names."""
    import copy

    if mode not in ("append", "replace"):
        raise InputError("mode", f"must be append or replace (got {mode!r})")
    out = copy.deepcopy(model)
    for probe in out.get("existing") or []:
        new = read.by_probe.get(probe["id"])
        if new is None:
            continue
        old = [] if mode == "replace" else list(probe.get("tests") or [])
        probe["tests"] = old + [dict(t) for t in new]
    return out
