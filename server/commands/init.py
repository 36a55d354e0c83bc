"""`probewise init NAME [--template T] [--crs EPSG:N] [--currency C] [--box X0,Y0,X1,Y1] -o OUT`.

Writes a new model file to start a project from nothing: the named starting point (blank, or a
template for a kind of structure with invented rates), the outline as a box (default: a 100 m
square at the origin, to be replaced by the real outline), and an evaluation grid of about
2,500 cells.
"""

from __future__ import annotations

import argparse
import math

from probewise.app.new_project import STARTING_POINTS, new_model, square_outline
from probewise.app.project import write_model
from probewise.errors import InputError


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("name", metavar="NAME", help="the project's name")
    parser.add_argument(
        "--template",
        default="blank",
        choices=sorted(STARTING_POINTS),
        help="starting point: blank, or a kind of structure with invented rates (default blank)",
    )
    parser.add_argument(
        "--crs", metavar="EPSG:N", help="projected CRS in metres (default: site grid)"
    )
    parser.add_argument("--currency", default="", help="currency label, e.g. GBP")
    parser.add_argument(
        "--box", metavar="X0,Y0,X1,Y1", help="outline as a rectangle (default: a 100 m square)"
    )
    parser.add_argument("-o", "--output", metavar="OUT", required=True, help="model file to write")


def parse_box(text: str | None) -> dict | None:
    """``X0,Y0,X1,Y1`` -> a rectangle Polygon; InputError naming --box."""
    if text is None:
        return None
    parts = [p.strip() for p in text.split(",")]
    try:
        x0, y0, x1, y1 = (float(p) for p in parts)
    except ValueError:
        raise InputError("--box", f"expected four numbers X0,Y0,X1,Y1, got {text!r}") from None
    if not all(math.isfinite(v) for v in (x0, y0, x1, y1)):
        raise InputError("--box", "the corners must be finite numbers")
    if x1 <= x0 or y1 <= y0:
        raise InputError("--box", "X1 must exceed X0 and Y1 must exceed Y0")
    outline = square_outline(x0, y0, 1.0)
    outline["coordinates"][0] = [[x0, y0], [x1, y0], [x1, y1], [x0, y1], [x0, y0]]
    return outline


def run(args: argparse.Namespace) -> int:
    model = new_model(
        args.name,
        crs=args.crs,
        currency=args.currency,
        outline=parse_box(args.box),
        start=args.template,
    )
    write_model(model, args.output)
    point = STARTING_POINTS[args.template]
    print(
        f"wrote {args.output}: project {model['name']!r} from the starting point "
        f"{point.label!r} ({len(model['units'])} units, {len(model['methods'])} methods, "
        f"grid {model['grid_spacing_m']:g} m)"
    )
    return 0
