"""Command-line options shared by several commands, and the parsing of their values."""

from __future__ import annotations

import argparse
import math
import sys
import time

from probewise.errors import InputError
from probewise.numbers import read_number

# OptimiseError.field -> the command-line option to name in the message
OPTION_OF_FIELD = {
    "budget": "--budget",
    "methods": "--methods",
    "candidate_spacing_m": "--candidate-spacing",
    "min_spacing_m": "--min-spacing",
    "objective": "--objective",
    "max_cells": "--search-cells",
}
MAX_SEARCH_CELLS = 10_000  # the greedy keeps candidates x cells x boundaries: about 0.8 GB here


def add_optimiser_arguments(parser: argparse.ArgumentParser) -> None:
    """Options shared by ``optimise`` and ``rank``."""
    parser.add_argument(
        "--methods", metavar="ID,ID", help="method ids the optimiser may use (default: all)"
    )
    parser.add_argument(
        "--candidate-spacing",
        metavar="M",
        help="spacing of candidate locations, m (default: about 600 locations over the site)",
    )
    parser.add_argument(
        "--min-spacing",
        metavar="M",
        help="least distance between chosen probes, m (default: the candidate spacing)",
    )
    parser.add_argument(
        "--search-cells",
        metavar="N",
        help="most cells the greedy search scores on; the site's grid is coarsened by a whole "
        f"factor to fit (default 1500, at most {MAX_SEARCH_CELLS}); finalists are scored on "
        "the full grid",
    )


def parse_positive(text: str | None, option: str, what: str = "number") -> float | None:
    """A finite number > 0 from a command-line value (None stays None); else InputError."""
    if text is None:
        return None
    return read_number(text, option, sign="positive", what=what)


def parse_methods(text: str | None, project) -> tuple[str, ...] | None:
    """``ID,ID`` -> method ids, each one of the model's; None when not given."""
    if text is None:
        return None
    ids = tuple(dict.fromkeys(part.strip() for part in text.split(",") if part.strip()))
    if not ids:
        raise InputError("--methods", "give at least one method id")
    for mid in ids:
        if mid not in project.methods:
            raise InputError(
                "--methods", f"no method with id {mid!r}; methods are {', '.join(project.methods)}"
            )
    return ids


def optimiser_options(args: argparse.Namespace, project, budget: float):
    """OptimiseOptions from the shared command-line options."""
    from probewise.core.optimise import OptimiseOptions

    return OptimiseOptions(
        budget=budget,
        methods=parse_methods(args.methods, project),
        candidate_spacing_m=parse_positive(
            args.candidate_spacing, "--candidate-spacing", "spacing in m"
        ),
        min_spacing_m=parse_positive(args.min_spacing, "--min-spacing", "spacing in m"),
        **search_cells(args),
    )


def search_cells(args: argparse.Namespace) -> dict:
    """``{"max_cells": N}`` from ``--search-cells`` (empty when not given); else InputError."""
    text = getattr(args, "search_cells", None)
    if text is None:
        return {}
    cells = read_number(text, "--search-cells", sign="positive", what="number of cells")
    if cells != int(cells) or not 100 <= cells <= MAX_SEARCH_CELLS:
        raise InputError(
            "--search-cells", f"must be a whole number from 100 to {MAX_SEARCH_CELLS}, not {text}"
        )
    return {"max_cells": int(cells)}


def optimiser_input_error(exc) -> InputError:
    """InputError naming the option behind an OptimiseError or EmptyGridError."""
    field = getattr(exc, "field", "grid_spacing_m")
    return InputError(OPTION_OF_FIELD.get(field, field), str(exc))


class ProgressBar:
    """A one-line progress bar on stderr, redrawn at most every 0.1 s; silent when off."""

    def __init__(self, enabled: bool, width: int = 30):
        self.enabled = enabled
        self.width = width
        self.last = 0.0
        self.shown = False

    def __call__(self, fraction: float, message: str) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if fraction < 1.0 and now - self.last < 0.1:
            return
        self.last = now
        filled = int(round(self.width * max(0.0, min(fraction, 1.0))))
        bar = "#" * filled + "-" * (self.width - filled)
        sys.stderr.write(f"\r[{bar}] {100 * fraction:3.0f}% {message[:60]:<60}")
        sys.stderr.flush()
        self.shown = True

    def close(self) -> None:
        if self.shown:
            sys.stderr.write("\n")
            sys.stderr.flush()
            self.shown = False


def parse_pairs(items: list[str] | None, option: str) -> dict[str, str]:
    """``["A=B", ...]`` -> {"A": "B"}; the first "=" splits; InputError naming the option."""
    out: dict[str, str] = {}
    for item in items or []:
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            raise InputError(option, f"expected KEY=VALUE, got {item!r}")
        out[key.strip()] = value.strip()
    return out


def add_point_arguments(parser: argparse.ArgumentParser) -> None:
    """``--at X,Y``, repeatable: the points of ``posterior`` and ``bounds``."""
    parser.add_argument(
        "--at",
        action="append",
        default=[],
        metavar="X,Y",
        help="a point in project coordinates (m); repeat for more; write --at=-5,3 "
        "when X is negative",
    )


def parse_point(text: str) -> tuple[float, float]:
    """``"X,Y"`` -> (x, y); InputError naming ``--at`` otherwise."""
    parts = text.split(",")
    try:
        if len(parts) != 2:
            raise ValueError
        x, y = float(parts[0]), float(parts[1])
    except ValueError:
        raise InputError("--at", f"expected X,Y in metres, got {text!r}") from None
    if not (math.isfinite(x) and math.isfinite(y)):
        raise InputError("--at", f"coordinates must be finite numbers, got {text!r}")
    return x, y


def points_of(args: argparse.Namespace) -> list[tuple[float, float]]:
    """The ``--at`` points; at least one, else InputError naming ``--at``."""
    points = [parse_point(t) for t in args.at]
    if not points:
        raise InputError("--at", "give at least one point as --at X,Y (metres)")
    return points
