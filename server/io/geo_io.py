"""Site polygons in from GIS files: GeoJSON, GeoPackage and zipped Shapefile.

Reading goes through geopandas/pyogrio, reprojection through pyproj (``GeoDataFrame.to_crs``),
checks and repairs through shapely. Functions take and return plain model-file dicts and
never write a store; bad input raises ``InputError`` naming the file, feature or column.

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
import io
import math
import re
import stat
import tempfile
import zipfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path, PurePosixPath
from typing import Any

from server.errors import InputError, OptionNeededError
from server.numbers import read_number

ROLE_KEYS = {
    "site": "site",
    "zones": "zones",
    "areas": "areas_of_interest",
    "areas_of_interest": "areas_of_interest",
    "exclusions": "exclusions",
}

# Safe extraction of zipped Shapefiles: caps on what an archive may unpack to.
MAX_ZIP_BYTES = 50 * 1024 * 1024
MAX_ZIP_FILES = 200
# Cap on an uploaded file itself (a GeoPackage of site polygons is small).
MAX_FILE_BYTES = 50 * 1024 * 1024

_KINDS = {
    ".geojson": "geojson",
    ".json": "geojson",
    ".gpkg": "gpkg",
    ".zip": "zip",
    ".shp": "shp",
}
_KIND_LABELS = {"geojson": "GeoJSON", "gpkg": "GeoPackage", "shp": "Shapefile"}
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
# Files and safe unzipping


def _kind_of(filename: str) -> str:
    suffix = Path(filename).suffix.lower()
    if suffix not in _KINDS:
        raise InputError(
            filename,
            "unknown file type; give a GeoJSON (.geojson/.json), GeoPackage (.gpkg) "
            "or zipped Shapefile (.zip)",
        )
    return _KINDS[suffix]


def _check_member(name: str, filename: str) -> PurePosixPath:
    """A zip member's path, refused when absolute or escaping the extraction folder."""
    norm = name.replace("\\", "/")
    if norm.startswith("/") or re.match(r"^[A-Za-z]:", norm):
        raise InputError(f"{filename} member {name}", "has an absolute path; refused")
    path = PurePosixPath(norm)
    if ".." in path.parts:
        raise InputError(f"{filename} member {name}", "has a path escaping the folder; refused")
    return path


def _extract_zip(source: Path | bytes, dest: Path, filename: str) -> None:
    """Unpack a zip into ``dest`` after checking every member; nothing is written on refusal."""
    try:
        zf = zipfile.ZipFile(io.BytesIO(source) if isinstance(source, bytes) else source)
    except (zipfile.BadZipFile, OSError):
        raise InputError(filename, "is not a readable zip archive") from None
    with zf:
        infos = zf.infolist()
        if len(infos) > MAX_ZIP_FILES:
            raise InputError(
                filename, f"holds {len(infos)} files, over the limit of {MAX_ZIP_FILES}"
            )
        total = sum(i.file_size for i in infos)
        if total > MAX_ZIP_BYTES:
            raise InputError(
                filename,
                f"unzips to {total / 2**20:.1f} MB, over the {MAX_ZIP_BYTES / 2**20:.0f} MB limit",
            )
        members = []
        for info in infos:
            rel = _check_member(info.filename, filename)
            if stat.S_ISLNK(info.external_attr >> 16):
                raise InputError(
                    f"{filename} member {info.filename}", "is a symbolic link; refused"
                )
            if not info.is_dir() and rel.parts:
                members.append((info, rel))
        root = dest.resolve()
        written = 0
        for info, rel in members:
            target = dest.joinpath(*rel.parts)
            if not target.resolve().is_relative_to(root):  # belt and braces
                raise InputError(f"{filename} member {info.filename}", "escapes the folder")
            target.parent.mkdir(parents=True, exist_ok=True)
            try:
                with zf.open(info) as src, open(target, "wb") as out:
                    # count real bytes: the sizes in the directory are the archive's own claim
                    while chunk := src.read(1 << 20):
                        written += len(chunk)
                        if written > MAX_ZIP_BYTES:
                            raise InputError(
                                filename,
                                f"unzips to more than the {MAX_ZIP_BYTES / 2**20:.0f} MB limit",
                            )
                        out.write(chunk)
            except (zipfile.BadZipFile, RuntimeError, OSError, EOFError) as exc:
                raise InputError(
                    f"{filename} member {info.filename}", f"cannot be read: {exc}"
                ) from None


def _shapefiles(folder: Path) -> dict[str, Path]:
    """Shapefiles in an unzipped folder by layer name (file stem), skipping macOS debris."""
    found = {}
    for p in sorted(folder.rglob("*")):
        if p.suffix.lower() == ".shp" and "__MACOSX" not in p.parts and p.is_file():
            found[p.stem] = p
    return found


@contextmanager
def _dataset(path_or_bytes: str | Path | bytes, filename: str | None) -> Iterator[tuple[Path, str]]:
    """Yield (local path, kind) for a file given as a path or as uploaded bytes.

    A zip is unpacked (safely) into a temporary folder; for a zip the path is that folder.
    """
    if isinstance(path_or_bytes, bytes | bytearray | memoryview):
        data = bytes(path_or_bytes)
        if filename is None:
            raise InputError("file", "uploaded data need a file name (its type comes from it)")
        if len(data) > MAX_FILE_BYTES:
            raise InputError(filename, f"is over the {MAX_FILE_BYTES / 2**20:.0f} MB limit")
        if not data:
            raise InputError(filename, "is empty")
        source: Path | bytes = data
    else:
        source = Path(path_or_bytes)
        filename = filename or source.name
        if not source.is_file():
            raise InputError(filename, "no such file")
        if source.stat().st_size == 0:
            raise InputError(filename, "is empty")
    kind = _kind_of(filename)
    with tempfile.TemporaryDirectory(prefix="probewise-gis-") as tmp:
        tmp_path = Path(tmp)
        if kind == "zip":
            folder = tmp_path / "unzipped"
            folder.mkdir()
            _extract_zip(source, folder, filename)
            yield folder, "zip"
        elif isinstance(source, bytes):
            local = tmp_path / f"upload{Path(filename).suffix.lower()}"
            local.write_bytes(source)
            yield local, kind
        else:
            yield source, kind


