"""`probewise behaviour MODEL --base-of UNIT [--seed N] [--json]`: does the potential band of a
boundary bounded by site history behave like the fill or like the natural ground?

With ``--json`` it prints the document of docs/model-file.md ("CLI output contract"):
``{"boundary", "domains": {"fill", "band", "natural", "left_out"}, "parameters": [{"name",
"unit", "n", "median", "mannwhitney_p", "ks_p", "verdict"}]}`` (plus optional extras). Without,
a table per parameter and the summary.
"""

from __future__ import annotations

import argparse
import json
import sys


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument(
        "--base-of",
        required=True,
        help="the unit whose base a site history rule bounds (the fill)",
    )
    parser.add_argument(
        "--seed", type=int, default=0, help="seed of the bootstrap intervals (default 0)"
    )
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")


def _p(value) -> str:
    return "-" if value is None else f"{value:.3g}"


def _m(value) -> str:
    return "-" if value is None else f"{value:.3g}"


def behaviour_text(doc: dict) -> str:
    from probewise.caution import CAUTION_LINE
    from probewise.commands.tables import format_table

    d = doc["domains"]
    parts = [
        f"Behaviour of the potential band of the base of {doc['boundary']}",
        f"Readings: fill {d['fill']}, band {d['band']}, natural {d['natural']}, "
        f"left out {d['left_out']} (probes without a history bound)",
        "",
    ]
    headers = [
        "Parameter",
        "Unit",
        "n fill/band/nat",
        "Median fill",
        "Median band",
        "Median nat",
        "MW p band-fill",
        "MW p band-nat",
        "KS p band-fill",
        "KS p band-nat",
        "Verdict",
    ]
    rows = []
    for p in doc["parameters"]:
        n, med = p["n"], p["median"]
        rows.append(
            [
                p["name"],
                p["unit"],
                f"{n['fill']}/{n['band']}/{n['natural']}",
                _m(med["fill"]),
                _m(med["band"]),
                _m(med["natural"]),
                _p(p["mannwhitney_p"]["band_vs_fill"]),
                _p(p["mannwhitney_p"]["band_vs_natural"]),
                _p(p["ks_p"]["band_vs_fill"]),
                _p(p["ks_p"]["band_vs_natural"]),
                p["verdict"],
            ]
        )
    parts.append(format_table(headers, rows) if rows else "(no test results on the probes)")
    parts += ["", "Stresses for the derived indices:"]
    parts += [f"  {s}" for s in doc["settings"]]
    parts += [""] + doc["summary"] + ["", CAUTION_LINE]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    from probewise.app.behaviour import behaviour_json, behaviour_report
    from probewise.app.project import load_project

    model, project = load_project(args.model)
    doc = behaviour_json(behaviour_report(model, project, args.base_of, seed=args.seed))
    if args.json:
        sys.stdout.write(json.dumps(doc, allow_nan=False) + "\n")
    else:
        sys.stdout.write(behaviour_text(doc) + "\n")
    return 0
