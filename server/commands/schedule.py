"""`probewise schedule MODEL [--layout NAME] [--format text|csv|geojson|gpkg|json] [-o OUT]`.

The scoping schedule of one layout, built by ``probewise.app.schedule`` (the same as the web page's
Schedule): the probe list with target depths and the boundaries each probe is expected to
reveal, cost and duration by method, totals, the justification written from the numbers
and the caution. Without ``--layout`` the layout is the one the web page shows first: the
Pareto-efficient option that buys the most information per unit cost.

- text (default): a printable schedule;
- json: ``{"project", "layout", "currency", "crs", "date", "probes", "by_method", "totals",
  "main_boundary", "programme", "instructions", "justification", "caution"}`` (each
  probe with its ``warnings``) (``probewise.app.schedule.schedule_json``);
- csv, geojson, gpkg: the probe list as ``probewise export --what schedule`` writes it
  (a GeoPackage needs ``-o``).

Output goes to stdout unless ``-o`` names a file; notes go to stderr.
"""

from __future__ import annotations

import argparse
import io
import json
import sys
import textwrap
from datetime import date

from probewise.caution import CAUTION_LINE
from probewise.errors import InputError

FORMATS = ("text", "csv", "geojson", "gpkg", "json", "lab-csv")  # lab-csv: lab testing schedule
WIDTH = 96  # wrap of the prose in the text schedule


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", metavar="MODEL", help="model file (JSON, schema probewise/1)")
    parser.add_argument(
        "--layout",
        metavar="NAME",
        help="the layout to schedule (default: the best value, as the web page shows first)",
    )
    parser.add_argument("--format", choices=FORMATS, default="text", help="output format")
    parser.add_argument(
        "-o", "--output", metavar="OUT", help="file to write (default: standard output)"
    )


# ---------------------------------------------------------------- text


def _num(value: float, digits: int) -> str:
    return f"{value:,.{digits}f}"


def _money(value: float) -> str:
    return f"{value:,.0f}"


def _wrap(text: str) -> str:
    return textwrap.fill(text, WIDTH, break_on_hyphens=False)


def schedule_text(schedule, today: str) -> str:
    """The schedule as plain text for a printer: header, probes, methods, totals, why, caution."""
    parts = _header_lines(schedule, today)
    parts += _probe_lines(schedule)
    parts += _method_lines(schedule)
    parts += _programme_lines(schedule)
    parts += _totals_lines(schedule, today)
    return "\n".join(parts)


def _currency_suffix(schedule) -> str:
    return f" ({schedule.currency})" if schedule.currency else ""


def _header_lines(schedule, today: str) -> list[str]:
    coordinates = f"metres, {schedule.crs}" if schedule.crs else "metres, local site grid"
    header = [
        "SCOPING SCHEDULE OF GROUND INVESTIGATION",
        "",
        f"Project:      {schedule.project_name}",
        f"Layout:       {schedule.layout_name}",
        f"Date:         {today}",
        f"Coordinates:  {coordinates}",
    ]
    if schedule.currency:
        header.append(f"Costs in:     {schedule.currency} (estimates, not quotations)")
    return [*header, "", _wrap(schedule.caution), ""]


def _probe_lines(schedule) -> list[str]:
    x_name, y_name = ("Easting", "Northing") if schedule.crs else ("X", "Y")
    probe_rows = [
        [
            row["id"],
            row["method"],
            _num(row["x"], 1),
            _num(row["y"], 1),
            _num(row["depth_m"], 1) + (" r" if row["id"] in schedule.refusals else "  "),
            _money(row["cost"]),
            "; ".join(f"{u}*" if u == row["target"] else u for u in row["observes"])
            or "none expected",
        ]
        for row in schedule.probes
    ]
    probe_headers = [
        "Probe",
        "Method",
        f"{x_name} (m)",
        f"{y_name} (m)",
        "Target depth (m)",
        f"Est. cost{_currency_suffix(schedule)}",
        "Expected to reveal the base of",
    ]
    left = {0, 1, 6}
    if any("target_level_m" in row for row in schedule.probes):  # the model has a ground level
        for line, row in zip(probe_rows, schedule.probes, strict=True):
            line.insert(5, _num(row["target_level_m"], 2))
        probe_headers.insert(5, "Target level (m)")
        left = {0, 1, 7}
    parts = ["PROBES", ""]
    if probe_rows:
        parts += [
            wrapped_table(probe_headers, probe_rows, left=left),
            "",
            _wrap(
                "Target depth: the P95 depth of the deepest boundary of interest the method can "
                "reach, plus its embedment, capped by its maximum depth and by refusal (r: "
                "expected to stop on a unit it cannot penetrate); a depth set on the layout is "
                "used as given. *: the boundary the depth was planned for. Estimated cost per "
                "probe: its own items (location, service clearance, reinstatement, metres, "
                "pre-drilling, its rig-days' traffic management and supervision) with "
                "contingency; mobilisation, standing time and reporting are counted below."
            ),
        ]
        warned = [row for row in schedule.probes if row.get("warnings")]
        if warned:  # probewise.app.schedule_warnings, as on the printed schedule
            parts += ["", "Warnings:"]
            parts += [_wrap(f"  {row['id']}: {'; '.join(row['warnings'])}") for row in warned]
    else:
        parts.append("This layout has no probes.")
    return parts


