"""Site polygons in from GIS files: GeoJSON, GeoPackage and zipped Shapefile.

Reading goes through geopandas/pyogrio, reprojection through pyproj (``GeoDataFrame.to_crs``),
checks and repairs through shapely. Functions take and return plain model-file dicts and
never write a store; bad input raises ``InputError`` naming the file, feature or column.
Opening files (kinds, safe unzipping, layers) is ``probewise.io.gis_files``.

CRS rules, kept few so they can be explained on one screen:
- GeoJSON without a ``crs`` member is EPSG:4326 (RFC 7946); other files carry their own CRS,
  or the caller names it (``source_crs_override``).
- A project with a CRS takes data in any CRS and reprojects them into its own.
- A project without a CRS (local site grid) refuses data in a geographic CRS (set the project
  CRS first) and takes data in a projected CRS only when the caller says the coordinates are
  already site-grid metres (``assume_local=True``); data with no CRS are taken as they are.
"""

from __future__ import annotations

import copy
import math
from pathlib import Path
from typing import Any

from probewise.errors import InputError, OptionNeededError
from probewise.io.gis_files import (  # noqa: F401 - the file caps and layer listing, public here
    KIND_LABELS,
    MAX_FILE_BYTES,
    MAX_ZIP_BYTES,
    MAX_ZIP_FILES,
    choose_layer,
    first_line,
    layer_columns,
    layers_of,
    list_layers,
    open_dataset,
)
from probewise.numbers import read_number

ROLE_KEYS = {
    "site": "site",
    "zones": "zones",
    "areas": "areas_of_interest",
    "areas_of_interest": "areas_of_interest",
    "exclusions": "exclusions",
}

_POLYGONAL = ("Polygon", "MultiPolygon")


# ---------------------------------------------------------------------------------------------
# CRS helpers


def check_project_crs(text: str) -> str:
    """Normalise a project CRS to ``EPSG:NNNN``; it must be projected and in metres."""
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    try:
        crs = CRS.from_user_input(text)
    except CRSError:
        raise InputError("crs", f"'{text}' is not a CRS pyproj knows") from None
    _require_metric_projected(crs, "crs", text)
    code = crs.to_epsg()
    if code is None:
        raise InputError("crs", f"'{text}' has no EPSG code; give one as EPSG:NNNN")
    return f"EPSG:{code}"


def _require_metric_projected(crs: Any, field: str, text: str) -> None:
    if not crs.is_projected:
        raise InputError(
            field,
            f"{text} is a geographic CRS (degrees); probewise needs a projected CRS in metres",
        )
    if "pseudo-mercator" in (crs.name or "").lower():
        raise InputError(field, f"{text} (Web Mercator) distorts distances; use a local projection")
    units = {(a.unit_name or "").lower() for a in crs.axis_info[:2]}
    if not units <= {"metre", "meter", "m"}:
        raise InputError(field, f"{text} is in {', '.join(sorted(units))}, not metres")


def _crs_label(crs: Any) -> str:
    code = crs.to_epsg()
    return f"EPSG:{code}" if code else (crs.name or "an unnamed CRS")


# ---------------------------------------------------------------------------------------------
# Geometry checks


def _polygonal_part(geom: Any) -> Any:
    """The polygonal part of a geometry (make_valid can return lines and points too)."""
    import shapely

    if geom.geom_type in _POLYGONAL:
        return geom
    parts = [g for g in getattr(geom, "geoms", []) if g.geom_type in _POLYGONAL]
    if not parts:
        return None
    return shapely.union_all(parts)


def _checked_polygon(geom: Any, where: str, repair: bool, after: str = "") -> Any:
    """A valid 2-D Polygon/MultiPolygon, repaired on request, or InputError."""
    import shapely

    if geom is None or geom.is_empty:
        raise InputError(where, "has no geometry")
    geom = shapely.force_2d(geom)
    if geom.geom_type not in _POLYGONAL:
        raise InputError(where, f"is a {geom.geom_type}, not a polygon")
    if geom.is_valid:
        return geom
    reason = shapely.is_valid_reason(geom)
    if not repair:
        raise OptionNeededError(
            where, f"invalid polygon{after} ({reason}); repair it with shapely make_valid", "repair"
        )
    fixed = _polygonal_part(shapely.make_valid(geom))
    if fixed is None or fixed.is_empty:
        raise InputError(where, f"invalid polygon{after} ({reason}); make_valid left no area")
    return fixed


def geojson_of(geom: Any) -> dict:
    """A shapely geometry as a plain GeoJSON geometry dict (lists and floats only)."""
    from shapely.geometry import mapping

    def plain(v: Any) -> Any:
        if isinstance(v, list | tuple):
            return [plain(x) for x in v]
        return float(v)

    m = mapping(geom)
    return {"type": m["type"], "coordinates": plain(m["coordinates"])}


