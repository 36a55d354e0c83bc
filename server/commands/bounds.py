"""`probewise bounds MODEL --at X,Y [--at X,Y ...] [--json]`.

The hard bounds on every boundary depth in force at points after every rule (sums of unit
ranges, user bounds, site history), with their sources; on a boundary a history rule bounds,
the former surface band and the settlement range there. With a ground level, the bounds are
also given as levels (the maximum and minimum potential levels). ``--json`` prints the
document of docs/model-file.md ("CLI output contract").
"""

from __future__ import annotations

import argparse
import json
import sys

from probewise.commands.options import add_point_arguments, points_of


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    add_point_arguments(parser)
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")


def _m(value) -> str:
    return "-" if value is None else f"{value:.2f}"


def bounds_text(doc: dict) -> str:
    from probewise.caution import CAUTION_LINE
    from probewise.commands.tables import format_table

    parts = ["Hard bounds on boundary depths (m below ground level) and their sources"]
    headers = ["Base of", "Min depth", "Max depth", "Former level", "Settlement"]
    for point in doc["points"]:
        gl = point.get("ground_level_m")
        where = f"Point X {point['x']:.2f} m, Y {point['y']:.2f} m"
        if gl is not None:
            where += f", ground level {gl:.2f} m"
            headers_now = headers[:3] + ["Max level", "Min level"] + headers[3:]
        else:
            headers_now = headers
        rows = []
        for name, b in point["boundaries"].items():
            former = settle = ""
            if b.get("former_level_min_m") is not None:
                former = f"{_m(b['former_level_min_m'])} to {_m(b['former_level_max_m'])}"
                settle = f"{_m(b['settlement_min_m'])} to {_m(b['settlement_max_m'])}"
            row = [name, f"{b['min_depth_m']:.2f}", f"{b['max_depth_m']:.2f}"]
            if gl is not None:
                row += [f"{b['max_level_m']:.2f}", f"{b['min_level_m']:.2f}"]
            rows.append(row + [former, settle])
        parts += ["", where, format_table(headers_now, rows), "Sources:"]
        parts += [f"  {name}: {'; '.join(b['sources'])}" for name, b in point["boundaries"].items()]
    parts += ["", CAUTION_LINE]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    import numpy as np

    from probewise.app.levels import bounds_json
    from probewise.app.project import load_project

    points = points_of(args)
    _, project = load_project(args.model)
    doc = bounds_json(project, np.array(points, dtype=float))
    if args.json:
        sys.stdout.write(json.dumps(doc, allow_nan=False) + "\n")
    else:
        sys.stdout.write(bounds_text(doc) + "\n")
    return 0
