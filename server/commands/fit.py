"""`probewise fit MODEL [--json] [-o OUT]`: the ground model fitted to the existing readings.

Maximum-likelihood spread multiplier, practical range, nugget and mean shift per unit, and
the thickness correlation of adjacent units where the readings can tell (docs/model.md,
"Fitting the model to the readings"), beside the conceptual values, with the log-likelihood
of both. With ``--json`` it prints the document of docs/model-file.md ("CLI output
contract"); ``-o OUT`` writes the model with the fit adopted to OUT.
"""

from __future__ import annotations

import argparse
import json
import sys

from probewise.app.fit import adopt_fit, fit_json, project_fit, range_sensitivity
from probewise.app.project import load_project, write_model
from probewise.caution import CAUTION_LINE
from probewise.commands.tables import format_table, num


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")
    parser.add_argument(
        "-o", "--output", metavar="OUT", help="write the model with the fit adopted to OUT"
    )
    parser.add_argument(
        "--sensitivity",
        action="store_true",
        help="also rank the model's layouts with every practical range x0.5 and x2",
    )


def fit_text(project, doc: dict) -> str:
    by_name = {u.name: u for u in project.ground.units}
    rows = []
    for u in doc["units"]:
        unit = by_name[u["name"]]
        rows.append(
            [
                u["name"],
                "yes" if u["fitted"] else "no (too few readings)",
                f"{unit.spread_multiplier:g} -> {u['spread_multiplier']:.2f}",
                f"{u['conceptual_range_m']:g} -> {u['range_m']:.0f}",
                f"{unit.correlation.nugget:g} -> {u['nugget']:.2f}",
                f"{unit.mean_shift_m:g} -> {u['mean_shift_m']:+.2f}",
            ]
        )
    headers = ["Unit", "Fitted", "Spread x", "Range (m)", "Nugget", "Mean shift (m)"]
    parts = ["Ground model fitted to the existing readings (conceptual -> fitted)"]
    parts.append(format_table(headers, rows))
    if doc["thickness_correlation"]:
        parts.append("")
        parts.append("Thickness correlation")
        for p in doc["thickness_correlation"]:
            parts.append(f"  {p['units'][0]} / {p['units'][1]}: {p['rho']:+.2f}")
    parts += [
        "",
        f"Log-likelihood: conceptual {num(doc['log_likelihood_conceptual'])}, "
        f"fitted {num(doc['log_likelihood'])}",
    ]
    parts += [f"Warning: {w}" for w in doc["warnings"]]
    if "sensitivity" in doc:
        sens = doc["sensitivity"]
        parts += ["", "Best layout (gain per cost) with every practical range scaled"]
        parts += [f"  x{factor}: {name or '-'}" for factor, name in sens["best"].items()]
        parts.append("  the best layout holds" if sens["holds"] else "  the best layout changes")
    parts += ["", CAUTION_LINE]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    model, project = load_project(args.model)
    doc = fit_json(project, project_fit(project))
    if args.sensitivity:
        doc["sensitivity"] = range_sensitivity(project)
    if args.output:
        write_model(adopt_fit(model, doc), args.output)
    if args.json:
        sys.stdout.write(json.dumps(doc, allow_nan=False) + "\n")
    else:
        sys.stdout.write(fit_text(project, doc) + "\n")
    return 0
