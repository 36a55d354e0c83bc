"""Reading the Levels and site history forms into the model's ``ground_level``,
``reference_levels`` and ``history`` sections (docs/model-file.md "Levels and site history").

Each reader fills one part of the model from a ``FormReader``; problems are recorded at the
model path of their field (``history[0].settlement.cc.min``), so the page shows them beside
the field and the model-file checks run once on the result. A level is a number in the
project datum or the name of a reference level (``read_level``).
"""

from __future__ import annotations

import re
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from probewise.errors import InputError
from probewise.numbers import read_number
from probewise.web.forms import FormReader
from probewise.web.polygon_text import parse_polygon_text

MAX_POINT_LINES = 20_000
MAX_UPLOAD_BYTES = 50 * 2**20
SOURCES = ("constant", "points")


def read_level(reader: FormReader, name: str, path: str, *, required: bool = True) -> Any:
    """A level: a number (m, project datum) or a reference level's name, as typed; None
    when blank and not required."""
    text = reader.raw(name).strip()
    if not text:
        if required:
            reader.problem(path, "is required: a level in metres or a reference level's name")
        return None
    if re.fullmatch(r"[-+\u2212]?[\d.,\s]+", text):
        try:
            return read_number(text, path, decimal_comma=True)
        except InputError as exc:
            reader.problems.append(exc)
            return text
    return text  # a name; the model checks say when it is not in the table


def points_text(points: list[dict] | None) -> str:
    """Surveyed points as editable lines "x, y, level"."""

    def plain(value: float) -> str:
        text = repr(float(value))
        return text[:-2] if text.endswith(".0") else text

    return "\n".join(
        f"{plain(p['x'])}, {plain(p['y'])}, {plain(p['level_m'])}" for p in points or []
    )


def parse_points_text(text: str, path: str) -> list[dict]:
    """Lines of "x, y, level" -> points; InputError names the line."""
    points = []
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        if len(points) >= MAX_POINT_LINES:
            raise InputError(path, f"more than {MAX_POINT_LINES} points")
        parts = [p for p in re.split(r"[,;\t ]+", line) if p]
        if len(parts) != 3:
            raise InputError(path, f"line {number}: '{line[:40]}' is not one 'x, y, level' triple")
        x, y, level = (read_number(p, f"{path} line {number}") for p in parts)
        points.append({"x": x, "y": y, "level_m": level})
    return points


def read_ground_level(reader: FormReader, model: dict) -> str:
    """The ground-level form: datum, and a constant level or surveyed points as text."""
    datum = reader.text("datum", "ground_level.datum", required=False, max_len=80)
    source = reader.choice("source", "ground_level.source", SOURCES)
    ground_level: dict[str, Any] = {"datum": datum}
    if source == "points":
        try:
            ground_level["points"] = parse_points_text(reader.raw("points"), "ground_level.points")
        except InputError as exc:
            reader.problems.append(exc)
            ground_level["points"] = []
        count = len(ground_level["points"])
        message = f"Ground level: {count} surveyed points"
    else:
        ground_level["level_m"] = reader.number("level_m", "ground_level.level_m")
        message = "Ground level: a constant level"
    model["ground_level"] = ground_level
    return message + (f" ({datum})" if datum else "")


def read_reference_levels(reader: FormReader, model: dict) -> str:
    """The reference-levels table: datum shift and rows of name and level; blank rows are
    left out and an empty table removes the section."""
    rows = []
    count = int(reader.raw("rows") or 0) if reader.raw("rows").isdigit() else 0
    for i in range(min(count, 200)):
        name = reader.raw(f"name_{i}").strip()
        level_text = reader.raw(f"level_{i}").strip()
        if not name and not level_text:
            continue
        at = f"reference_levels.levels[{len(rows)}]"
        rows.append(
            {
                "name": reader.text(f"name_{i}", f"{at}.name", max_len=80),
                "level_m": reader.number(f"level_{i}", f"{at}.level_m"),
            }
        )
    if not rows:
        model.pop("reference_levels", None)
        return "Removed the reference levels"
    shift = reader.number("datum_shift_m", "reference_levels.datum_shift_m", required=False)
    model["reference_levels"] = {"datum_shift_m": shift or 0.0, "levels": rows}
    return f"Reference levels: {len(rows)} levels"


