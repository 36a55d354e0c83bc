"""What the pages that take polygons share: a polygon's plan area and an uploaded GIS file
held as a temporary file (the Site and Design elements pages)."""

from __future__ import annotations

import re
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from probewise.errors import InputError
from probewise.io import geo_io
from probewise.web.forms import FormReader


def area_m2(geometry: dict | None) -> float | None:
    """Plan area of a polygon (m2), None when it cannot be computed."""
    from shapely.geometry import shape

    try:
        return float(shape(geometry).area) if geometry else None
    except Exception:  # noqa: BLE001 - an invalid geometry shown back to the user
        return None


@contextmanager
def uploaded_gis_file(reader: FormReader) -> Iterator[tuple[Path, str]]:
    """The uploaded GIS file as a temporary file under its own (cleaned) name, so a GeoJSON's
    layer is named after the file; yields (path, the name the user gave)."""
    upload = reader.file("gis_file")
    if upload is None:
        raise InputError("gis_file", "choose a GeoJSON, GeoPackage or zipped Shapefile first")
    filename = upload.filename or "upload"
    data = upload.file.read(geo_io.MAX_FILE_BYTES + 1)
    if len(data) > geo_io.MAX_FILE_BYTES:
        raise InputError(filename, f"is over the {geo_io.MAX_FILE_BYTES // 2**20} MB limit")
    if not data:
        raise InputError(filename, "is empty")
    safe = re.sub(r"[^A-Za-z0-9._-]+", "_", Path(filename).name).lstrip(".") or "upload"
    with tempfile.TemporaryDirectory(prefix="probewise-upload-") as folder:
        path = Path(folder) / safe
        path.write_bytes(data)
        yield path, filename
