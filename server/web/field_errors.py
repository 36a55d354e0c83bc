"""Problems of a refused edit placed beside the form fields they belong to, in words.

``field_errors`` turns ``InputError``s with model paths into a ``FieldErrors`` the templates
look up by path (``errors.at("units[2].thickness_m")``); ``describe_field`` names a path in
words ('Unit "Alluvial clay", thickness_m').
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import Any

from probewise.errors import InputError


def path_is_under(path: str, prefix: str) -> bool:
    """``units[2].thickness_m.min`` is under ``units[2]`` and ``units[2].thickness_m``."""
    if not prefix:
        return True
    return path == prefix or path.startswith(prefix + ".") or path.startswith(prefix + "[")


@dataclass(frozen=True)
class Problem:
    field: str
    problem: str
    label: str  # the field in words: 'Unit "Alluvial clay", thickness_m'


class FieldErrors:
    """Problems of one refused edit, looked up by the model path of a form field.

    ``own``: path prefixes the page shows fields for; a problem under none of them (or at the
    top level) is shown at ``fallback`` as well as in the summary.
    """

    def __init__(
        self,
        problems: Iterable[Problem] = (),
        *,
        own: Iterable[str] = (),
        fallback: str | None = None,
    ):
        self.problems = list(problems)
        self.own = tuple(own)
        self.fallback = fallback

    def __bool__(self) -> bool:
        return bool(self.problems)

    def __len__(self) -> int:
        return len(self.problems)

    def _foreign(self, problem: Problem) -> bool:
        return not any(path_is_under(problem.field, prefix) for prefix in self.own)

    def at(self, path: str) -> list[str]:
        """Messages for the field at ``path`` and anything below it (one input's slot)."""
        return [p.problem for p in self.problems if path_is_under(p.field, path)]

    def exact(self, path: str) -> list[str]:
        """Messages at ``path`` itself (a group's or an item's slot); the fallback slot also
        gets the problems of parts the page does not show, named in words."""
        found = [p.problem for p in self.problems if p.field == path]
        if self.fallback is not None and path == self.fallback:
            found += [f"{p.label}: {p.problem}" for p in self.problems if self._foreign(p)]
        return found

    def has(self, path: str) -> bool:
        return bool(self.at(path)) or (path == self.fallback and bool(self.exact(path)))

    def any_under(self, *paths: str) -> bool:
        return any(self.has(p) for p in paths)


NO_ERRORS = FieldErrors()


def _quoted(items: list[Any], index: int, key: str, what: str) -> str:
    try:
        return f'{what} "{items[index][key]}"'
    except (IndexError, KeyError, TypeError):
        return f"{what} {index + 1}"


def describe_field(model: dict, path: str) -> str:
    """A model path in words for a message list: ``existing[3].observed.X`` -> 'Probe "BH1" ...'."""
    match = re.match(r"^([a-z_]+)\[(\d+)\](.*)$", path)
    if not match:
        return {
            "crs": "Coordinate system",
            "grid_spacing_m": "Grid spacing",
            "site": "Site outline",
            "name": "Project name",
            "currency": "Currency label",
            "units": "Units",
        }.get(path.split(".")[0].split("[")[0], path) + (
            f" ({path.split('.', 1)[1]})" if "." in path and not path.startswith("site") else ""
        )
    key, index_text, rest = match.groups()
    index = int(index_text)
    whats = {
        "units": ("name", "Unit"),
        "zones": ("name", "Zone"),
        "areas_of_interest": ("name", "Area of interest"),
        "exclusions": ("name", "Exclusion"),
        "methods": ("id", "Method"),
        "existing": ("id", "Probe"),
        "layouts": ("name", "Layout"),
    }
    items = model.get(key) if isinstance(model.get(key), list) else []
    if key in whats:
        name_key, what = whats[key]
        head = _quoted(items, index, name_key, what)
    elif key in ("boundaries_of_interest", "bounds"):
        what = "Boundary of interest" if key == "boundaries_of_interest" else "Bound"
        try:
            head = f"{what} on the base of {items[index]['base_of']}"
        except (IndexError, KeyError, TypeError):
            head = f"{what} {index + 1}"
    else:
        head = path
        rest = ""
    rest = rest.lstrip(".")
    if key == "layouts" and rest.startswith("probes["):
        inner = re.match(r"^probes\[(\d+)\]\.?(.*)$", rest)
        if inner:
            probes = items[index].get("probes", []) if index < len(items) else []
            head += ", " + _quoted(probes, int(inner.group(1)), "id", "probe")
            rest = inner.group(2)
    return f"{head}, {_rest_in_words(rest)}" if rest else head


_REST_WORDS = (
    (r"^observed\.(.+)$", r"observed base of \1"),
    (r"^precision_m\.(.+)$", r"precision for the base of \1"),
    (r"^units\.(.+)\.thickness_m(.*)$", r"thickness of \1\2"),
    (r"^thickness_m\b", "thickness"),
    (r"^correlation\.range_m$", "correlation range"),
    (r"^cannot_penetrate\[\d+\]$", "cannot penetrate"),
    (r"^final_depth_m$", "final depth"),
    (r"^tolerance_m$", "tolerance"),
)


def _rest_in_words(rest: str) -> str:
    for pattern, words in _REST_WORDS:
        rest = re.sub(pattern, words, rest)
    return rest.replace("_m.", " ").replace(".", " ")


def field_errors(
    model: dict,
    problems: Iterable[InputError],
    *,
    own: Iterable[str] = (),
    fallback: str | None = None,
    remap: Callable[[str], str] | None = None,
) -> FieldErrors:
    items = []
    for problem in problems:
        path = remap(problem.field) if remap else problem.field
        items.append(Problem(path, problem.problem, describe_field(model, problem.field)))
    return FieldErrors(items, own=own, fallback=fallback)
