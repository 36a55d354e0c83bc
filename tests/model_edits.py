"""Edit a model-file document at a field path: the shared tool of the bad-input tests."""

from __future__ import annotations

import copy
import re

DELETE = object()  # as a value: remove the item instead of replacing it


def parse_path(path: str | list) -> list:
    """``units[2].thickness_m`` -> ``["units", 2, "thickness_m"]`` (the field-path syntax)."""
    if isinstance(path, list | tuple):
        return list(path)
    return [int(i) if i else k for k, i in re.findall(r"([^.\[\]]+)|\[(\d+)\]", path)]


def json_paths(value: object, prefix: tuple = ()) -> list[tuple]:
    """Every path into a JSON document (leaves and containers alike), document order."""
    out = [prefix] if prefix else []
    if isinstance(value, dict):
        for k, v in value.items():
            out += json_paths(v, (*prefix, k))
    elif isinstance(value, list):
        for i, v in enumerate(value):
            out += json_paths(v, (*prefix, i))
    return out


def edited(model: dict, path: str | list | tuple, value: object) -> dict:
    """A deep copy of ``model`` with the item at ``path`` replaced by ``value`` (or removed
    when ``value`` is DELETE)."""
    parts = parse_path(path)
    out = copy.deepcopy(model)
    target = out
    for part in parts[:-1]:
        target = target[part]
    if value is DELETE:
        del target[parts[-1]]
    else:
        target[parts[-1]] = value
    return out
