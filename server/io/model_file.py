"""The model file (schema "probewise/1"): validation, reading and the canonical dump.

One JSON document holds a whole project (docs/model-file.md). ``validate_model`` turns
any decoded JSON value into a normalised plain dict or raises ``InputError`` naming the first
problem as ``field: problem`` with a path such as ``units[2].thickness_m``.

Validation runs in four stages so that absurd input fails fast and every message is plain:
1. sizes: caps on list lengths, nesting depth and value count (before anything expensive);
2. finiteness: every float anywhere, extra fields included, must be finite;
3. structure (pydantic): types, required fields, per-object rules (ranges, geometries, CRS);
4. cross-references: unique names, units named by other sections, observed depths, probes
   inside the site.
Unknown extra fields are allowed and kept (the contract says "add optional fields freely").
Normalising fills defaults, turns numbers into floats and geometry positions into [x, y].

The family: ``model_common`` (constants, message helpers), ``model_geometry`` (polygons,
CRS), ``model_schema`` (the pydantic classes, ``ModelFile``), ``model_checks`` (stages 1-3),
``model_references`` (stage 4, one check per section). This module is the public entry.
"""

from __future__ import annotations

import json
from collections.abc import Iterable
from itertools import islice
from pathlib import Path
from typing import Any

import numpy as np
import shapely
from pydantic import ValidationError

from probewise.errors import InputError
from probewise.io.model_checks import raw_problems, size_problems, structure_problems
from probewise.io.model_common import (  # noqa: F401 - the model file's constants, public here
    CORRELATION_MODELS,
    LIST_CAPS,
    MAX_COORD_M,
    MAX_DEPTH_M,
    MAX_EXISTING,
    MAX_FILE_BYTES,
    MAX_GRID_CELLS,
    MAX_LAYOUT_PROBES,
    MAX_LAYOUTS,
    MAX_NESTING,
    MAX_POSITIONS,
    MAX_RANGE_M,
    MAX_UNITS,
    MAX_VALUES,
    METHOD_KINDS,
    SCHEMA,
    SHAPES,
    TOP_KEYS,
    show_value,
)
from probewise.io.model_geometry import to_shapely
from probewise.io.model_history import history_problems
from probewise.io.model_programme import programme_problems
from probewise.io.model_references import reference_problems
from probewise.io.model_requirements import requirements_problems
from probewise.io.model_schema import OPTIONAL_KEYS, OPTIONAL_TOP_KEYS, ModelFile
from probewise.io.model_structure import ground_structure_problems
from probewise.io.model_tests import tests_problems


def _validate(data: object, first_only: bool) -> tuple[dict | None, list[InputError]]:
    problems: list[InputError] = []

    def stop() -> bool:
        return bool(problems) and first_only

    problems.extend(size_problems(data))
    if problems:  # absurd sizes: do no further work at all
        return None, problems[:1] if first_only else problems
    for problem, fatal in raw_problems(data):
        problems.append(problem)
        if stop() or fatal:
            return None, problems
    try:
        model = ModelFile.model_validate(data)
    except ValidationError as exc:
        known = {str(p) for p in problems}
        problems.extend(p for p in structure_problems(exc) if str(p) not in known)
        return None, problems[:1] if first_only else problems
    if problems:
        return None, problems
    normal = model.model_dump(mode="json", by_alias=True)
    for section, keys in OPTIONAL_KEYS.items():  # optional fields stay absent, not null
        for item in normal.get(section) or []:
            for key in keys:
                if item.get(key) is None:
                    item.pop(key, None)
    for key in OPTIONAL_TOP_KEYS:
        if normal.get(key) is None:
            normal.pop(key, None)
    for problem in reference_problems(normal):
        problems.append(problem)
        if stop():
            break
    if not stop():
        problems.extend(history_problems(data, normal))
    if not stop():  # refusal rules, rigs and cost items (server/io/model_programme.py)
        problems.extend(programme_problems(data, normal))
    if not stop():  # requirements and what methods deliver (server/io/model_requirements.py)
        problems.extend(requirements_problems(data, normal))
    if not problems:  # optional structure fields and stages (server/io/model_structure.py)
        problems.extend(islice(ground_structure_problems(normal), 1 if first_only else None))
    if not problems:  # test results and behaviour settings (server/io/model_tests.py)
        problems.extend(islice(tests_problems(normal), 1 if first_only else None))
    return (None if problems else normal), problems


def validate_model(data: object) -> dict:
    """Validate a decoded model file and return it normalised (defaults filled, JSON-ready).

    Raises ``InputError(field, problem)`` for the first problem found.
    """
    normal, problems = _validate(data, first_only=True)
    if problems:
        raise problems[0]
    assert normal is not None
    return normal


def validate_all(data: object) -> list[InputError]:
    """Every problem found (best effort: cross-reference checks need a sound structure)."""
    return _validate(data, first_only=False)[1]


_CHECKED = object()


class ValidModel:
    """A model document that passed every check, normalised; only ``check_model`` makes one.

    The store saves a ValidModel without checking it again (a plain dict it validates), so a
    web save validates once. Treat ``document`` as read-only.
    """

    __slots__ = ("document",)

    def __init__(self, document: dict, *, _checked: object = None):
        if _checked is not _CHECKED:
            raise TypeError("a ValidModel comes from check_model, which validates it")
        self.document = document


