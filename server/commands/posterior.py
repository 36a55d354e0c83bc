"""`probewise posterior MODEL [--layout NAME] --at X,Y [--at X,Y ...] [--json]`.

Boundary depths at points: prior mean and std, posterior mean and std (Gaussian), and the
P5/P95 of the truncated posterior. Without ``--layout`` only the existing probes condition
it; with one, the layout's planned probes reduce the uncertainty too (the mean stays where
the existing probes put it). Points outside the site are answered (and marked so in the table).
With ``--json`` it prints exactly the document of docs/model-file.md ("CLI output contract").
"""

from __future__ import annotations

import argparse
import json
import math
import sys


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument(
        "--at",
        action="append",
        default=[],
        metavar="X,Y",
        help="a point in project coordinates (m); repeat for more; write --at=-5,3 "
        "when X is negative",
    )
    parser.add_argument("--layout", metavar="NAME", help="add this layout's planned probes")
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")


def parse_point(text: str) -> tuple[float, float]:
    """``"X,Y"`` -> (x, y); InputError naming ``--at`` otherwise."""
    from server.errors import InputError

    parts = text.split(",")
    try:
        if len(parts) != 2:
            raise ValueError
        x, y = float(parts[0]), float(parts[1])
    except ValueError:
        raise InputError("--at", f"expected X,Y in metres, got {text!r}") from None
    if not (math.isfinite(x) and math.isfinite(y)):
        raise InputError("--at", f"coordinates must be finite numbers, got {text!r}")
    return x, y


def posterior_json(names: tuple[str, ...], post) -> dict:
    points = []
    for i, (x, y) in enumerate(post.xy):
        points.append(
            {
                "x": float(x),
                "y": float(y),
                "boundaries": {
                    name: {
                        "prior_mean_m": float(post.prior_mean_m[i, k]),
                        "prior_std_m": float(post.prior_std_m[i, k]),
                        "mean_m": float(post.mean_m[i, k]),
                        "std_m": float(post.std_m[i, k]),
                        "p05_m": float(post.p05_m[i, k]),
                        "p95_m": float(post.p95_m[i, k]),
                    }
                    for k, name in enumerate(names)
                },
            }
        )
    return {"points": points}


def posterior_text(names, post, inside, layout_name: str | None) -> str:
    from server.caution import CAUTION_LINE
    from server.commands.tables import format_table

    given = f"existing probes and layout '{layout_name}'" if layout_name else "existing probes"
    parts = [f"Boundary depths (m below ground level) given {given}"]
    headers = ["Base of"] + [
        f"{h} (m)" for h in ("Prior mean", "Prior std", "Mean", "Std", "P5", "P95")
    ]
    for i, (x, y) in enumerate(post.xy):
        where = "" if inside[i] else "  (outside the site)"
        rows = [
            [name]
            + [
                f"{a[i, k]:.2f}"
                for a in (
                    post.prior_mean_m,
                    post.prior_std_m,
                    post.mean_m,
                    post.std_m,
                    post.p05_m,
                    post.p95_m,
                )
            ]
            for k, name in enumerate(names)
        ]
        parts += ["", f"Point X {x:.2f} m, Y {y:.2f} m{where}", format_table(headers, rows)]
    parts += ["", CAUTION_LINE]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    import numpy as np

    from server.app.project import find_layout, load_project
    from server.core.analysis import ProjectAnalysis
    from server.core.geometry import points_in_polygon
    from server.errors import InputError

    points = [parse_point(t) for t in args.at]
    if not points:
        raise InputError("--at", "give at least one point as --at X,Y (metres)")
    _, project = load_project(args.model)
    analysis = ProjectAnalysis(project)
    layout = None if args.layout is None else find_layout(project, args.layout, "--layout")
    xy = np.array(points, dtype=float)
    post = analysis.at_points(xy, layout)
    names = project.ground.boundary_names
    if args.json:
        sys.stdout.write(json.dumps(posterior_json(names, post), allow_nan=False) + "\n")
    else:
        inside = points_in_polygon(analysis.to_local(xy), project.site.outline, analysis.origin)
        sys.stdout.write(posterior_text(names, post, inside, args.layout) + "\n")
    return 0
