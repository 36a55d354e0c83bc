"""Surveyed ground-level points in from a CSV table or a GIS point file
(docs/import-formats.md "Ground-level points").

- CSV: one point a row, columns for x, y and the level found by their header (case, spaces
  and a bracketed unit ignored: ``Level (mOD)`` is ``level``); comma, semicolon or tab
  separated; lines starting with ``#`` are comments. Accepted headers are ``X_NAMES``,
  ``Y_NAMES`` and ``LEVEL_NAMES``.
- GIS: a point layer of a GeoJSON, GeoPackage or zipped Shapefile with a level attribute
  (``level_column``, else the first column whose name is one of ``LEVEL_NAMES``), reprojected
  into the project CRS by the rules of ``probewise.io.geo_io``.

Both return ``[{"x", "y", "level_m"}]`` in file order after ``check_points``: at least 3
points, numbers everywhere, no position twice, not all on one line. Problems name the file
and the row or feature; nothing here writes a store.
"""

from __future__ import annotations

import csv
import io
import math
import re
from pathlib import Path
from typing import Any

import numpy as np

from probewise.errors import InputError
from probewise.numbers import read_number

X_NAMES = ("x", "easting", "east", "e")
Y_NAMES = ("y", "northing", "north", "n")
LEVEL_NAMES = (
    "level",
    "level_m",
    "ground_level",
    "ground_level_m",
    "gl",
    "z",
    "elevation",
    "rl",
    "reduced_level",
)
MAX_POINTS = 20_000  # as many as the model file holds
MAX_CSV_BYTES = 20 * 2**20


def _header_key(text: str) -> str:
    """``" Level (mOD) "`` -> ``"level"``; ``"Ground level"`` -> ``"ground_level"``."""
    text = re.sub(r"[\(\[].*?[\)\]]", "", str(text)).strip().lower()
    return re.sub(r"[\s\-]+", "_", text)


def _find_column(headers: list[str], names: tuple[str, ...], what: str, where: str) -> int:
    keys = [_header_key(h) for h in headers]
    for name in names:
        if name in keys:
            return keys.index(name)
    raise InputError(
        where,
        f"has no {what} column (a header such as {', '.join(names[:4])}); "
        f"headers: {', '.join(h.strip() for h in headers) or 'none'}",
    )


def _sniff_delimiter(line: str) -> str:
    counts = {d: line.count(d) for d in (",", ";", "\t")}
    return max(counts, key=lambda d: counts[d]) if any(counts.values()) else ","


def _number(text: Any, where: str, decimal_comma: bool) -> float:
    if text is None or (isinstance(text, float) and math.isnan(text)) or str(text).strip() == "":
        raise InputError(where, "is empty; every point needs a number here")
    if isinstance(text, int | float) and not isinstance(text, bool):
        if not math.isfinite(text):
            raise InputError(where, f"{text} is not a finite number")
        return float(text)
    return read_number(str(text), where, decimal_comma=decimal_comma)


def read_points_csv(data: bytes | str, filename: str = "points.csv") -> list[dict]:
    """Ground-level points from CSV text (see the module notes): ``[{"x", "y", "level_m"}]``."""
    if isinstance(data, bytes):
        if len(data) > MAX_CSV_BYTES:
            raise InputError(filename, f"is over the {MAX_CSV_BYTES // 2**20} MB limit")
        try:
            data = data.decode("utf-8-sig")
        except UnicodeDecodeError:
            raise InputError(filename, "is not UTF-8 text; save it as CSV (UTF-8)") from None
    lines = [line for line in data.splitlines() if line.strip() and not line.startswith("#")]
    if not lines:
        raise InputError(filename, "is empty")
    delimiter = _sniff_delimiter(lines[0])
    rows = list(csv.reader(io.StringIO("\n".join(lines)), delimiter=delimiter))
    headers = rows[0]
    where = f"{filename} header"
    cx = _find_column(headers, X_NAMES, "x (easting)", where)
    cy = _find_column(headers, Y_NAMES, "y (northing)", where)
    cl = _find_column(headers, LEVEL_NAMES, "level", where)
    # a comma decimal only when the columns are not themselves comma separated
    decimal_comma = delimiter != ","
    if len(rows) - 1 > MAX_POINTS:
        raise InputError(filename, f"has {len(rows) - 1} rows; at most {MAX_POINTS} points")
    points, labels = [], []
    for n, row in enumerate(rows[1:], start=2):  # row numbers as a spreadsheet shows them
        label = f"{filename} row {n}"
        cells = [*row, *[""] * (max(cx, cy, cl) + 1 - len(row))]
        points.append(
            {
                "x": _number(cells[cx], f"{label}, column {headers[cx].strip()}", decimal_comma),
                "y": _number(cells[cy], f"{label}, column {headers[cy].strip()}", decimal_comma),
                "level_m": _number(
                    cells[cl], f"{label}, column {headers[cl].strip()}", decimal_comma
                ),
            }
        )
        labels.append(label)
    return check_points(points, labels, filename)


