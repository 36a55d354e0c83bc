"""Model-file constants and the message helpers every validation stage shares.

The schema name, the caps that stop absurd files early, the top-level keys in contract order,
and how a field path and a user's value are written in a message (docs/model-file.md).
"""

from __future__ import annotations

import json

from probewise.core.correlation import CORRELATION_MODEL_NAMES
from probewise.core.priors import SHAPE_NAMES

SCHEMA = "probewise/1"
# Allowed names come from the core's registries (one entry adds a shape or a model).
SHAPES = SHAPE_NAMES
CORRELATION_MODELS = CORRELATION_MODEL_NAMES
METHOD_KINDS = ("borehole", "cpt", "dmt", "trial_pit", "other")

# Caps that stop absurd files before any costly work: (top-level key, cap, what is counted).
MAX_UNITS = 20
MAX_EXISTING = 5000
MAX_LAYOUTS = 200
MAX_LAYOUT_PROBES = 2000
MAX_ELEMENTS = 200
LIST_CAPS = (
    ("units", MAX_UNITS, "units"),
    ("existing", MAX_EXISTING, "existing probes"),
    ("layouts", MAX_LAYOUTS, "layouts"),
    ("methods", 50, "methods"),
    ("zones", 200, "zones"),
    ("areas_of_interest", 500, "areas of interest"),
    ("exclusions", 500, "exclusions"),
    ("bounds", 200, "bounds"),
    ("boundaries_of_interest", 50, "boundaries of interest"),
    ("elements", MAX_ELEMENTS, "design elements"),
)
MAX_POSITIONS = 100_000  # per geometry
MAX_VALUES = 5_000_000  # JSON values in the whole file
MAX_NESTING = 64
MAX_FILE_BYTES = 100 * 1024 * 1024
MAX_GRID_CELLS = 250_000
MAX_DEPTH_M = 10_000.0  # depths and thicknesses: nothing a site investigation meets
MAX_COORD_M = 1e8  # |x|, |y|: larger than any projected CRS or site grid
MAX_RANGE_M = 1e7  # correlation range

# Top-level keys in contract order (the dump keeps this order; extras follow).
TOP_KEYS = (
    "schema",
    "name",
    "crs",
    "currency",
    "site",
    "grid_spacing_m",
    "zones",
    "areas_of_interest",
    "exclusions",
    "units",
    "boundaries_of_interest",
    "bounds",
    "methods",
    "existing",
    "layouts",
    "elements",
)


class ProblemError(ValueError):
    """A problem found inside a validator; ``sub`` extends the field path (e.g. ``[0][3]``)."""

    def __init__(self, sub: str, problem: str):
        self.sub = sub
        self.problem = problem
        super().__init__(problem)


# ---------------------------------------------------------------- small helpers


def path_key(part: str) -> str:
    """A dict key as it appears in a field path; odd characters are JSON-escaped."""
    if part and part.isprintable():
        return part
    return json.dumps(part, ensure_ascii=False)


def field_path(parts: tuple | list) -> str:
    out = ""
    for p in parts:
        if isinstance(p, int) and not isinstance(p, bool):
            out += f"[{p}]"
        else:
            out += ("." if out else "") + path_key(str(p))
    return out


def join_path(field: str, sub: str) -> str:
    if not sub:
        return field
    if not field:
        return sub
    return field + sub if sub.startswith("[") else f"{field}.{sub}"


def show_value(value: object, limit: int = 40) -> str:
    """A short JSON rendering of a user's value for a message."""
    try:
        text = json.dumps(value, ensure_ascii=False)
    except (TypeError, ValueError):
        text = repr(value)
    text = " ".join(text.split())
    return text if len(text) <= limit else text[: limit - 3] + "..."


def number_text(value: float) -> str:
    """A number for a message: 3.0 -> 3.0, 2.5 -> 2.5, large values without noise."""
    return f"{value:g}" if abs(value) >= 1e6 else repr(float(value))


def names_text(names: list[str], limit: int = 6) -> str:
    shown = ", ".join(names[:limit])
    return shown + (", ..." if len(names) > limit else "")


def is_number(value: object) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)
