"""`probewise import-gis MODEL FILE --role ROLE -o OUT`: site geometry from a GIS file.

FILE is a GeoJSON, a GeoPackage (choose the layer with ``--layer``) or a zipped Shapefile.
ROLE is site (the outline: the union of the features, always replacing the current one),
zones, areas (areas of interest, weight from ``--weight-column``, else 1) or exclusions
(added to the current ones unless ``--replace``). Data are reprojected into the project CRS.
ROLE ground-level reads surveyed ground-level points (a point layer with a level attribute,
``--level-column``, or a CSV table of x, y, level) and replaces the model's ground level
(docs/import-formats.md "Ground-level points"); ``--datum`` names its datum.
A project without a CRS (local site grid) takes data in a projected CRS only with
``--as-local``, or after ``--set-crs`` gives it one. ``--list-layers`` lists the layers.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from probewise.app.project import read_model, write_model
from probewise.errors import InputError

# The flag that sets each reader option a message calls for (probewise.errors.OptionNeededError).
OPTION_FLAGS = {
    "layer": "--layer",
    "repair": "--repair",
    "source_crs_override": "--source-crs",
    "assume_local": "--as-local",
}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", metavar="MODEL", help="model file (JSON, schema probewise/1)")
    parser.add_argument(
        "file",
        metavar="FILE",
        help=".geojson, .gpkg or zipped Shapefile .zip (.csv too for ground-level points)",
    )
    parser.add_argument(
        "--role",
        choices=("site", "zones", "areas", "exclusions", "ground-level"),
        help="what the polygons are, or ground-level for surveyed ground-level points",
    )
    parser.add_argument(
        "--level-column", metavar="C", help="ground-level points: column with the levels"
    )
    parser.add_argument("--datum", metavar="D", help="ground-level points: the datum's name")
    parser.add_argument("--layer", metavar="L", help="layer of a GeoPackage (or .shp in a zip)")
    parser.add_argument("--list-layers", action="store_true", help="list the layers and stop")
    parser.add_argument("--name-column", metavar="C", help='column with names (default "name")')
    parser.add_argument("--weight-column", metavar="C", help="column with area weights (> 0)")
    parser.add_argument(
        "--repair", action="store_true", help="repair invalid polygons with shapely make_valid"
    )
    parser.add_argument(
        "--replace", action="store_true", help="replace the zones/areas/exclusions, not add"
    )
    parser.add_argument(
        "--source-crs", metavar="CRS", help="CRS of the file's coordinates when it has none"
    )
    parser.add_argument(
        "--as-local",
        action="store_true",
        help="project without CRS: take projected coordinates as site-grid metres",
    )
    parser.add_argument(
        "--set-crs",
        metavar="EPSG:NNNN",
        help="give a project without CRS this projected CRS (its other coordinates are then "
        "read in it) and reproject the file into it",
    )
    parser.add_argument("-o", "--output", metavar="OUT", help="updated model file to write")


def run(args: argparse.Namespace) -> int:
    from probewise.errors import OptionNeededError
    from probewise.io.geo_io import (
        apply_polygons,
        check_project_crs,
        features_outside_site,
        list_layers,
        read_polygons,
    )

    if args.list_layers:
        for name in list_layers(args.file):
            print(name)
        return 0
    if not args.role:
        raise InputError("--role", "say what the polygons are: site, zones, areas or exclusions")
    if not args.output:
        raise InputError("-o", "give the model file to write (-o OUT)")
    if args.role == "ground-level":
        return run_ground_level(args)
    if args.weight_column and args.role != "areas":
        raise InputError("--weight-column", "weights belong to areas of interest (--role areas)")
    model = read_model(args.model)
    crs = model.get("crs")
    notes = []
    if args.set_crs:
        new_crs = check_project_crs(args.set_crs)
        if crs and crs != new_crs:
            raise InputError("--set-crs", f"the project already has CRS {crs}")
        if not crs:
            notes.append(
                f"project CRS set to {new_crs}: the model's other coordinates are now read in it"
            )
        crs = new_crs
        model = {**model, "crs": new_crs}
    if not Path(args.file).exists():
        raise InputError("FILE", f"file not found: {args.file}")
    try:
        features = read_polygons(
            args.file,
            filename=Path(args.file).name,
            layer=args.layer,
            target_crs=crs,
            source_crs_override=args.source_crs,
            name_column=args.name_column,
            weight_column=args.weight_column,
            repair=args.repair,
            assume_local=args.as_local,
        )
    except OptionNeededError as exc:
        raise InputError(exc.field, f"{exc.problem} ({OPTION_FLAGS[exc.option]})") from None
    mode = "replace" if args.replace or args.role == "site" else "append"
    updated = apply_polygons(model, args.role, features, mode=mode)
    if args.role != "site":
        outside = features_outside_site(updated, features)
        if outside:
            notes.append(f"outside the site outline: {', '.join(outside)}")
    write_model(updated, args.output)
    what = {"site": "site outline", "areas": "areas of interest"}.get(args.role, args.role)
    verb = "replaced" if mode == "replace" else "added to"
    print(
        f"read {len(features)} feature(s) from {Path(args.file).name}; {what} {verb}; "
        f"wrote {args.output}"
    )
    for note in notes:
        print(f"note: {note}")
    return 0


def run_ground_level(args: argparse.Namespace) -> int:
    """``--role ground-level``: the model's ground level becomes the file's surveyed points."""
    from probewise.errors import OptionNeededError
    from probewise.io.ground_points import apply_ground_points, read_points_file

    model = read_model(args.model)
    if not Path(args.file).exists():
        raise InputError("FILE", f"file not found: {args.file}")
    try:
        points = read_points_file(
            args.file,
            layer=args.layer,
            target_crs=model.get("crs"),
            level_column=args.level_column,
            source_crs_override=args.source_crs,
            assume_local=args.as_local,
        )
    except OptionNeededError as exc:
        raise InputError(exc.field, f"{exc.problem} ({OPTION_FLAGS[exc.option]})") from None
    write_model(apply_ground_points(model, points, args.datum), args.output)  # validates
    levels = [p["level_m"] for p in points]
    print(
        f"read {len(points)} ground-level point(s) from {Path(args.file).name} "
        f"(levels {min(levels):.2f} to {max(levels):.2f} m); ground level replaced; "
        f"wrote {args.output}"
    )
    return 0