def _method_lines(schedule) -> list[str]:
    from probewise.commands.tables import format_table

    t = schedule.totals
    method_rows = [
        [
            m.id,
            m.name,
            str(m.count),
            _num(m.metres, 1),
            _money(m.mobilisation),
            _money(m.locations_cost),
            _money(m.metres_cost),
            _money(m.cost),
            _num(m.duration_days, 1),
            f"{m.metres_per_day:g}",
        ]
        for m in schedule.methods
    ]
    method_rows.append(
        [
            "Total",
            "",
            str(t.probes),
            _num(t.metres, 1),
            _money(t.mobilisation),
            _money(t.locations_cost),
            _money(t.metres_cost),
            _money(t.cost),
            _num(sum(m.duration_days for m in schedule.methods), 1),
            "",
        ]
    )
    method_headers = [
        "Method",
        "Name",
        "Probes",
        "Metres",
        "Mobilisation",
        "Locations",
        "Metres probed",
        f"Total{_currency_suffix(schedule)}",
        "Rig-days",
        "m/day",
    ]
    return [
        "",
        "COST AND DURATION BY METHOD",
        "",
        format_table(method_headers, method_rows, left=2),
        "",
        _wrap(
            "Rig-days: probing, pre-drilling and moves of each method; Total: each method's "
            "share with contingency (the layout's total adds reporting). Rates and prices are "
            "the project's own figures, not quotations."
        ),
    ]


def _programme_lines(schedule) -> list[str]:
    """Cost by item, the rigs' programme and each probe's warnings."""
    from probewise.commands.tables import format_table

    view = schedule.programme
    if view is None or not view.lines:
        return []
    costs = [[row.label, _money(row.amount)] for row in view.costs]
    costs.append(["Total", _money(view.cost)])
    lines = [
        [
            line.method,
            str(line.probes),
            str(line.rigs),
            _num(line.move_days, 2),
            _num(line.predrill_m, 1),
            _num(line.rig_days, 1),
            _num(line.line_days, 1),
        ]
        for line in view.lines
    ]
    heads = ["Method", "Probes", "Rigs", "Move days", "Pre-drilled m", "Rig-days", "Days"]
    parts = ["", "COST BY ITEM", "", format_table(["Item", "Amount"], costs, left=1)]
    parts += ["", "PROGRAMME", "", format_table(heads, lines, left=1), ""]
    parts.append(
        _wrap(
            f"{_num(view.calendar_days, 1)} calendar days (the longest method's line, rigs and "
            f"methods side by side); {_num(view.rig_days, 1)} rig-days."
        )
    )
    warned = [(row["id"], w) for row in schedule.probes for w in row.get("warnings") or []]
    if warned:
        parts += ["", "WARNINGS", ""]
        parts += [_wrap(f"{pid}: {text}") for pid, text in warned]
    return parts


def _totals_lines(schedule, today: str) -> list[str]:
    t = schedule.totals
    money = f"{schedule.currency} {_money(t.cost)}".strip()
    gain = f"{t.information_gain_bits:.2f} bits"
    return [
        "",
        "TOTALS",
        "",
        f"Probes:            {t.probes}",
        f"Probing:           {_num(t.metres, 1)} m",
        f"Estimated cost:    {money}, mobilisation {_money(t.mobilisation)} included",
        f"Fieldwork:         {_num(t.duration_days, 1)} calendar days"
        + (f" ({_num(schedule.programme.rig_days, 1)} rig-days)" if schedule.programme else ""),
        f"Information gain:  {gain}" + ("" if t.pareto else " (not Pareto-efficient)"),
        "",
        "WHY THIS OPTION",
        "",
        _wrap(" ".join(schedule.justification)),
        "",
        _wrap(
            f"Prepared with probewise on {today}. Uncertainty figures come from the project's "
            "conceptual ground model and the existing probes; they are as good as those inputs."
        ),
        "",
        _wrap(schedule.caution),
    ]


