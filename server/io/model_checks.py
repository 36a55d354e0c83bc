"""Stages 1 to 3 of model-file validation: sizes, raw values, and pydantic's errors in words.

1. sizes: caps on list lengths (before anything expensive);
2. raw values: every float finite, all text valid Unicode, nesting depth and value count;
3. structure: pydantic's errors turned into ``InputError(field, problem)`` with plain words.
"""

from __future__ import annotations

import math
from collections.abc import Iterator

from pydantic import ValidationError

from probewise.errors import InputError
from probewise.io.model_common import (
    LIST_CAPS,
    MAX_LAYOUT_PROBES,
    MAX_LAYOUTS,
    MAX_NESTING,
    MAX_VALUES,
    ProblemError,
    field_path,
    is_number,
    join_path,
    show_value,
)


def size_problems(data: object) -> Iterator[InputError]:
    """Stage 1: lists over their caps, a layout's probes included (nothing costly yet)."""
    if not isinstance(data, dict):
        return
    for key, cap, what in LIST_CAPS:
        value = data.get(key)
        if isinstance(value, list) and len(value) > cap:
            yield InputError(key, f"has {len(value)} {what}; at most {cap} are allowed")
    layouts = data.get("layouts")
    if isinstance(layouts, list) and len(layouts) <= MAX_LAYOUTS:
        for i, layout in enumerate(layouts):
            probes = layout.get("probes") if isinstance(layout, dict) else None
            if isinstance(probes, list) and len(probes) > MAX_LAYOUT_PROBES:
                yield InputError(
                    f"layouts[{i}].probes",
                    f"has {len(probes)} probes; at most {MAX_LAYOUT_PROBES} per layout are allowed",
                )


_SURROGATE = "holds a lone surrogate escape (such as \\ud800), which is not valid Unicode text"


def _is_unicode(text: str) -> bool:
    """False for text that cannot be written as UTF-8 (a lone surrogate from a JSON escape)."""
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        return False
    return True


def raw_problems(data: object) -> Iterator[tuple[InputError, bool]]:
    """Non-finite floats and non-Unicode text anywhere (json.loads accepts NaN, Infinity and
    lone surrogate escapes), over-deep or huge files.

    Yields (problem, fatal). Iterative walk in document order; a too-deep or too-large file
    is fatal and stops the walk.
    """
    stack: list[tuple[object, tuple]] = [(data, ())]
    seen = 0
    while stack:
        value, parts = stack.pop()
        seen += 1
        if seen > MAX_VALUES:
            yield InputError("MODEL", f"is too large: more than {MAX_VALUES} values"), True
            return
        if len(parts) > MAX_NESTING:
            problem = f"is nested more than {MAX_NESTING} levels deep"
            yield InputError(field_path(parts) or "MODEL", problem), True
            return
        if isinstance(value, float) and not math.isfinite(value):
            problem = "must be a finite number (not NaN or Infinity)"
            yield InputError(field_path(parts) or "MODEL", problem), False
        elif isinstance(value, str) and not _is_unicode(value):
            yield InputError(field_path(parts) or "MODEL", _SURROGATE), False
        elif isinstance(value, dict):
            bad_keys = [k for k in value if isinstance(k, str) and not _is_unicode(k)]
            if bad_keys:
                yield InputError(field_path(parts) or "MODEL", f"a key {_SURROGATE}"), True
                return
            stack.extend((v, (*parts, k)) for k, v in reversed(list(value.items())))
        elif isinstance(value, list | tuple):
            stack.extend((v, (*parts, i)) for i, v in reversed(list(enumerate(value))))


# ---------------------------------------------------------------- stage 3: pydantic errors


def plain_message(err: dict) -> tuple[str, str]:
    """(extra path, plain message) for one pydantic error."""
    kind = err["type"]
    ctx = err.get("ctx") or {}
    given = err.get("input")
    got = f" (got {show_value(given)})"
    if kind == "value_error" and isinstance(ctx.get("error"), ProblemError):
        return ctx["error"].sub, ctx["error"].problem
    if kind == "missing":
        return "", "is required"
    if kind in ("float_type", "float_parsing", "int_type", "int_parsing"):
        if is_number(given):
            return "", "is too large"
        return "", "must be a number" + got
    if kind == "finite_number":
        return "", "must be a finite number (not NaN or Infinity)"
    if kind == "string_type":
        return "", "must be text" + got
    if kind in ("list_type", "tuple_type"):
        return "", "must be a list" + got
    if kind in ("dict_type", "model_type", "model_attributes_type"):
        if not err["loc"]:
            return "", "the model file must be a JSON object"
        return "", "must be an object" + got
    if kind == "literal_error":
        expected = str(ctx.get("expected", "")).replace("'", '"')
        return "", f"must be {expected}" + got
    bounds = {
        "greater_than": ("gt", ">"),
        "greater_than_equal": ("ge", ">="),
        "less_than": ("lt", "<"),
        "less_than_equal": ("le", "<="),
    }
    if kind in bounds:
        name, sign = bounds[kind]
        limit = ctx.get(name)
        return "", f"must be {sign} {limit:g}" + got if is_number(limit) else err["msg"]
    if kind == "string_too_short":
        return "", "must not be empty"
    if kind == "too_short":
        return "", f"must have at least {ctx.get('min_length')} items"
    if kind == "too_long":
        return "", f"must have at most {ctx.get('max_length')} items"
    if kind == "bool_type":
        return "", "must be true or false" + got
    if kind == "value_error":
        return "", str(ctx.get("error", err["msg"]))
    return "", str(err["msg"])


def structure_problems(exc: ValidationError) -> list[InputError]:
    out = []
    for err in exc.errors(include_url=False):
        sub, problem = plain_message(err)
        field = join_path(field_path(err["loc"]), sub)
        out.append(InputError(field or "MODEL", problem))
    return out