def read_band(reader: FormReader, path: str, item: dict) -> None:
    item["level_min"] = read_level(reader, "level_min", f"{path}.level_min")
    item["level_max"] = read_level(reader, "level_max", f"{path}.level_max")


def read_environment(reader: FormReader, path: str, env: dict) -> None:
    """One former environment: name, polygon as text, band of its former surface level."""
    env["name"] = reader.text("name", f"{path}.name", max_len=200)
    try:
        env["geometry"] = parse_polygon_text(reader.raw("polygon"), f"{path}.geometry")
    except InputError as exc:
        reader.problems.append(exc)
        env["geometry"] = None
    read_band(reader, path, env)


SETTLEMENT_NUMBERS = (  # form name, model key under settlement, required
    ("cc_min", "cc.min", True),
    ("cc_max", "cc.max", True),
    ("e0", "e0", True),
    ("unit_weight_kn_m3", "unit_weight_kn_m3", True),
    ("fill_unit_weight_kn_m3", "fill_unit_weight_kn_m3", True),
    ("surcharge_kpa", "surcharge_kpa", False),
    ("sublayer_m", "sublayer_m", False),
)


def read_rule(reader: FormReader, path: str, rule: dict) -> None:
    """A history rule's own fields (its environments are edited one by one): name, the
    boundary it bounds, the default band outside the environments and the settlement."""
    rule["name"] = reader.text("name", f"{path}.name", max_len=200)
    rule["base_of"] = reader.raw("base_of").strip()
    rule.setdefault("environments", [])
    if reader.raw("outside_min").strip() or reader.raw("outside_max").strip():
        rule["outside"] = {
            "level_min": read_level(reader, "outside_min", f"{path}.outside.level_min"),
            "level_max": read_level(reader, "outside_max", f"{path}.outside.level_max"),
        }
    else:
        rule["outside"] = None
    if not reader.flag("settles"):
        rule["settlement"] = None
        return
    at = f"{path}.settlement"
    spec: dict[str, Any] = {
        "compressible_unit": reader.raw("compressible_unit").strip(),
        "cc": {},
    }
    for name, key, required in SETTLEMENT_NUMBERS:
        value = reader.number(name, f"{at}.{key}", required=required)
        if value is None:
            continue
        if key.startswith("cc."):
            spec["cc"][key[3:]] = value
        else:
            spec[key] = value
    rule["settlement"] = spec


@contextmanager
def uploaded_file(
    reader: FormReader, name: str, path: str | None = None
) -> Iterator[tuple[Path, str]]:
    """The uploaded file ``name`` as a temporary file under its own (cleaned) name, so a
    GeoJSON's layer is named after it; yields (path, the name the user gave). Problems are
    recorded at ``path`` (default: the field's name)."""
    upload = reader.file(name)
    at = path or name
    if upload is None:
        raise InputError(at, "choose a file first")
    filename = upload.filename or "upload"
    data = upload.file.read(MAX_UPLOAD_BYTES + 1)
    if len(data) > MAX_UPLOAD_BYTES:
        raise InputError(at, f"{filename} is over the {MAX_UPLOAD_BYTES // 2**20} MB limit")
    if not data:
        raise InputError(at, f"{filename} is empty")
    safe = re.sub(r"[^A-Za-z0-9._-]+", "_", Path(filename).name).lstrip(".") or "upload"
    with tempfile.TemporaryDirectory(prefix="probewise-upload-") as folder:
        file_path = Path(folder) / safe
        file_path.write_bytes(data)
        yield file_path, filename