def pack_items(text: str, width: int) -> list[str]:
    """A "; "-separated list on lines of at most ``width`` where it can, never splitting an
    item (a unit's name stays on one line)."""
    lines: list[str] = []
    for item in text.split("; "):
        if lines and len(lines[-1]) + 2 + len(item) + 1 <= width:
            lines[-1] += f"; {item}"
        else:
            if lines:
                lines[-1] += ";"
            lines.append(item)
    return lines or [""]


def wrapped_table(headers: list[str], rows: list[list[str]], left: set[int]) -> str:
    """An aligned table, columns in ``left`` left-aligned, the others right; the last column
    (a "; "-separated list) goes on over continuation lines to fit ``WIDTH`` where it can."""
    cells = [headers, *rows]
    widths = [max(len(r[c]) for r in cells) for c in range(len(headers))]
    room = WIDTH - sum(widths[:-1]) - 2 * (len(widths) - 1)
    widths[-1] = min(widths[-1], max(room, 24, len(headers[-1])))

    def lines(row: list[str]) -> list[str]:
        tail = pack_items(row[-1], widths[-1])
        first = [*row[:-1], tail[0]]
        out = [
            "  ".join(
                v.ljust(w) if c in left else v.rjust(w)
                for c, (v, w) in enumerate(zip(first, widths, strict=True))
            ).rstrip()
        ]
        indent = " " * (sum(widths[:-1]) + 2 * (len(widths) - 1))
        out += [indent + more for more in tail[1:]]
        return out

    rule = "  ".join("-" * w for w in widths)
    body = [line for row in rows for line in lines(row)]
    return "\n".join([*lines(headers), rule, *body])


# ---------------------------------------------------------------- the command


def _check_layout(project, name: str | None) -> None:
    from probewise.app.project import find_layout

    if not project.layouts:
        raise InputError("layouts", "the model has no layout to schedule")
    if name is not None:
        find_layout(project, name, "--layout")


def _emit(text: str, out: str | None) -> None:
    if out is None:
        sys.stdout.write(text)
    else:
        from probewise.io.exports import write_text_file

        write_text_file(text, out)


def run(args: argparse.Namespace) -> int:
    from probewise.app.project import load_project
    from probewise.app.schedule import build_schedule, evaluator_of, schedule_json
    from probewise.io import exports

    if args.format == "gpkg" and not args.output:
        raise InputError("-o", "a GeoPackage is a file: name it with -o OUT")
    _, project = load_project(args.model)
    _check_layout(project, args.layout)
    evaluator = evaluator_of(project)
    if evaluator.grid_notice:
        sys.stderr.write(f"notice: {evaluator.grid_notice}\n")
    schedule = build_schedule(project, args.layout, evaluator=evaluator)
    today = date.today().isoformat()
    rows = list(schedule.probes)
    notes: list[str] = []

    if args.format == "text":
        _emit(schedule_text(schedule, today) + "\n", args.output)
    elif args.format == "json":
        document = {**schedule_json(schedule), "date": today}
        _emit(
            json.dumps(document, indent=1, ensure_ascii=False, allow_nan=False) + "\n", args.output
        )
    elif args.format == "csv":
        buffer = io.StringIO()
        exports.write_schedule_csv(rows, buffer)
        _emit(buffer.getvalue(), args.output)
    elif args.format == "lab-csv":
        from probewise.app.lab_schedule import LAB_COLUMNS, lab_needs, lab_rows

        layout = next(lay for lay in project.layouts if lay.name == schedule.layout_name)
        analysis = evaluator.analysis
        buffer = io.StringIO()
        exports.write_lab_csv(
            lab_rows(lab_needs(analysis, analysis.plan(layout))), LAB_COLUMNS, buffer
        )
        _emit(buffer.getvalue(), args.output)
    elif args.format == "geojson":
        document = exports.write_schedule_geojson(rows, project.crs)
        document["name"] = f"{schedule.project_name}: {schedule.layout_name}"
        _emit(
            json.dumps(document, indent=1, ensure_ascii=False, allow_nan=False) + "\n", args.output
        )
        if not project.crs:
            notes.append(f"GeoJSON {exports.NO_CRS_NOTE}")
    else:
        notes += exports.write_schedule_gpkg(rows, project.crs, args.output)

    if args.output:
        # the file is written; say what went where (stdout is free)
        print(
            f"wrote the {args.format} schedule of layout {schedule.layout_name!r} "
            f"({len(rows)} probes) to {args.output}"
        )
        for note in notes:
            print(f"note: {note}")
        if args.format in ("csv", "gpkg", "lab-csv"):
            print(CAUTION_LINE)
    else:
        for note in notes:
            sys.stderr.write(f"note: {note}\n")
        if args.format in ("csv", "lab-csv"):
            sys.stderr.write(f"{CAUTION_LINE}\n")
    return 0