def _layers_of(path: Path, kind: str, filename: str) -> dict[str, Path]:
    """Layers with geometry: name -> path to read it from."""
    if kind == "zip":
        return _shapefiles(path)
    import pyogrio

    try:
        info = pyogrio.list_layers(path)
    except Exception as exc:  # pyogrio raises its own DataSourceError and friends
        raise InputError(
            filename, f"cannot be read as {_KIND_LABELS[kind]}: {_first_line(exc)}"
        ) from None
    return {str(name): path for name, geom_type in info if geom_type is not None}


_UPLOAD_NAME = re.compile(r"'upload\.\w+' ")  # the name an upload is saved under here
_TEMP_FOLDER = re.compile(re.escape(tempfile.gettempdir()) + r"/probewise-gis-[^/\s]*/")


def _first_line(exc: BaseException) -> str:
    """The first line of a reader's message, without the private temporary folder an upload
    was unpacked into (the user knows the file by its own name)."""
    text = _TEMP_FOLDER.sub("", str(exc)).strip().splitlines()
    line = text[0] if text else type(exc).__name__
    # GDAL's advice on driver prefixes speaks to programmers, not to the user of a form
    line = line.split("; It might help")[0].replace("not recognized as being in", "not in")
    return _UPLOAD_NAME.sub("the file is ", line)


def list_layers(path_or_bytes: str | Path | bytes, *, filename: str | None = None) -> list[str]:
    """Names of the layers with geometry in a GIS file (Shapefile stems inside a zip)."""
    with _dataset(path_or_bytes, filename) as (path, kind):
        return list(_layers_of(path, kind, filename or Path(str(path_or_bytes)).name))


def layer_columns(
    path_or_bytes: str | Path | bytes, *, filename: str | None = None, layer: str | None = None
) -> list[str]:
    """Attribute column names of one layer of a GIS file (the only layer when ``layer`` is
    None; InputError when there are several)."""
    import pyogrio

    with _dataset(path_or_bytes, filename) as (path, kind):
        filename = filename or Path(str(path_or_bytes)).name
        layer_name, layer_path = _choose_layer(_layers_of(path, kind, filename), layer, filename)
        try:
            info = pyogrio.read_info(layer_path, layer=None if kind == "zip" else layer_name)
        except Exception as exc:  # pyogrio raises its own DataSourceError and friends
            label = _KIND_LABELS["shp" if kind == "zip" else kind]
            raise InputError(filename, f"cannot be read as {label}: {_first_line(exc)}") from None
    return [str(c) for c in info.get("fields", [])]


def _choose_layer(layers: dict[str, Path], layer: str | None, filename: str) -> tuple[str, Path]:
    if not layers:
        what = "no .shp file" if filename.lower().endswith(".zip") else "no layer with geometry"
        raise InputError(filename, f"holds {what}")
    if layer is None:
        if len(layers) > 1:
            raise OptionNeededError(
                filename, f"has {len(layers)} layers ({', '.join(layers)}); choose one", "layer"
            )
        layer = next(iter(layers))
    elif layer not in layers:
        raise InputError(
            f"{filename} layer {layer}", f"not found; the file has: {', '.join(layers)}"
        )
    return layer, layers[layer]


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
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    with _dataset(path_or_bytes, filename) as (path, kind):
        filename = filename or Path(str(path_or_bytes)).name
        layers = _layers_of(path, kind, filename)
        layer_name, layer_path = _choose_layer(layers, layer, filename)
        read_layer = None if kind == "zip" else layer_name
        try:
            frame = geopandas.read_file(
                layer_path, layer=read_layer, engine="pyogrio", fid_as_index=kind == "gpkg"
            )
        except Exception as exc:
            label = _KIND_LABELS["shp" if kind == "zip" else kind]
            raise InputError(filename, f"cannot be read as {label}: {_first_line(exc)}") from None

    if len(frame) == 0:
        raise InputError(filename, f"layer {layer_name} has no features")

    # Source and target CRS
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

    # Per-feature checks in the source CRS, so a reported coordinate is one the user can find
    name_col = None
    if name_column:
        name_col = _column(frame, name_column, filename, "names")
    else:
        named = [c for c in frame.columns if str(c).lower() == "name" and c != frame.geometry.name]
        name_col = named[0] if named else None
    weight_col = _column(frame, weight_column, filename, "weights") if weight_column else None

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


# ---------------------------------------------------------------------------------------------
# Putting polygons into a model


def apply_polygons(model: dict, role: str, features: list[dict], mode: str = "replace") -> dict:
    """A new model with the features as its site, zones, areas of interest or exclusions.

    ``role``: site | zones | areas (areas_of_interest) | exclusions. ``mode``: replace | append.
    The site becomes the union of the features (a Polygon or MultiPolygon); appending to the
    site unions with the current outline. Zones, areas and exclusions are single Polygons in
    the model file, so a MultiPolygon feature becomes one entry per part ("name (part 2)").
    A zone starts with no unit overrides; an area without a weight gets weight 1.
    Names are made unique by a " (2)" suffix.
    """
    import shapely
    from shapely.geometry import shape

    from server.io.model_file import unique_name

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
    from server.io.model_file import validate_model

    validate_model(model)