def _name_of(value: Any, default: str) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return default
    text = str(value).strip()
    return text or default


def _weight_of(value: Any, where: str) -> float:
    if (
        value is None
        or (isinstance(value, float) and math.isnan(value))
        or str(value).strip() == ""
    ):
        raise InputError(where, "empty; every area of interest needs a weight > 0")
    w = read_number(value, where)
    if w <= 0:
        raise InputError(where, f"{w:g} is not a weight > 0")
    return w


def _column(frame: Any, wanted: str, filename: str, purpose: str) -> str:
    columns = [c for c in frame.columns if c != frame.geometry.name]
    if wanted in columns:
        return wanted
    folded = [c for c in columns if str(c).lower() == wanted.lower()]
    if len(folded) == 1:
        return folded[0]
    raise InputError(
        f"{filename} column {wanted}",
        f"not found (wanted for the {purpose}); columns: {', '.join(map(str, columns)) or 'none'}",
    )


# ---------------------------------------------------------------------------------------------
# Reading


def read_polygons(
    path_or_bytes: str | Path | bytes,
    *,
    filename: str | None = None,
    layer: str | None = None,
    target_crs: str | None,
    source_crs_override: str | None = None,
    name_column: str | None = None,
    weight_column: str | None = None,
    repair: bool = False,
    assume_local: bool = False,
) -> list[dict]:
    """Polygons of one layer of a GIS file, checked and in the target (project) CRS.

    Returns ``[{"name", "geometry" (GeoJSON dict), "weight"?}]`` in file order; ``weight``
    only when ``weight_column`` is given. Feature numbers in messages count from 1 in file
    order. Names come from ``name_column``, else a column called "name", else "<layer> <n>".
    ``target_crs`` None means the project uses a local site grid (see the module notes).
    """
    import geopandas

    frame, filename, layer_name, kind = _read_layer(path_or_bytes, filename, layer)
    src, target = _source_and_target_crs(
        frame, filename, target_crs, source_crs_override, assume_local
    )

    # Per-feature checks in the source CRS, so a reported coordinate is one the user can find
    name_col, weight_col = _name_and_weight_columns(frame, filename, name_column, weight_column)
    wheres, geoms, names, weights = [], [], [], []
    for n, (fid, row) in enumerate(frame.iterrows(), start=1):
        where = f"{filename} feature {n}"
        if kind == "gpkg" and fid != n:
            where += f" (fid {fid})"
        wheres.append(where)
        geoms.append(_checked_polygon(row.geometry, where, repair))
        names.append(_name_of(row[name_col] if name_col else None, f"{layer_name} {n}"))
        if weight_col:
            weights.append(_weight_of(row[weight_col], f"{where}, column {weight_col}"))

    series = geopandas.GeoSeries(geoms, crs=src)
    if src is not None and target is not None and not src.equals(target):
        series = series.to_crs(target)

    out = []
    for i, geom in enumerate(series):
        if not all(math.isfinite(v) for v in geom.bounds):
            raise InputError(
                wheres[i], f"could not be transformed to {target_crs} (outside its area of use?)"
            )
        geom = _checked_polygon(geom, wheres[i], repair, after=" after reprojection")
        item: dict[str, Any] = {"name": names[i], "geometry": geojson_of(geom)}
        if weight_col:
            item["weight"] = weights[i]
        out.append(item)
    return out


def _read_layer(
    path_or_bytes: str | Path | bytes, filename: str | None, layer: str | None
) -> tuple[Any, str, str, str]:
    """(GeoDataFrame, file name, layer name, file kind) of the chosen layer; not empty."""
    import geopandas

    with open_dataset(path_or_bytes, filename) as (path, kind):
        filename = filename or Path(str(path_or_bytes)).name
        layers = layers_of(path, kind, filename)
        layer_name, layer_path = choose_layer(layers, layer, filename)
        read_layer = None if kind == "zip" else layer_name
        try:
            frame = geopandas.read_file(
                layer_path, layer=read_layer, engine="pyogrio", fid_as_index=kind == "gpkg"
            )
        except Exception as exc:
            label = KIND_LABELS["shp" if kind == "zip" else kind]
            raise InputError(filename, f"cannot be read as {label}: {first_line(exc)}") from None

    if len(frame) == 0:
        raise InputError(filename, f"layer {layer_name} has no features")
    return frame, filename, layer_name, kind


