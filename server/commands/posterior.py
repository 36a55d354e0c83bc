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
import sys

from probewise.commands.options import add_point_arguments, points_of


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    add_point_arguments(parser)
    parser.add_argument("--layout", metavar="NAME", help="add this layout's planned probes")
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")


def posterior_json(names: tuple[str, ...], post, ground_level_m=None) -> dict:
    """The ``--json`` document; ``p50_m`` is the truncated-posterior median; with a ground
    level, ``level_m`` (ground level at the point) and each boundary's ``mean_level_m``."""
    from probewise.core.bounds import truncated_quantiles

    p50 = truncated_quantiles(post.mean_m, post.std_m, post.lo_m, post.hi_m, 0.5)
    points = []
    for i, (x, y) in enumerate(post.xy):
        boundaries = {}
        for k, name in enumerate(names):
            entry = {
                "prior_mean_m": float(post.prior_mean_m[i, k]),
                "prior_std_m": float(post.prior_std_m[i, k]),
                "mean_m": float(post.mean_m[i, k]),
                "std_m": float(post.std_m[i, k]),
                "p05_m": float(post.p05_m[i, k]),
                "p50_m": float(p50[i, k]),
                "p95_m": float(post.p95_m[i, k]),
            }
            if ground_level_m is not None:
                entry["mean_level_m"] = float(ground_level_m[i] - post.mean_m[i, k])
            boundaries[name] = entry
        point = {"x": float(x), "y": float(y), "boundaries": boundaries}
        if ground_level_m is not None:
            point["level_m"] = float(ground_level_m[i])
        points.append(point)
    return {"points": points}


def posterior_text(names, post, inside, layout_name: str | None, ground_level_m=None) -> str:
    from probewise.caution import CAUTION_LINE
    from probewise.commands.tables import format_table

    given = f"existing probes and layout '{layout_name}'" if layout_name else "existing probes"
    parts = [f"Boundary depths (m below ground level) given {given}"]
    headers = ["Base of"] + [
        f"{h} (m)" for h in ("Prior mean", "Prior std", "Mean", "Std", "P5", "P95")
    ]
    for i, (x, y) in enumerate(post.xy):
        where = "" if inside[i] else "  (outside the site)"
        if ground_level_m is not None:
            where = f", ground level {ground_level_m[i]:.2f} m{where}"
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
        heads = headers
        if ground_level_m is not None:  # the level of the posterior mean beside the depths
            heads = [*headers, "Mean level (m)"]
            for k, row in enumerate(rows):
                row.append(f"{ground_level_m[i] - post.mean_m[i, k]:.2f}")
        parts += ["", f"Point X {x:.2f} m, Y {y:.2f} m{where}", format_table(heads, rows)]
    parts += ["", CAUTION_LINE]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    import numpy as np

    from probewise.app.levels import ground_levels
    from probewise.app.project import find_layout, load_project
    from probewise.core.analysis import ProjectAnalysis
    from probewise.core.bounds import BoundsConflictError
    from probewise.core.geometry import points_in_polygon
    from probewise.errors import InputError

    points = points_of(args)
    _, project = load_project(args.model)
    analysis = ProjectAnalysis(project)
    layout = None if args.layout is None else find_layout(project, args.layout, "--layout")
    xy = np.array(points, dtype=float)
    try:
        post = analysis.at_points(xy, layout)
    except BoundsConflictError as exc:  # a history bound at a point off the checked grid
        raise InputError(exc.field, exc.problem) from None
    names = project.ground.boundary_names
    if args.json:
        doc = posterior_json(names, post, ground_levels(project, xy))
        sys.stdout.write(json.dumps(doc, allow_nan=False) + "\n")
    else:
        inside = points_in_polygon(analysis.to_local(xy), project.site.outline, analysis.origin)
        text = posterior_text(names, post, inside, args.layout, ground_levels(project, xy))
        sys.stdout.write(text + "\n")
    return 0
