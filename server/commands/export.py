"""`probewise export MODEL --what schedule|posterior|model [--layout NAME] [--format F] -o OUT`.

- schedule: the probes of a layout with planned depth, target boundary, the boundaries each
  observes and its cost (mobilisation excluded), as CSV, GeoJSON (RFC 7946, WGS 84) or
  GeoPackage (point layer "schedule" in the project CRS);
- posterior: the posterior of every boundary on the evaluation grid (mean, std, P5, P50, P95,
  width), existing probes plus the layout if given, as CSV (one row per cell and boundary) or
  GeoPackage (one point layer per boundary);
- model: the validated model file itself (JSON).

The format comes from ``--format`` or the extension of OUT; the rows and grids come from
``probewise.app.outputs``.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from probewise.app.outputs import posterior_grid, schedule_probe_rows
from probewise.app.project import read_model, write_model
from probewise.caution import CAUTION_LINE
from probewise.errors import InputError

FORMATS = {
    "schedule": ("csv", "geojson", "gpkg"),
    "posterior": ("csv", "gpkg"),
    "model": ("json",),
}
SUFFIX_FORMATS = {".csv": "csv", ".geojson": "geojson", ".json": "json", ".gpkg": "gpkg"}


def output_format(given: str | None, out: str, what: str) -> str:
    """The output format: ``--format``, else the extension of OUT; checked against ``what``."""
    fmt = given or SUFFIX_FORMATS.get(Path(out).suffix.lower())
    if fmt is None:
        raise InputError("--format", f"cannot tell the format from {out!r}; give --format")
    if fmt not in FORMATS[what]:
        raise InputError("--format", f"{what} exports as {', '.join(FORMATS[what])}, not {fmt}")
    return fmt


# ---------------------------------------------------------------------------------------------
# Command


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", metavar="MODEL", help="model file (JSON, schema probewise/1)")
    parser.add_argument("--what", choices=sorted(FORMATS), required=True, help="what to export")
    parser.add_argument("--layout", metavar="NAME", help="the layout (needed for a schedule)")
    parser.add_argument(
        "--format",
        choices=("csv", "geojson", "gpkg", "json"),
        help="output format (default: from the extension of OUT)",
    )
    parser.add_argument(
        "--project-coordinates",
        action="store_true",
        help="GeoJSON in the project CRS (with a crs member) instead of WGS 84 lon/lat",
    )
    parser.add_argument("-o", "--output", metavar="OUT", required=True, help="file to write")


def run(args: argparse.Namespace) -> int:
    from probewise.io import exports

    model = read_model(args.model)
    fmt = output_format(args.format, args.output, args.what)
    crs = model.get("crs")
    notes: list[str] = []
    if args.what == "model":
        write_model(model, args.output)
        print(f"wrote the model file to {args.output}")
        return 0
    if args.what == "schedule":
        if not args.layout:
            raise InputError("--layout", "name the layout whose schedule to export")
        rows = schedule_probe_rows(model, args.layout)
        if fmt == "csv":
            exports.write_schedule_csv(rows, args.output)
        elif fmt == "geojson":
            doc = exports.write_schedule_geojson(rows, crs, rfc7946=not args.project_coordinates)
            exports.write_text_file(json.dumps(doc, indent=1, allow_nan=False) + "\n", args.output)
            if not crs:
                notes.append(f"GeoJSON {exports.NO_CRS_NOTE}")
        else:
            notes += exports.write_schedule_gpkg(rows, crs, args.output)
        print(f"wrote {len(rows)} probes of layout {args.layout!r} to {args.output}")
    else:
        xy, names, fields = posterior_grid(model, args.layout)
        if fmt == "csv":
            exports.write_posterior_grid_csv(xy, names, fields, args.output)
        else:
            notes += exports.write_posterior_grid_gpkg(xy, names, fields, crs, args.output)
        given = f"existing probes and layout {args.layout!r}" if args.layout else "existing probes"
        print(
            f"wrote the posterior of {len(names)} boundaries at {len(xy)} grid cells "
            f"({given}) to {args.output}"
        )
    for note in notes:
        print(f"note: {note}")
    print(CAUTION_LINE)
    return 0
