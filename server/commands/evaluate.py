"""`probewise evaluate MODEL [--json]`: cost, duration and information gain of every layout.

With ``--json`` it prints exactly the document of docs/model-file.md ("CLI output contract"):
``{"baseline": <metrics>, "layouts": [<metrics> + name, cost, metres, duration_days,
information_gain_bits, gain_per_cost, pareto, probes]}``, plus an optional ``"notice"`` when
the evaluation grid was coarsened (too many cells); the notice is also printed on stderr.
When the model has design elements each layout also carries ``expected_saving`` and
``net_value`` (``probewise value`` gives the detail); when it has requirements,
``requirements_met`` and ``unmet`` (in words).
Without ``--json``, readable tables.
"""

from __future__ import annotations

import argparse
import json
import sys

from probewise.app.contract import evaluation_json
from probewise.app.project import load_project
from probewise.app.requirements import statuses_json, statuses_text
from probewise.caution import CAUTION_LINE
from probewise.commands.tables import format_table, num, probe_table


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")


def _boundary_table(boundaries: dict) -> str:
    rows = [
        [
            name,
            num(m.std_mean_m),
            num(m.width90_mean_m),
            num(m.uncertain_volume_m3, 0),
            "-" if m.confident_fraction is None else f"{100 * m.confident_fraction:.0f}%",
        ]
        for name, m in boundaries.items()
    ]
    headers = ["Base of", "Mean std (m)", "Mean P5-P95 (m)", "Uncertain vol. (m3)", "Confident"]
    return format_table(headers, rows)


def evaluation_text(evaluation, currency: str, values=None) -> str:
    cur = f" ({currency})" if currency else ""
    grid = evaluation.grid
    parts = [
        f"Evaluation grid: {grid.n_cells} cells of {grid.spacing_m:g} m",
        *([evaluation.conditioning.describe()] if evaluation.conditioning else []),
        "",
        "Baseline (existing probes only)",
        _boundary_table(evaluation.baseline.boundaries),
    ]
    rows = [
        [
            r.name,
            str(len(r.plans)),
            num(r.metres, 1),
            num(r.cost, 0),
            num(r.duration_days, 1),
            num(r.information_gain_bits, 3),
            "-" if r.gain_per_cost is None else f"{1000 * r.gain_per_cost:.4f}",
            "yes" if r.pareto else "no",
        ]
        for r in evaluation.layouts
    ]
    headers = [
        "Layout",
        "Probes",
        "Metres",
        f"Cost{cur}",
        "Calendar days",
        "Gain (bits)",
        f"Bits per 1000 {currency}".rstrip(),
        "Pareto",
    ]
    parts += ["", "Layouts", format_table(headers, rows) if rows else "(no layouts)"]
    if values is not None and values.layouts:
        money = [
            [v.name, num(v.gi_cost, 0), num(v.expected_saving, 0), num(v.net_value, 0)]
            for v in values.layouts
        ]
        heads = ["Layout", f"Cost{cur}", "Expected saving", "Net value"]
        parts += [
            "",
            "Value (design elements; probewise value for detail)",
            format_table(heads, money),
        ]
    names = evaluation.boundary_names
    for r in evaluation.layouts:
        parts += ["", f"Layout: {r.name}", _boundary_table(r.boundaries), ""]
        parts.append(probe_table(r.plans, names))
    parts += ["", CAUTION_LINE]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    from probewise.core.evaluate import evaluate_project
    from probewise.core.grid import EmptyGridError
    from probewise.core.options import layout_statuses
    from probewise.errors import InputError

    _, project = load_project(args.model)
    try:
        evaluation = evaluate_project(project)
    except EmptyGridError as exc:
        raise InputError("grid_spacing_m", str(exc)) from None
    if evaluation.grid_notice:
        sys.stderr.write(f"notice: {evaluation.grid_notice}\n")
    values = None
    if project.elements:
        from probewise.app.value import values_of_evaluation

        values = values_of_evaluation(project, evaluation)
    statuses = layout_statuses(project, None, evaluation.layouts)
    if args.json:
        doc = evaluation_json(evaluation, values)
        statuses_json(doc["layouts"], statuses)
        sys.stdout.write(json.dumps(doc, allow_nan=False) + "\n")
    else:
        text = evaluation_text(evaluation, project.currency, values)
        names = [r.name for r in evaluation.layouts]
        body, caution = text.rsplit("\n", 1)  # the caution stays last
        sys.stdout.write("\n".join([body, *statuses_text(names, statuses), "", caution]) + "\n")
    return 0
