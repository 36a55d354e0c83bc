"""`probewise thickness MODEL [--json]`: each unit's thickness in the model's existing probes.

For every unit with a thickness: how many probes give its top and base, how many met it (the
share estimates the unit's ``presence``, docs/model.md "Locally present units"), min /
quartiles / max where met, a warning when one probe alone sets the max or min, and a range
suggested from P5 / median / P95 (server/app/thickness_stats.py). Nothing is written.
"""

from __future__ import annotations

import argparse
import json

from probewise.app.project import read_model


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", metavar="MODEL", help="model file (JSON, schema probewise/1)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")


def run(args: argparse.Namespace) -> int:
    from probewise.app.thickness_stats import unit_thicknesses
    from probewise.commands.import_probes import print_thickness_summary

    model = read_model(args.model)
    probes = model.get("existing") or []
    if args.json:
        units = [
            {
                "unit": s.unit,
                "holes": s.holes,
                "met": s.met,
                "presence": s.presence,
                "quantiles_m": list(s.quantiles_m) if s.quantiles_m else None,
                "mean_all_m": s.mean_all_m,
                "suggested": s.suggested,
                "warnings": s.warnings,
            }
            for s in unit_thicknesses(model, probes)
        ]
        print(json.dumps({"units": units}, indent=2))
        return 0
    print(f"{args.model}: {len(probes)} existing probe(s)")
    if not print_thickness_summary(model, probes):
        print("no existing probe gives the top and base of any unit")
    return 0