def check_model(data: object) -> tuple[ValidModel | None, list[InputError]]:
    """Validate once, collecting every problem: ``(model, [])`` or ``(None, problems)``."""
    normal, problems = _validate(data, first_only=False)
    if problems or normal is None:
        return None, problems
    return ValidModel(normal, _checked=_CHECKED), []


class _DuplicateKeyError(ValueError):
    pass


def _pairs_without_duplicates(pairs: list[tuple[str, Any]]) -> dict:
    out: dict = {}
    for key, value in pairs:
        if key in out:
            raise _DuplicateKeyError(key)
        out[key] = value
    return out


def parse_model_text(text: str) -> dict:
    """Decode model-file JSON text and validate it (see ``validate_model``)."""
    try:
        data = json.loads(text, object_pairs_hook=_pairs_without_duplicates)
    except json.JSONDecodeError as exc:
        raise InputError(
            "MODEL", f"is not valid JSON: {exc.msg} at line {exc.lineno} column {exc.colno}"
        ) from None
    except _DuplicateKeyError as exc:
        raise InputError(
            "MODEL", f"is not valid: the key {show_value(exc.args[0])} appears twice in one object"
        ) from None
    except RecursionError:
        raise InputError("MODEL", "is nested too deeply") from None
    return validate_model(data)


def load_model_file(path: str | Path) -> dict:
    """Read, decode and validate a model file; every failure is an ``InputError``."""
    path = Path(path)
    try:
        if path.is_dir():
            raise InputError("MODEL", f"is a folder, not a file: {path}")
        size = path.stat().st_size
        if size > MAX_FILE_BYTES:
            raise InputError("MODEL", f"file is too large ({size} bytes; at most {MAX_FILE_BYTES})")
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError("MODEL", f"file not found: {path}") from None
    except OSError as exc:
        raise InputError("MODEL", f"cannot read {path}: {exc.strerror or exc}") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError("MODEL", f"is not UTF-8 text (byte {exc.start})") from None
    return parse_model_text(text)


def _format(value: object, indent: int, lead: int, width: int = 100) -> str:
    """JSON with containers kept on one line when they fit in ``width`` columns."""
    flat = json.dumps(value, ensure_ascii=False, allow_nan=False)
    if not isinstance(value, dict | list) or not value or indent + lead + len(flat) <= width:
        return flat
    pad = " " * (indent + 2)
    if isinstance(value, dict):
        items = []
        for k, v in value.items():
            key = json.dumps(k, ensure_ascii=False) + ": "
            items.append(pad + key + _format(v, indent + 2, len(key), width))
    else:
        items = [pad + _format(v, indent + 2, 0, width) for v in value]
    opener, closer = ("{", "}") if isinstance(value, dict) else ("[", "]")
    return opener + "\n" + ",\n".join(items) + "\n" + " " * indent + closer


def dump_model(model: dict) -> str:
    """Canonical model-file text: validated, keys in contract order, 2-space indent.

    Short objects and arrays stay on one line. Nulls that stand for "absent" (the basal
    unit's thickness and correlation, a probe's depth_m) are left out, as the contract
    writes them. Raises ``InputError`` if ``model`` is invalid.
    """
    normal = validate_model(model)
    for unit in normal["units"]:
        for key in ("thickness_m", "correlation"):
            if unit.get(key) is None:
                unit.pop(key, None)
    for layout in normal["layouts"]:
        for probe in layout["probes"]:
            if probe.get("depth_m") is None:
                probe.pop("depth_m", None)
    return _format(normal, 0, 0) + "\n"


def summarise_model(model: dict) -> str:
    """One line of counts for a validated model, e.g. for ``probewise validate``."""
    return (
        f"{len(model['units'])} units, {len(model['methods'])} methods, "
        f"{len(model['existing'])} existing probes, {len(model['layouts'])} layouts"
    )


def list_notes(model: dict) -> list[str]:
    """Things in a valid model worth a second look (allowed, not errors).

    Today: planned probes that lie inside an exclusion area (live services, water...).
    """
    notes = []
    exclusions = [(e["name"], to_shapely(e["geometry"])) for e in model["exclusions"]]
    for i, layout in enumerate(model["layouts"]):
        if not layout["probes"] or not exclusions:
            continue
        xs = np.array([p["x"] for p in layout["probes"]], dtype=float)
        ys = np.array([p["y"] for p in layout["probes"]], dtype=float)
        for name, geom in exclusions:
            for p in np.flatnonzero(shapely.intersects_xy(geom, xs, ys)):
                probe = layout["probes"][p]
                notes.append(
                    f"layouts[{i}].probes[{p}]: planned probe {show_value(probe['id'])} lies in "
                    f"exclusion {show_value(name)}"
                )
    return notes


def unique_name(wanted: str, taken: Iterable[str]) -> str:
    """``wanted``, or ``wanted (2)``, ``(3)``... when that name is already taken."""
    taken = set(taken)
    if wanted not in taken:
        return wanted
    n = 2
    while f"{wanted} ({n})" in taken:
        n += 1
    return f"{wanted} ({n})"


def unique_layout_name(model: dict, wanted: str) -> str:
    """A layout name not yet used in ``model`` (``wanted`` or ``wanted (n)``)."""
    return unique_name(wanted, (layout["name"] for layout in model.get("layouts") or []))
