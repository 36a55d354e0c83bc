"""`probewise rank MODEL [--budgets N,N] [--guidance METHOD:SPACING ...] [--json]`.

Ranks every option side by side: the model's hand-made layouts, guidance grids (one method
on a regular grid, ``--guidance CPT:25``) and optimised layouts at the given budgets (default:
the cost of each hand-made layout), all evaluated on the same grid. Prints a table sorted by
cost with duration, information gain, gain per cost and the Pareto flag, or with ``--json``
``{"options": [{"name", "kind", "n_probes", "cost", "metres", "duration_days",
"information_gain_bits", "gain_per_cost", "pareto"}], "budgets": [...]}``. With design
elements each option also carries ``expected_saving`` and ``net_value`` and the options are
sorted by net value (docs/model.md "The value of an investigation"). With requirements each
option carries ``requirements_met`` and ``unmet`` (in words), and a budget no layout can meet
them for is listed in ``unmet_budgets`` (``{"budget", "unmet"}``) instead of an option.
"""

from __future__ import annotations

import argparse
import json
import sys
from dataclasses import replace

from probewise.app.project import load_project
from probewise.caution import CAUTION_LINE
from probewise.commands.options import (
    ProgressBar,
    add_optimiser_arguments,
    optimiser_input_error,
    optimiser_options,
    parse_positive,
)
from probewise.commands.tables import format_table
from probewise.errors import InputError
from probewise.io.model_file import unique_name


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument(
        "--budgets",
        metavar="N,N",
        help="budgets to optimise for (default: the cost of each hand-made layout)",
    )
    parser.add_argument(
        "--guidance",
        action="append",
        metavar="METHOD:SPACING",
        help="add a guidance grid of METHOD at SPACING m (repeatable), e.g. BH:40",
    )
    add_optimiser_arguments(parser)
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")


def parse_budgets(text: str | None) -> list[float] | None:
    if text is None:
        return None
    parts = [p.strip() for p in text.split(",") if p.strip()]
    if not parts:
        raise InputError("--budgets", "give at least one budget, e.g. --budgets 20000,40000")
    return sorted({parse_positive(p, "--budgets") for p in parts})


def guidance_layouts(items: list[str] | None, project, taken: set[str]):
    """Layouts of ``METHOD:SPACING`` items; InputError naming --guidance when bad."""
    from probewise.core.options import guidance_grid_layout

    out = []
    for item in items or []:
        method, sep, spacing = item.rpartition(":")
        if not sep or not method.strip():
            raise InputError("--guidance", f"expected METHOD:SPACING (e.g. BH:40), got {item!r}")
        value = parse_positive(spacing, "--guidance", "spacing in m")
        try:
            layout = guidance_grid_layout(project, method.strip(), value)
        except ValueError as exc:
            raise InputError("--guidance", f"{item}: {exc}") from None
        layout = replace(layout, name=unique_name(layout.name, taken))
        taken.add(layout.name)
        out.append(layout)
    return out


def ranking_json(ranked, budgets, unmet=None) -> dict:
    return {
        "options": [
            {
                "name": o.name,
                "kind": o.kind,
                "n_probes": o.n_probes,
                "cost": o.cost,
                "metres": o.metres,
                "duration_days": o.duration_days,
                "rig_days": o.rig_days,
                "information_gain_bits": o.information_gain_bits,
                "gain_per_cost": o.gain_per_cost,
                "pareto": o.pareto,
            }
            | (
                {}
                if o.net_value is None
                else {"expected_saving": o.expected_saving, "net_value": o.net_value}
            )
            | (
                {}
                if o.requirements_met is None
                else {"requirements_met": o.requirements_met, "unmet": list(o.unmet)}
            )
            for o in ranked
        ],
        "budgets": list(budgets),
    } | ({"unmet_budgets": unmet} if unmet else {})


