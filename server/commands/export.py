"""`probewise export MODEL --what schedule|posterior|model [--layout NAME] [--format F] -o OUT`.

- schedule: the probes of a layout with planned depth, target boundary, the boundaries each
  observes and its cost (mobilisation excluded), as CSV, GeoJSON (RFC 7946, WGS 84) or
  GeoPackage (point layer "schedule" in the project CRS);
- posterior: the posterior of every boundary on the evaluation grid (mean, std, P5, P50, P95,
  width), existing probes plus the layout if given, as CSV (one row per cell and boundary) or
  GeoPackage (one point layer per boundary);
- model: the validated model file itself (JSON).

The format comes from ``--format`` or the extension of OUT. The few functions here that reach
into the core (``schedule_probe_rows``, ``posterior_grid``) are the only coupling to it.
Shared helpers for the import commands live here too (``read_model``, ``write_model``,
``parse_pairs``).
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from server.errors import InputError

FORMATS = {
    "schedule": ("csv", "geojson", "gpkg"),
    "posterior": ("csv", "gpkg"),
    "model": ("json",),
}
SUFFIX_FORMATS = {".csv": "csv", ".geojson": "geojson", ".json": "json", ".gpkg": "gpkg"}


# ---------------------------------------------------------------------------------------------
# Helpers shared with import-probes and import-gis


def read_model(path: str) -> dict:
    """Read and validate a model file (InputError naming MODEL on any fault)."""
    from server.model_file import load_model_file

    return load_model_file(path)


def write_model(model: dict, path: str) -> None:
    """Write a model file in canonical form (validated), replacing OUT only when complete."""
    from server.exports import write_text_file
    from server.model_file import dump_model

    write_text_file(dump_model(model), path)


def parse_pairs(items: list[str] | None, option: str) -> dict[str, str]:
    """``["A=B", ...]`` -> {"A": "B"}; the first "=" splits; InputError naming the option."""
    out: dict[str, str] = {}
    for item in items or []:
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            raise InputError(option, f"expected KEY=VALUE, got {item!r}")
        out[key.strip()] = value.strip()
    return out


def output_format(given: str | None, out: str, what: str) -> str:
    """The output format: ``--format``, else the extension of OUT; checked against ``what``."""
    fmt = given or SUFFIX_FORMATS.get(Path(out).suffix.lower())
    if fmt is None:
        raise InputError("--format", f"cannot tell the format from {out!r}; give --format")
    if fmt not in FORMATS[what]:
        raise InputError("--format", f"{what} exports as {', '.join(FORMATS[what])}, not {fmt}")
    return fmt


# ---------------------------------------------------------------------------------------------
# Adapters to the core


def _layout(analysis, project, name: str):
    try:
        return analysis.layout(name)
    except KeyError:
        known = ", ".join(repr(lay.name) for lay in project.layouts) or "(none)"
        raise InputError("--layout", f"no layout named {name!r}; layouts are: {known}") from None


def schedule_probe_rows(model: dict, layout_name: str) -> list[dict]:
    """The schedule rows of a layout (the same rows ``probewise schedule`` writes).

    Adapter to the core: planned depth and observed set against the existing probes
    (DESIGN.md "Planned depth", "Observed set").
    """
    from server.core.analysis import ProjectAnalysis
    from server.schedule import probe_rows
    from server.to_core import to_core

    project = to_core(model)
    analysis = ProjectAnalysis(project)
    layout = _layout(analysis, project, layout_name)
    if not layout.probes:
        raise InputError("--layout", f"layout {layout_name!r} has no probes")
    return probe_rows(project, analysis.plan(layout))


def posterior_grid(model: dict, layout_name: str | None):
    """(xy (n, 2) project coordinates, boundary names, fields {name: (n, B)}) on the grid.

    Adapter to the core: the evaluation grid of the site, conditioned on the existing probes
    and, when named, the layout's planned probes; each cell is the average of the depth over
    the cell (docs/model.md "Numbers reported for a layout"); P50 is the median of the
    truncated posterior, like P5 and P95.
    """

    from server.core.analysis import ProjectAnalysis
    from server.core.bounds import truncated_quantiles
    from server.core.grid import EmptyGridError, evaluation_grid
    from server.to_core import to_core

    project = to_core(model)
    analysis = ProjectAnalysis(project)
    layout = _layout(analysis, project, layout_name) if layout_name else None
    try:
        grid = evaluation_grid(project.site, analysis.origin)
    except EmptyGridError as exc:
        raise InputError("grid_spacing_m", str(exc)) from None
    post = analysis.at_cells(grid, layout)
    xy = post.xy
    p50 = truncated_quantiles(post.mean_m, post.std_m, post.lo_m, post.hi_m, 0.5)
    fields = {
        "mean_m": post.mean_m,
        "std_m": post.std_m,
        "p05_m": post.p05_m,
        "p50_m": p50,
        "p95_m": post.p95_m,
    }
    return xy, project.ground.boundary_names, fields


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
    from server import exports

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
    print(exports.CAUTION)
    return 0
