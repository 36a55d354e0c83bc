"""GIS files opened safely: the kind from the name, zipped Shapefiles unpacked with caps, the
layers of a file and their columns. ``probewise.io.geo_io`` reads polygons from what this opens.
"""

from __future__ import annotations

import io
import re
import stat
import tempfile
import zipfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path, PurePosixPath

from probewise.errors import InputError, OptionNeededError

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
KIND_LABELS = {"geojson": "GeoJSON", "gpkg": "GeoPackage", "shp": "Shapefile"}


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


def extract_zip(source: Path | bytes, dest: Path, filename: str) -> None:
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
def open_dataset(
    path_or_bytes: str | Path | bytes, filename: str | None
) -> Iterator[tuple[Path, str]]:
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
            extract_zip(source, folder, filename)
            yield folder, "zip"
        elif isinstance(source, bytes):
            local = tmp_path / f"upload{Path(filename).suffix.lower()}"
            local.write_bytes(source)
            yield local, kind
        else:
            yield source, kind


def layers_of(path: Path, kind: str, filename: str) -> dict[str, Path]:
    """Layers with geometry: name -> path to read it from."""
    if kind == "zip":
        return _shapefiles(path)
    import pyogrio

    try:
        info = pyogrio.list_layers(path)
    except Exception as exc:  # pyogrio raises its own DataSourceError and friends
        raise InputError(
            filename, f"cannot be read as {KIND_LABELS[kind]}: {first_line(exc)}"
        ) from None
    return {str(name): path for name, geom_type in info if geom_type is not None}


_UPLOAD_NAME = re.compile(r"'upload\.\w+' ")  # the name an upload is saved under here
_TEMP_FOLDER = re.compile(re.escape(tempfile.gettempdir()) + r"/probewise-gis-[^/\s]*/")


def first_line(exc: BaseException) -> str:
    """The first line of a reader's message, without the private temporary folder an upload
    was unpacked into (the user knows the file by its own name)."""
    text = _TEMP_FOLDER.sub("", str(exc)).strip().splitlines()
    line = text[0] if text else type(exc).__name__
    # GDAL's advice on driver prefixes speaks to programmers, not to the user of a form
    line = line.split("; It might help")[0].replace("not recognized as being in", "not in")
    return _UPLOAD_NAME.sub("the file is ", line)


def list_layers(path_or_bytes: str | Path | bytes, *, filename: str | None = None) -> list[str]:
    """Names of the layers with geometry in a GIS file (Shapefile stems inside a zip)."""
    with open_dataset(path_or_bytes, filename) as (path, kind):
        return list(layers_of(path, kind, filename or Path(str(path_or_bytes)).name))


def layer_columns(
    path_or_bytes: str | Path | bytes, *, filename: str | None = None, layer: str | None = None
) -> list[str]:
    """Attribute column names of one layer of a GIS file (the only layer when ``layer`` is
    None; InputError when there are several)."""
    import pyogrio

    with open_dataset(path_or_bytes, filename) as (path, kind):
        filename = filename or Path(str(path_or_bytes)).name
        layer_name, layer_path = choose_layer(layers_of(path, kind, filename), layer, filename)
        try:
            info = pyogrio.read_info(layer_path, layer=None if kind == "zip" else layer_name)
        except Exception as exc:  # pyogrio raises its own DataSourceError and friends
            label = KIND_LABELS["shp" if kind == "zip" else kind]
            raise InputError(filename, f"cannot be read as {label}: {first_line(exc)}") from None
    return [str(c) for c in info.get("fields", [])]


def choose_layer(layers: dict[str, Path], layer: str | None, filename: str) -> tuple[str, Path]:
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