def ranking_text(ranked, currency: str) -> str:
    cur = f" ({currency})" if currency else ""
    rows = [
        [
            o.name,
            o.kind,
            str(o.n_probes),
            f"{o.cost:,.0f}",
            f"{o.duration_days:,.1f}",
            f"{o.information_gain_bits:.3f}",
            "-" if o.gain_per_cost is None else f"{1000 * o.gain_per_cost:.4f}",
            "yes" if o.pareto else "no",
        ]
        + ([] if o.net_value is None else [f"{o.expected_saving:,.0f}", f"{o.net_value:,.0f}"])
        for o in ranked
    ]
    by_value = bool(ranked) and ranked[0].net_value is not None
    headers = [
        "Option",
        "Kind",
        "Probes",
        f"Cost{cur}",
        "Calendar days",
        "Gain (bits)",
        f"Bits per 1000 {currency}".rstrip(),
        "Pareto",
    ] + (["Expected saving", "Net value"] if by_value else [])
    order = "net value (expected saving less cost)" if by_value else "cost"
    return "\n".join(
        [
            f"Options ranked by {order} (Pareto: no other option gains as much for less)",
            format_table(headers, rows, left=2),
            "",
            CAUTION_LINE,
        ]
    )


def unmet_lines(ranked, unmet) -> list[str]:
    """The options that miss a requirement and the budgets that could not meet them."""
    lines = [f"  {o.name}: misses " + "; ".join(o.unmet) for o in ranked if o.unmet]
    lines += [
        f"  budget {u['budget']:,.0f}: no layout meets " + "; ".join(u["unmet"]) for u in unmet
    ]
    return ["", "Requirements not met", *lines] if lines else []


def run(args: argparse.Namespace) -> int:
    from probewise.core.grid import EmptyGridError
    from probewise.core.optimise import (
        OptimiseError,
        RequirementsUnmetError,
        optimise,
        prepare_optimisation,
    )
    from probewise.core.options import rank_options
    from probewise.core.value import EmptyElementError
    from probewise.io.model_elements import no_cell_error

    _, project = load_project(args.model)
    budgets = parse_budgets(args.budgets)
    if budgets is None and project.ground.thickness_correlation:
        # the optimiser refuses correlated thicknesses; the other options can still be ranked
        budgets = []
        sys.stderr.write(
            "rank: no optimised options: the optimiser does not yet handle correlated unit "
            "thicknesses (thickness_correlation); give --budgets to see the refusal\n"
        )
    hand = list(project.layouts)
    taken = {lay.name for lay in hand}
    guidance = guidance_layouts(args.guidance, project, taken)
    kinds = {lay.name: "hand" for lay in hand} | {lay.name: "guidance" for lay in guidance}
    bar = ProgressBar(sys.stderr.isatty())
    known = {}
    optimised = []
    unmet: list[dict] = []
    try:
        options = optimiser_options(args, project, 1.0)
        setup = None
        if budgets is None or budgets:
            setup = prepare_optimisation(project, options, bar)
        if budgets is None:  # the cost of each hand-made layout
            budgets = sorted({setup.problem.layout_cost(lay) for lay in hand})
        if not budgets and not hand and not guidance:
            raise InputError(
                "--budgets", "the model has no layouts to rank; give --budgets or --guidance"
            )
        for n, budget in enumerate(budgets):

            def progress(fraction, message, n=n, budget=budget):
                bar((n + fraction) / len(budgets), f"budget {budget:g}: {message}")

            name = unique_name(f"Optimised for {budget:g}", taken)
            taken.add(name)
            try:
                out = optimise(
                    project, replace(options, budget=budget), progress, name=name, setup=setup
                )
            except RequirementsUnmetError as exc:
                unmet.append({"budget": budget, "unmet": list(exc.unmet)})
                continue
            except OptimiseError as exc:
                if exc.field != "budget":
                    raise
                raise InputError("--budgets", str(exc)) from None
            optimised.append(out.layout)
            kinds[name] = "optimised"
            known[name] = out.result
        evaluator = setup.evaluator if setup is not None else None
        ranked = rank_options(project, hand + guidance + optimised, kinds, evaluator, known)
    except (OptimiseError, EmptyGridError) as exc:
        raise optimiser_input_error(exc) from None
    except EmptyElementError as exc:
        raise no_cell_error(exc.index, exc.name) from None
    finally:
        bar.close()
    if args.json:
        doc = ranking_json(ranked, budgets, unmet)
        sys.stdout.write(json.dumps(doc, allow_nan=False) + "\n")
    else:
        text = ranking_text(ranked, project.currency)
        body, caution = text.rsplit("\n", 1)  # the caution stays last
        sys.stdout.write("\n".join([body, *unmet_lines(ranked, unmet), "", caution]) + "\n")
    return 0
