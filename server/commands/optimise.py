"""`probewise optimise MODEL --budget N [...]`: propose a layout for a budget.

With ``--json`` it prints the document of MODEL-FILE.md ("CLI output contract"):
``{"layout": <as one entry of evaluate's layouts>, "curve": [{"cost",
"information_gain_bits"}]}`` plus an ``"optimisation"`` object saying how the search ran, a
``"refinement"`` object saying what the exchange refinement added (and a ``"notice"`` when the
evaluation grid was coarsened). Without it, a readable summary.
``-o OUT`` writes the model file with the proposed layout appended (under a unique name).
A progress bar goes to stderr when stderr is a terminal; Ctrl-C cancels (exit 130).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time

from server.commands.evaluate import (
    CAUTION,
    format_table,
    layout_json,
    load_project,
    probe_table,
)
from server.errors import InputError
from server.model_file import unique_layout_name

# OptimiseError.field -> the command-line option to name in the message
OPTION_OF_FIELD = {
    "budget": "--budget",
    "methods": "--methods",
    "candidate_spacing_m": "--candidate-spacing",
    "min_spacing_m": "--min-spacing",
}


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


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument("--budget", required=True, metavar="N", help="most the layout may cost")
    add_optimiser_arguments(parser)
    parser.add_argument("--name", help="name of the proposed layout")
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")
    parser.add_argument(
        "-o", "--output", metavar="OUT_MODEL", help="write the model file with the layout added"
    )


def parse_positive(text: str | None, option: str, what: str = "number") -> float | None:
    """A finite number > 0 from a command-line value (None stays None); else InputError."""
    if text is None:
        return None
    try:
        value = float(text)
    except ValueError:
        raise InputError(option, f"must be a positive {what}, not {text!r}") from None
    if not (math.isfinite(value) and value > 0):
        raise InputError(option, f"must be a positive {what}, not {text}")
    return value


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
    from server.core.optimise import OptimiseOptions

    return OptimiseOptions(
        budget=budget,
        methods=parse_methods(args.methods, project),
        candidate_spacing_m=parse_positive(
            args.candidate_spacing, "--candidate-spacing", "spacing in m"
        ),
        min_spacing_m=parse_positive(args.min_spacing, "--min-spacing", "spacing in m"),
    )


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


def layout_model_entry(layout) -> dict:
    """A core Layout as a model-file layout (depths left to the model, as the optimiser
    planned them)."""
    return {
        "name": layout.name,
        "probes": [
            {"id": p.id, "method": p.method, "x": p.x, "y": p.y}
            | ({} if p.depth_m is None else {"depth_m": p.depth_m})
            for p in layout.probes
        ],
    }


def optimise_json(out, boundary_names, notice: str | None = None) -> dict:
    """The ``--json`` document of one optimisation."""
    doc = {
        "layout": layout_json(out.result, boundary_names),
        "curve": [{"cost": c, "information_gain_bits": g} for c, g in out.curve],
        "optimisation": {
            "cells": out.optimisation_cells,
            "spacing_m": out.optimisation_spacing_m,
            "candidate_locations": int(len(out.candidates.xy)),
            "candidate_spacing_m": out.candidate_spacing_m,
            "min_spacing_m": out.min_spacing_m,
            "runs": len(out.runs),
            "seconds": out.seconds,
        },
    }
    r = out.refinement
    if r is not None:
        doc["refinement"] = {
            "greedy_gain_bits": r.greedy_gain_bits,
            "refined_gain_bits": r.refined_gain_bits,
            "moves": r.moves,
            "sweeps": r.sweeps,
            "candidate_locations": r.candidate_locations,
            "seconds": r.seconds,
        }
    if notice:
        doc["notice"] = notice
    return doc


def _num(value: float | None, digits: int = 2) -> str:
    return "-" if value is None else f"{value:,.{digits}f}"


def optimise_text(out, project, budget: float) -> str:
    r = out.result
    cur = f" {project.currency}" if project.currency else ""
    names = project.ground.boundary_names
    per_1000 = "-" if r.gain_per_cost is None else f"{1000 * r.gain_per_cost:.4f}"
    parts = [
        f"Proposed layout: {r.name}",
        f"  budget {_num(budget, 0)}{cur}; cost {_num(r.cost, 0)}{cur}; {len(r.plans)} probes, "
        f"{_num(r.metres, 1)} m, {_num(r.duration_days, 1)} days",
        f"  information gain {r.information_gain_bits:.3f} bits ({per_1000} bits per 1000{cur})",
        f"  searched {len(out.candidates.xy)} locations at {out.candidate_spacing_m:g} m "
        f"(min. spacing {out.min_spacing_m:g} m) on {out.optimisation_cells} cells of "
        f"{out.optimisation_spacing_m:g} m; {len(out.runs)} greedy runs in {out.seconds:.1f} s",
    ]
    ref = out.refinement
    if ref is not None and ref.sweeps:
        parts.append(
            f"  refinement by exchanges: {ref.greedy_gain_bits:.3f} bits (greedy) -> "
            f"{ref.refined_gain_bits:.3f} bits, {ref.moves} moves in {ref.sweeps} sweeps "
            f"over {ref.candidate_locations} locations"
        )
    parts += [
        "",
    ]
    rows = [
        [
            name,
            _num(m.std_mean_m),
            _num(m.width90_mean_m),
            "-" if m.confident_fraction is None else f"{100 * m.confident_fraction:.0f}%",
        ]
        for name, m in r.boundaries.items()
    ]
    parts += [format_table(["Base of", "Mean std (m)", "Mean P5-P95 (m)", "Confident"], rows), ""]
    by_method = [
        [mid, str(t.count), _num(t.metres, 1), _num(t.cost, 0), _num(t.duration_days, 1)]
        for mid, t in r.by_method.items()
    ]
    parts += [format_table(["Method", "Probes", "Metres", f"Cost{cur}", "Days"], by_method), ""]
    parts += [probe_table(r.plans, names), ""]
    step = max(1, len(out.curve) // 12)
    curve = list(out.curve[::step])
    if out.curve and curve[-1] != out.curve[-1]:
        curve.append(out.curve[-1])
    parts += [
        "Cost-gain curve (best layout found at each cost)",
        format_table(
            [f"Cost{cur}", "Gain (bits)"], [[_num(c, 0), f"{g:.3f}"] for c, g in curve], left=0
        ),
        "",
        CAUTION,
    ]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    from server.commands.export import write_model
    from server.core.grid import EmptyGridError
    from server.core.optimise import OptimiseError, optimise, prepare_optimisation

    model, project = load_project(args.model)
    budget = parse_positive(args.budget, "--budget")
    options = optimiser_options(args, project, budget)
    if args.name is not None and not args.name.strip():
        raise InputError("--name", "must not be empty")
    wanted = args.name.strip() if args.name else f"Optimised for {budget:g}"
    name = unique_layout_name(model, wanted)
    bar = ProgressBar(sys.stderr.isatty())
    try:
        setup = prepare_optimisation(project, options, bar)
        out = optimise(project, options, progress=bar, name=name, setup=setup)
        notice = getattr(setup.evaluator, "grid_notice", None)
    except (OptimiseError, EmptyGridError) as exc:
        raise optimiser_input_error(exc) from None
    finally:
        bar.close()
    if notice:
        sys.stderr.write(f"notice: {notice}\n")
    if args.output:
        updated = dict(model, layouts=[*model.get("layouts", []), layout_model_entry(out.layout)])
        write_model(updated, args.output)
    if args.json:
        doc = optimise_json(out, project.ground.boundary_names, notice)
        sys.stdout.write(json.dumps(doc, allow_nan=False) + "\n")
    else:
        sys.stdout.write(optimise_text(out, project, budget) + "\n")
        if args.output:
            sys.stdout.write(f"wrote {args.output} with layout {name!r} added\n")
    return 0
