"""`probewise optimise MODEL --budget N [...]`: propose a layout for a budget; with
``--objective net-value`` (the budget then optional), the layout of highest net value.

With ``--json`` it prints the document of docs/model-file.md ("CLI output contract"):
``{"layout": <as one entry of evaluate's layouts>, "curve": [{"cost",
"information_gain_bits"}]}`` plus an ``"optimisation"`` object saying how the search ran, a
``"refinement"`` object saying what the exchange refinement added (and a ``"notice"`` when the
evaluation grid was coarsened). Without it, a readable summary.
``-o OUT`` writes the model file with the proposed layout appended (under a unique name).
When the model has requirements and no layout within the budget meets them all, it prints
``{"layout": null, "unmet": [text]}`` (exit 0).
A progress bar goes to stderr when stderr is a terminal; Ctrl-C cancels (exit 130).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from dataclasses import replace

from probewise.app.contract import net_value_json, optimise_json, optimised_layout_entry
from probewise.app.project import load_project, write_model
from probewise.caution import CAUTION_LINE
from probewise.commands.options import (
    ProgressBar,
    add_optimiser_arguments,
    optimiser_input_error,
    optimiser_options,
    parse_positive,
)
from probewise.commands.tables import format_table, num, probe_table
from probewise.errors import InputError
from probewise.io.model_file import unique_layout_name


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument(
        "--budget",
        metavar="N",
        help="most the layout may cost (required unless --objective net-value, which it caps)",
    )
    parser.add_argument(
        "--objective",
        choices=("gain", "net-value"),  # OBJECTIVES of probewise.core.optimise_types
        default="gain",
        help="gain: most information within the budget (default); net-value: most expected "
        "saving less investigation cost of the model's design elements",
    )
    add_optimiser_arguments(parser)
    parser.add_argument("--name", help="name of the proposed layout")
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")
    parser.add_argument(
        "-o", "--output", metavar="OUT_MODEL", help="write the model file with the layout added"
    )


def optimise_text(out, project, budget: float) -> str:
    r = out.result
    cur = f" {project.currency}" if project.currency else ""
    names = project.ground.boundary_names
    per_1000 = "-" if r.gain_per_cost is None else f"{1000 * r.gain_per_cost:.4f}"
    parts = [
        f"Proposed layout: {r.name}",
        f"  budget {num(budget, 0)}{cur}; cost {num(r.cost, 0)}{cur}; {len(r.plans)} probes, "
        f"{num(r.metres, 1)} m, {num(r.duration_days, 1)} days",
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
    if project.requirements is not None and not project.requirements.empty:
        parts.append("  meets every requirement of the model (checked on the planned probes)")
    parts += [
        "",
    ]
    rows = [
        [
            name,
            num(m.std_mean_m),
            num(m.width90_mean_m),
            "-" if m.confident_fraction is None else f"{100 * m.confident_fraction:.0f}%",
        ]
        for name, m in r.boundaries.items()
    ]
    parts += [format_table(["Base of", "Mean std (m)", "Mean P5-P95 (m)", "Confident"], rows), ""]
    by_method = [
        [mid, str(t.count), num(t.metres, 1), num(t.cost, 0), num(t.duration_days, 1)]
        for mid, t in r.by_method.items()
    ]
    parts += [format_table(["Method", "Probes", "Metres", f"Cost{cur}", "Rig-days"], by_method), ""]
    parts += [probe_table(r.plans, names), ""]
    step = max(1, len(out.curve) // 12)
    curve = list(out.curve[::step])
    if out.curve and curve[-1] != out.curve[-1]:
        curve.append(out.curve[-1])
    parts += [
        "Cost-gain curve (best layout found at each cost)",
        format_table(
            [f"Cost{cur}", "Gain (bits)"], [[num(c, 0), f"{g:.3f}"] for c, g in curve], left=0
        ),
        "",
        CAUTION_LINE,
    ]
    return "\n".join(parts)


def net_value_text(out, project, budget: float | None) -> str:
    """The net-value proposal: its value, the elements, the probes and the saving-cost curve."""
    r, v = out.result, out.value
    cur = f" {project.currency}" if project.currency else ""
    cap = "no budget" if budget is None else f"budget {num(budget, 0)}{cur}"
    parts = [
        f"Proposed layout: {r.name} (objective: net value; {cap})",
        f"  investigation cost {num(v.gi_cost, 0)}{cur}; {len(r.plans)} probes, "
        f"{num(r.metres, 1)} m, {num(r.duration_days, 1)} days",
        f"  design cost now {num(v.design_cost_now, 0)}{cur}; expected after "
        f"{num(v.design_cost_expected, 0)}{cur}; expected saving "
        f"{num(v.expected_saving, 0)}{cur}; net value {num(v.net_value, 0)}{cur}",
        f"  searched {len(out.candidates.xy)} locations at {out.candidate_spacing_m:g} m "
        f"(min. spacing {out.min_spacing_m:g} m) on {out.optimisation_cells} cells of "
        f"{out.optimisation_spacing_m:g} m; {len(out.runs)} greedy runs in {out.seconds:.1f} s",
    ]
    if not r.plans:
        parts.append("  No probe found pays for itself: the best is to add none.")
    rows = [
        [e.name, e.kind, num(e.cost_now, 0), num(e.cost_expected, 0), num(e.expected_saving, 0),
         "-" if e.p_cheaper_allowed is None else f"{100 * e.p_cheaper_allowed:.1f}%"]
        for e in v.elements
    ]  # fmt: skip
    heads = ["Element", "Kind", f"Cost now{cur}", "Expected after", "Saving", "P(cheaper)"]
    parts += ["", format_table(heads, rows), ""]
    if r.plans:
        parts += [probe_table(r.plans, project.ground.boundary_names), ""]
    curve = list(out.value_curve)
    step = max(1, len(curve) // 15)
    shown = [p for n, p in enumerate(curve) if n % step == 0 or p.optimum or n == len(curve) - 1]
    rows = [
        [str(p.probes), num(p.cost, 0), num(p.expected_saving, 0), num(p.net_value, 0),
         "<- optimum" if p.optimum else ""]
        for p in shown
    ]  # fmt: skip
    parts += [
        "Saving-cost curve of the chosen run (optimisation grid; cost includes mobilisation)",
        format_table(["Probes", f"GI cost{cur}", "Expected saving", "Net value", ""], rows, left=0),
        "",
        "Expected figures average over the readings the layout may return.",
        CAUTION_LINE,
    ]
    return "\n".join(parts)


def unmet_answer(exc, as_json: bool) -> int:
    """The answer when the budget cannot meet every requirement: which ones, exit 0."""
    if as_json:
        doc = {"layout": None, "unmet": list(exc.unmet)}
        sys.stdout.write(json.dumps(doc, allow_nan=False) + "\n")
    else:
        lines = [f"No layout within a budget of {num(exc.budget, 0)} meets every requirement:"]
        lines += [f"  - {text}" for text in exc.unmet] + ["", CAUTION_LINE]
        sys.stdout.write("\n".join(lines) + "\n")
    return 0


def run(args: argparse.Namespace) -> int:
    from probewise.core.grid import EmptyGridError
    from probewise.core.optimise import (
        OptimiseError,
        RequirementsUnmetError,
        optimise,
        prepare_optimisation,
    )

    model, project = load_project(args.model)
    net_value = args.objective == "net-value"
    budget = parse_positive(args.budget, "--budget")
    if budget is None and not net_value:
        raise InputError("--budget", "required (only --objective net-value may go without one)")
    if net_value and not project.elements:
        raise InputError("elements", "the model has no design elements: the net value needs one")
    options = replace(
        optimiser_options(args, project, math.inf if budget is None else budget),
        objective=args.objective,
    )
    if args.name is not None and not args.name.strip():
        raise InputError("--name", "must not be empty")
    default = "Optimised for net value" if net_value else f"Optimised for {budget:g}"
    wanted = args.name.strip() if args.name else default
    name = unique_layout_name(model, wanted)
    bar = ProgressBar(sys.stderr.isatty())
    try:
        setup = prepare_optimisation(project, options, bar)
        out = optimise(project, options, progress=bar, name=name, setup=setup)
        notice = getattr(setup.evaluator, "grid_notice", None)
    except RequirementsUnmetError as exc:  # an answer, not bad input: exit 0, say which
        bar.close()
        return unmet_answer(exc, args.json)
    except (OptimiseError, EmptyGridError) as exc:
        raise optimiser_input_error(exc) from None
    finally:
        bar.close()
    if notice:
        sys.stderr.write(f"notice: {notice}\n")
    if args.output:
        entry = optimised_layout_entry(out, name, budget, options.methods)
        updated = dict(model, layouts=[*model.get("layouts", []), entry])
        write_model(updated, args.output)
    names = project.ground.boundary_names
    if args.json:
        if net_value:
            doc = net_value_json(out, names, project.currency, budget, notice)
        else:
            doc = optimise_json(out, names, notice)
        sys.stdout.write(json.dumps(doc, allow_nan=False) + "\n")
    elif net_value:
        sys.stdout.write(net_value_text(out, project, budget) + "\n")
    else:
        sys.stdout.write(optimise_text(out, project, budget) + "\n")
        if args.output:
            sys.stdout.write(f"wrote {args.output} with layout {name!r} added\n")
    return 0
