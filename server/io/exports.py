"""Results out to the formats GIS and contractors use: CSV, GeoJSON and GeoPackage.

The writers take plain rows and arrays, not the core's objects, so they stay independent of
how the core computes them:

- a schedule row: ``{"id", "method", "x", "y", "depth_m", "observes": [unit names], ...}``
  (``schedule_rows`` builds them from planned probes and the model's methods);
- a posterior grid: cell centres ``xy (n, 2)`` in project coordinates, boundary names
  ``(B,)`` and ``fields`` {"mean_m", "std_m", "p05_m", "p50_m", "p95_m"} -> arrays ``(n, B)``.

GeoJSON follows RFC 7946: coordinates in WGS 84 longitude/latitude, with the project
coordinates kept in the ``x``/``y`` properties. A project on a local site grid (no CRS) cannot
be placed on the earth; its GeoJSON keeps site-grid coordinates and says so.
"""

from __future__ import annotations

import csv
import io
import math
import os
import re
import tempfile
import warnings
from collections.abc import Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import IO, Any

from probewise.caution import CAUTION_LINE
from probewise.errors import InputError

NO_CRS_NOTE = "coordinates are metres on a local site grid (the project has no CRS)"

SCHEDULE_COLUMNS = (
    "id",
    "method",
    "method_name",
    "kind",
    "x",
    "y",
    "depth_m",
    "target",
    "observes",
    "cost",
)
# With a ground level, the rows also hold the ground level and the target depth's level
# (project datum), placed after the depth.
LEVEL_COLUMNS = ("ground_level_m", "target_level_m")
_COLUMN_ORDER = (
    SCHEDULE_COLUMNS[: SCHEDULE_COLUMNS.index("depth_m") + 1]
    + LEVEL_COLUMNS
    + SCHEDULE_COLUMNS[SCHEDULE_COLUMNS.index("depth_m") + 1 :]
)
GRID_FIELDS = ("mean_m", "std_m", "p05_m", "p50_m", "p95_m")


# ---------------------------------------------------------------------------------------------
# Schedule


def schedule_rows(probes: Sequence[dict], model: dict) -> list[dict]:
    """Schedule rows from planned probes and the model's methods.

    ``probes``: ``[{"id", "method", "x", "y", "depth_m", "observes": [unit names],
    "target"?: unit name or None}]`` as ``probewise evaluate --json`` prints them per layout.
    Each row adds the method's name and kind, and ``cost`` = per location + per metre x depth
    (mobilisation is paid once per method, so it is not in any one probe's cost).
    """
    methods = {m["id"]: m for m in model.get("methods", [])}
    rows = []
    for p in probes:
        method = methods.get(p["method"], {})
        cost = method.get("cost", {})
        depth = float(p["depth_m"])
        rows.append(
            {
                "id": p["id"],
                "method": p["method"],
                "method_name": method.get("name", ""),
                "kind": method.get("kind", ""),
                "x": float(p["x"]),
                "y": float(p["y"]),
                "depth_m": depth,
                "target": p.get("target") or "",
                "observes": list(p.get("observes") or []),
                "cost": float(cost.get("per_location", 0.0))
                + float(cost.get("per_metre", 0.0)) * depth,
            }
        )
    return rows


def _rounded(key: str, value: Any) -> Any:
    """Coordinates, depths (m) and money to two decimals: a centimetre is finer than any
    setting-out or depth reading, and a cent finer than any rate."""
    if isinstance(value, float) and (key in ("x", "y", "cost") or key.endswith("_m")):
        return round(value, 2)
    return value


def _cell(key: str, value: Any) -> Any:
    """A schedule value as one flat cell: lists joined, numbers rounded."""
    if isinstance(value, list | tuple):
        return "; ".join(str(v) for v in value)
    return _rounded(key, value)


def _write_caution_row(out: IO[str]) -> None:
    """A comment line first, so every CSV that informs design carries the caution."""
    out.write(f"# {CAUTION_LINE}\n")


def _columns(rows: Sequence[dict]) -> list[str]:
    """The known columns present, in order, then any extra keys in first-seen order."""
    seen: dict[str, None] = {}
    for row in rows:
        for key in row:
            seen.setdefault(key, None)
    known = [c for c in _COLUMN_ORDER if c in seen]
    return known + [k for k in seen if k not in _COLUMN_ORDER]


