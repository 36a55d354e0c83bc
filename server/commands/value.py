"""`probewise value MODEL [--layout NAME ...] [--json]`: what each layout is worth in money.

For the model's design elements (docs/model.md "The value of an investigation"): the design
cost now, the expected design cost after each layout's readings, the expected saving and the
net value (saving less the investigation's cost). With ``--json`` it prints exactly the
document of docs/model-file.md ("CLI output contract"); without, readable tables.
"""

from __future__ import annotations

import argparse
import json
import sys

from probewise.app.contract import value_json
from probewise.app.project import find_layout, load_project
from probewise.caution import CAUTION_LINE
from probewise.commands.tables import format_table, num


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument(
        "--layout",
        action="append",
        metavar="NAME",
        help="a layout to value (repeat for more; default: every layout)",
    )
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")


def _percent(p: float | None) -> str:
    return "-" if p is None else f"{100 * p:.1f}%"


def value_text(report) -> str:
    """The report as readable tables, with the currency and the caution."""
    cur = f" ({report.currency})" if report.currency else ""
    parts = [
        "Design elements now (existing probes only)",
        format_table(
            ["Element", "Cells", f"Cost now{cur}"],
            [[name, str(cells), num(cost, 0)] for name, cells, cost in report.elements],
        ),
    ]
    rows = [
        [
            v.name,
            num(v.gi_cost, 0),
            num(v.design_cost_now, 0),
            num(v.design_cost_expected, 0),
            num(v.expected_saving, 0),
            num(v.net_value, 0),
        ]
        for v in report.layouts
    ]
    headers = [
        "Layout",
        f"GI cost{cur}",
        "Design cost now",
        "Expected after",
        "Expected saving",
        "Net value",
    ]
    parts += ["", "Layouts", format_table(headers, rows) if rows else "(no layouts)"]
    for v in report.layouts:
        element_rows = [
            [
                e.name,
                e.kind,
                num(e.cost_now, 0),
                num(e.cost_expected, 0),
                num(e.expected_saving, 0),
                _percent(e.p_cheaper_allowed),
            ]
            for e in v.elements
        ]
        parts += [
            "",
            f"Layout: {v.name}",
            format_table(
                ["Element", "Kind", "Cost now", "Expected after", "Saving", "P(cheaper)"],
                element_rows,
                left=2,
            ),
        ]
    parts += [
        "",
        "Expected figures average over the readings the layout may return; a choice element's "
        "saving can be negative (the readings may overturn a design now thought acceptable).",
        CAUTION_LINE,
    ]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    from probewise.app.value import project_values

    _, project = load_project(args.model)
    layouts = None
    if args.layout:
        layouts = [find_layout(project, name) for name in dict.fromkeys(args.layout)]
    report = project_values(project, layouts)
    if report.grid_notice:
        sys.stderr.write(f"notice: {report.grid_notice}\n")
    if args.json:
        sys.stdout.write(json.dumps(value_json(report), allow_nan=False) + "\n")
    else:
        sys.stdout.write(value_text(report) + "\n")
    return 0