def _source_and_target_crs(
    frame: Any,
    filename: str,
    target_crs: str | None,
    source_crs_override: str | None,
    assume_local: bool,
) -> tuple[Any, Any]:
    """The source CRS (the file's or the override; None when unknown) and the target's
    (None: a local site grid); InputError or OptionNeededError when they cannot be paired."""
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    if source_crs_override:
        try:
            src = CRS.from_user_input(source_crs_override)
        except CRSError:
            raise InputError("source CRS", f"'{source_crs_override}' is not a CRS") from None
    else:
        src = frame.crs
    target = None
    if target_crs:
        try:
            target = CRS.from_user_input(target_crs)
        except CRSError:
            raise InputError("crs", f"'{target_crs}' is not a CRS pyproj knows") from None
        _require_metric_projected(target, "crs", target_crs)

    if src is None:
        if target is not None:
            raise OptionNeededError(
                filename,
                f"has no CRS; name the CRS of its coordinates, e.g. {target_crs}",
                "source_crs_override",
            )
    elif target is None:
        if src.is_geographic:
            raise InputError(
                filename,
                f"is in {_crs_label(src)}, a geographic CRS (degrees), and the project has no "
                "CRS (local site grid); set the project CRS (projected, metres) first",
            )
        if not assume_local:
            raise OptionNeededError(
                filename,
                f"is in {_crs_label(src)} and the project has no CRS (local site grid); set the "
                "project CRS first, or confirm the coordinates are site-grid metres",
                "assume_local",
            )
    return src, target


def _name_and_weight_columns(
    frame: Any, filename: str, name_column: str | None, weight_column: str | None
) -> tuple[Any, Any]:
    """The columns names and weights come from (None when there is none)."""
    name_col = None
    if name_column:
        name_col = _column(frame, name_column, filename, "names")
    else:
        named = [c for c in frame.columns if str(c).lower() == "name" and c != frame.geometry.name]
        name_col = named[0] if named else None
    weight_col = _column(frame, weight_column, filename, "weights") if weight_column else None
    return name_col, weight_col


# ---------------------------------------------------------------------------------------------
# Putting polygons into a model


def apply_polygons(
    model: dict, role: str, features: list[dict], mode: str = "replace", *, check: bool = True
) -> dict:
    """A new model with the features as its site, zones, areas of interest or exclusions.

    ``role``: site | zones | areas (areas_of_interest) | exclusions. ``mode``: replace | append.
    The site becomes the union of the features (a Polygon or MultiPolygon); appending to the
    site unions with the current outline. Zones, areas and exclusions are single Polygons in
    the model file, so a MultiPolygon feature becomes one entry per part ("name (part 2)").
    A zone starts with no unit overrides; an area without a weight gets weight 1.
    Names are made unique by a " (2)" suffix. ``check=False`` leaves the model check to the
    caller (a new outline whose outside parts the caller deals with first).
    """
    import shapely
    from shapely.geometry import shape

    from probewise.io.model_file import unique_name

    if role not in ROLE_KEYS:
        raise InputError("role", f"'{role}' is not one of site, zones, areas, exclusions")
    if mode not in ("replace", "append"):
        raise InputError("mode", f"'{mode}' is not replace or append")
    if not features:
        raise InputError(role, "no polygons to import")
    key = ROLE_KEYS[role]
    out = copy.deepcopy(model)

    if key == "site":
        geoms = [shape(f["geometry"]) for f in features]
        if mode == "append" and model.get("site"):
            geoms.insert(0, shape(model["site"]))
        merged = _polygonal_part(shapely.union_all(geoms))
        if merged is None or merged.is_empty:
            raise InputError(role, "the features enclose no area")
        out["site"] = geojson_of(merged)
    else:
        entries = [] if mode == "replace" else list(out.get(key) or [])
        taken = {e.get("name", "") for e in entries}
        for f in features:
            geom = shape(f["geometry"])
            parts = list(geom.geoms) if geom.geom_type == "MultiPolygon" else [geom]
            for j, part in enumerate(parts, start=1):
                name = f["name"] if len(parts) == 1 else f"{f['name']} (part {j})"
                name = unique_name(name, taken)
                taken.add(name)
                entry: dict[str, Any] = {
                    "name": name,
                    "geometry": geojson_of(part),
                }
                if key == "zones":
                    entry["units"] = {}
                elif key == "areas_of_interest":
                    entry["weight"] = float(f.get("weight", 1.0))
                entries.append(entry)
        out[key] = entries
    if check:
        _validate(out)
    return out


def features_outside_site(model: dict, features: list[dict]) -> list[str]:
    """Names of features that do not overlap the model's site outline at all."""
    from shapely.geometry import shape

    if not model.get("site"):
        return []
    site = shape(model["site"])
    return [f["name"] for f in features if not shape(f["geometry"]).intersects(site)]


def _validate(model: dict) -> None:
    """Check the result against the model-file schema (raises InputError when it fails)."""
    from probewise.io.model_file import validate_model

    validate_model(model)