def check_points(points: list[dict], labels: list[str], filename: str) -> list[dict]:
    """Points that can be triangulated, or InputError naming the row: at least 3, no
    position twice, not all on one line (the rules of the model file's ``ground_level``)."""
    if len(points) < 3:
        raise InputError(
            filename, f"needs at least 3 points to triangulate a ground surface (has {len(points)})"
        )
    seen: dict[tuple[float, float], int] = {}
    for i, p in enumerate(points):
        key = (p["x"], p["y"])
        if key in seen:
            raise InputError(labels[i], f"repeats the position of {labels[seen[key]]}")
        seen[key] = i
    xy = np.array([(p["x"], p["y"]) for p in points], dtype=float)
    sv = np.linalg.svd(xy - xy.mean(axis=0), compute_uv=False)
    if sv[1] <= 1e-9 * max(sv[0], 1.0):
        raise InputError(
            filename, "all points lie on one line; a ground surface needs points that span an area"
        )
    return points


def read_points_gis(
    path_or_bytes: str | Path | bytes,
    *,
    filename: str | None = None,
    layer: str | None = None,
    target_crs: str | None,
    level_column: str | None = None,
    source_crs_override: str | None = None,
    assume_local: bool = False,
) -> list[dict]:
    """Ground-level points of one point layer of a GIS file, in the project CRS."""
    import geopandas

    from probewise.io.geo_io import _column, _read_layer, _source_and_target_crs

    frame, filename, _, kind = _read_layer(path_or_bytes, filename, layer)
    if len(frame) > MAX_POINTS:
        raise InputError(filename, f"has {len(frame)} features; at most {MAX_POINTS} points")
    src, target = _source_and_target_crs(
        frame, filename, target_crs, source_crs_override, assume_local
    )
    if level_column:
        column = _column(frame, level_column, filename, "ground levels")
    else:
        headers = [str(c) for c in frame.columns if c != frame.geometry.name]
        where = f"{filename} columns"
        column = headers[_find_column(headers, LEVEL_NAMES, "level", where)]
    labels, levels, geoms = [], [], []
    for n, (fid, row) in enumerate(frame.iterrows(), start=1):
        label = f"{filename} feature {n}" + (f" (fid {fid})" if kind == "gpkg" and fid != n else "")
        geom = row.geometry
        if geom is None or geom.is_empty or geom.geom_type != "Point":
            found = "no geometry" if geom is None or geom.is_empty else f"a {geom.geom_type}"
            raise InputError(label, f"is {found}; ground levels are read from points")
        labels.append(label)
        levels.append(_number(row[column], f"{label}, column {column}", decimal_comma=True))
        geoms.append(geom)
    series = geopandas.GeoSeries(geoms, crs=src)
    if src is not None and target is not None and not src.equals(target):
        series = series.to_crs(target)
    points = []
    for label, geom, level in zip(labels, series, levels, strict=True):
        if not (math.isfinite(geom.x) and math.isfinite(geom.y)):
            raise InputError(label, f"could not be transformed to {target_crs}")
        points.append({"x": float(geom.x), "y": float(geom.y), "level_m": level})
    return check_points(points, labels, filename)


def is_csv(filename: str) -> bool:
    return Path(filename).suffix.lower() in (".csv", ".txt", ".tsv")


def read_points_file(path: str | Path, filename: str | None = None, **gis: Any) -> list[dict]:
    """A CSV table (by its extension: .csv, .txt, .tsv) or a GIS point file (``gis``: the
    options of ``read_points_gis``)."""
    filename = filename or Path(path).name
    if is_csv(filename):
        return read_points_csv(Path(path).read_bytes(), filename)
    return read_points_gis(path, filename=filename, **gis)


def apply_ground_points(model: dict, points: list[dict], datum: str | None = None) -> dict:
    """A new model whose ground level is the points (the datum kept unless one is given)."""
    old = model.get("ground_level") or {}
    ground_level = {"datum": old.get("datum", "") if datum is None else datum, "points": points}
    return {**model, "ground_level": ground_level}