def write_schedule_csv(rows: Sequence[dict], path_or_buffer: str | Path | IO[str]) -> None:
    """The schedule as CSV, one probe per row; ``observes`` joined with "; "."""
    columns = _columns(rows) or list(SCHEDULE_COLUMNS)
    with _text_out(path_or_buffer) as out:
        _write_caution_row(out)
        writer = csv.writer(out, lineterminator="\n")
        writer.writerow(columns)
        for row in rows:
            writer.writerow([_cell(c, row.get(c, "")) for c in columns])


def write_lab_csv(rows: Sequence[dict], columns: Sequence[str], path_or_buffer) -> None:
    """The laboratory testing schedule as CSV, one (test, hole) per row, caution first."""
    with _text_out(path_or_buffer) as out:
        _write_caution_row(out)
        writer = csv.writer(out, lineterminator="\n")
        writer.writerow(columns)
        for row in rows:
            writer.writerow([_cell(c, row.get(c, "")) for c in columns])


def _to_wgs84(crs: str) -> Any:
    from pyproj import Transformer

    return Transformer.from_crs(crs, "EPSG:4326", always_xy=True)


def write_schedule_geojson(rows: Sequence[dict], crs: str | None, *, rfc7946: bool = True) -> dict:
    """The schedule as a GeoJSON FeatureCollection of points.

    With a project CRS the coordinates are WGS 84 lon/lat (RFC 7946) and ``x``/``y`` keep the
    project coordinates; ``rfc7946=False`` keeps project coordinates and names the CRS in the
    (pre-RFC 7946) ``crs`` member, which GDAL and QGIS read. Without a project CRS the
    coordinates stay on the site grid and ``coordinates_note`` says so.
    """
    transform = _to_wgs84(crs) if crs and rfc7946 else None
    features = []
    for row in rows:
        x, y = float(row["x"]), float(row["y"])
        if transform is not None:
            lon, lat = transform.transform(x, y)
            coords = [round(lon, 8), round(lat, 8)]
        else:
            coords = [round(x, 2), round(y, 2)]
        props = {k: _json_value(_rounded(k, v)) for k, v in row.items()}
        features.append(
            {
                "type": "Feature",
                "geometry": {"type": "Point", "coordinates": coords},
                "properties": props,
            }
        )
    out: dict[str, Any] = {"type": "FeatureCollection", "features": features}
    if crs and not rfc7946:
        code = crs.split(":")[-1]
        out["crs"] = {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{code}"}}
    if crs:
        out["project_crs"] = crs
    else:
        out["coordinates_note"] = NO_CRS_NOTE
    out["caution"] = CAUTION_LINE
    return out


def _json_value(value: Any) -> Any:
    if isinstance(value, tuple):
        return list(value)
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _frame(records: list[dict], xs: Sequence[float], ys: Sequence[float], crs: str | None) -> Any:
    import geopandas

    return geopandas.GeoDataFrame(
        records, geometry=geopandas.points_from_xy(xs, ys), crs=crs or None
    )


def write_schedule_gpkg(rows: Sequence[dict], crs: str | None, path: str | Path) -> list[str]:
    """The schedule as a GeoPackage point layer "schedule" in the project CRS.

    Returns notes for the user (e.g. that a project without a CRS gives a layer without one).
    """
    if not rows:
        raise InputError("schedule", "has no probes to write")
    records = [{c: _cell(c, row.get(c, "")) for c in _columns(rows)} for row in rows]
    frame = _frame(records, [r["x"] for r in rows], [r["y"] for r in rows], crs)
    notes = [] if crs else [f"the layer has no CRS: {NO_CRS_NOTE}"]
    _write_gpkg({"schedule": frame}, path, _description(crs, "Scoping schedule"))
    return notes


def _description(crs: str | None, what: str) -> str:
    where = f"coordinates in {crs}" if crs else NO_CRS_NOTE
    return f"{what} from probewise; {where}. {CAUTION_LINE}"


def _write_gpkg(layers: dict[str, Any], path: str | Path, description: str) -> None:
    """Write layers to a new GeoPackage, replacing the file only once all are written."""
    path = Path(path)
    with _replacing(path) as tmp, warnings.catch_warnings():
        # pyogrio warns when a frame has no CRS; the caller tells the user in plain words
        warnings.filterwarnings("ignore", message=".*crs.*", category=UserWarning)
        for name, frame in layers.items():
            frame.to_file(
                tmp,
                layer=name,
                driver="GPKG",
                engine="pyogrio",
                layer_options={"DESCRIPTION": description},
            )


# ---------------------------------------------------------------------------------------------
# Posterior grid


def _grid_arrays(xy: Any, names: Sequence[str], fields: dict[str, Any]) -> tuple[Any, dict]:
    import numpy as np

    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    n, b = xy.shape[0], len(names)
    unknown = [k for k in fields if k not in GRID_FIELDS]
    if unknown:
        raise InputError("posterior grid", f"unknown field(s) {', '.join(unknown)}")
    arrays = {}
    for key in GRID_FIELDS:
        if key in fields:
            a = np.asarray(fields[key], dtype=float)
            if a.shape != (n, b):
                raise InputError("posterior grid", f"{key} has shape {a.shape}, not {(n, b)}")
            arrays[key] = a
    return xy, arrays


def _grid_record(arrays: dict, i: int, k: int) -> dict:
    rec = {key: round(float(a[i, k]), 4) for key, a in arrays.items()}
    if "p05_m" in arrays and "p95_m" in arrays:
        rec["width90_m"] = round(float(arrays["p95_m"][i, k] - arrays["p05_m"][i, k]), 4)
    return rec


def write_posterior_grid_csv(
    xy: Any,
    names: Sequence[str],
    fields: dict[str, Any],
    path_or_buffer: str | Path | IO[str],
) -> None:
    """The posterior grid as CSV, one row per cell and boundary.

    Columns: x, y, boundary (the unit whose base it is), then mean_m, std_m, p05_m, p50_m,
    p95_m (those given) and width90_m = p95_m - p05_m.
    """
    xy, arrays = _grid_arrays(xy, names, fields)
    columns = ["x", "y", "boundary", *arrays]
    if "p05_m" in arrays and "p95_m" in arrays:
        columns.append("width90_m")
    with _text_out(path_or_buffer) as out:
        _write_caution_row(out)
        writer = csv.writer(out, lineterminator="\n")
        writer.writerow(columns)
        for k, name in enumerate(names):
            for i in range(xy.shape[0]):
                rec = _grid_record(arrays, i, k)
                x, y = round(float(xy[i, 0]), 2), round(float(xy[i, 1]), 2)
                writer.writerow([x, y, name, *(rec[c] for c in columns[3:])])


def grid_layer_names(names: Sequence[str]) -> list[str]:
    """GeoPackage layer names for boundaries: "base_of_<unit>", letters, digits and _ only."""
    out: list[str] = []
    for name in names:
        stem = "base_of_" + (re.sub(r"[^0-9A-Za-z]+", "_", name).strip("_") or "unit")
        layer, k = stem, 2
        while layer in out:
            layer, k = f"{stem}_{k}", k + 1
        out.append(layer)
    return out


def write_posterior_grid_gpkg(
    xy: Any,
    names: Sequence[str],
    fields: dict[str, Any],
    crs: str | None,
    path: str | Path,
) -> list[str]:
    """The posterior grid as a GeoPackage, one point layer per boundary (see
    ``grid_layer_names``) with fields mean_m, std_m, p05_m, p50_m, p95_m, width90_m.

    Returns notes for the user.
    """
    xy, arrays = _grid_arrays(xy, names, fields)
    layers = {}
    for k, (name, layer) in enumerate(zip(names, grid_layer_names(names), strict=True)):
        records = [{"boundary": name, **_grid_record(arrays, i, k)} for i in range(xy.shape[0])]
        layers[layer] = _frame(records, xy[:, 0], xy[:, 1], crs)
    _write_gpkg(layers, path, _description(crs, "Posterior boundary depths (m below ground)"))
    return [] if crs else [f"the layers have no CRS: {NO_CRS_NOTE}"]


# ---------------------------------------------------------------------------------------------
# Files


@contextmanager
def _replacing(path: Path):
    """A temporary path beside ``path``; moved over it only when the block succeeds."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=path.suffix, dir=path.parent)
    os.close(fd)
    os.unlink(tmp)  # GDAL wants to create the file itself
    try:
        yield tmp
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)


@contextmanager
def _text_out(path_or_buffer: str | Path | IO[str]):
    """A text stream to write into: the buffer itself, or a file replaced on success."""
    if isinstance(path_or_buffer, io.TextIOBase) or hasattr(path_or_buffer, "write"):
        yield path_or_buffer
        return
    with _replacing(Path(path_or_buffer)) as tmp, open(tmp, "w", newline="", encoding="utf-8") as f:
        yield f


def write_text_file(text: str, path: str | Path) -> None:
    """Write text to a file, replacing it only once fully written."""
    with _replacing(Path(path)) as tmp, open(tmp, "w", encoding="utf-8") as f:
        f.write(text)
