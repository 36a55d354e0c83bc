"""`probewise evaluate MODEL [--json]`: cost, duration and information gain of every layout.

With ``--json`` it prints exactly the document of MODEL-FILE.md ("CLI output contract"):
``{"baseline": <metrics>, "layouts": [<metrics> + name, cost, metres, duration_days,
information_gain_bits, gain_per_cost, pareto, probes]}``, plus an optional ``"notice"`` when
the evaluation grid was coarsened (too many cells); the notice is also printed on stderr.
Without ``--json``, readable tables.
"""

from __future__ import annotations

import argparse
import json
import sys

CAUTION = (
    "Caution: these results support, and do not replace, the judgement of a qualified "
    "geotechnical professional; local codes, standards and licensed practice govern; clear "
    "buried services and obtain permits before any intrusive work."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")


def load_project(path: str):
    """Read, validate and convert a model file; bad input raises InputError."""
    from server.errors import InputError
    from server.model_file import load_model_file
    from server.to_core import to_core

    model = load_model_file(path)
    try:
        return model, to_core(model)
    except (KeyError, TypeError, ValueError) as exc:  # the validator should have caught it
        raise InputError("model", f"cannot be used: {exc}") from None


def format_table(headers: list[str], rows: list[list[str]], left: int = 1) -> str:
    """Aligned plain-text table; the first ``left`` columns left-aligned, the rest right."""
    cells = [headers, *rows]
    widths = [max(len(r[c]) for r in cells) for c in range(len(headers))]

    def line(row):
        return "  ".join(
            v.ljust(w) if c < left else v.rjust(w)
            for c, (v, w) in enumerate(zip(row, widths, strict=True))
        ).rstrip()

    rule = "  ".join("-" * w for w in widths)
    return "\n".join([line(headers), rule, *(line(r) for r in rows)])


def _num(value: float | None, digits: int = 2) -> str:
    return "-" if value is None else f"{value:,.{digits}f}"


def metrics_json(boundaries: dict) -> dict:
    return {
        "boundaries": {
            name: {
                "std_mean_m": m.std_mean_m,
                "width90_mean_m": m.width90_mean_m,
                "uncertain_volume_m3": m.uncertain_volume_m3,
                "confident_fraction": m.confident_fraction,
            }
            for name, m in boundaries.items()
        }
    }


def layout_json(result, boundary_names: tuple[str, ...]) -> dict:
    """One entry of evaluate's ``layouts`` (also used by the optimiser's output)."""
    out = {"name": result.name}
    out.update(metrics_json(result.boundaries))
    out.update(
        cost=result.cost,
        metres=result.metres,
        duration_days=result.duration_days,
        information_gain_bits=result.information_gain_bits,
        gain_per_cost=result.gain_per_cost,
        pareto=result.pareto,
        probes=[
            {
                "id": p.probe.id,
                "method": p.probe.method,
                "x": p.probe.x,
                "y": p.probe.y,
                "depth_m": p.depth_m,
                "observes": [boundary_names[k] for k in p.observes],
            }
            for p in result.plans
        ],
    )
    return out


def evaluation_json(evaluation) -> dict:
    """The ``--json`` document; ``notice`` only when the grid was coarsened."""
    names = evaluation.boundary_names
    out = {
        "baseline": metrics_json(evaluation.baseline.boundaries),
        "layouts": [layout_json(r, names) for r in evaluation.layouts],
    }
    notice = getattr(evaluation, "grid_notice", None)
    if notice:
        out["notice"] = notice
    return out


def probe_table(plans, boundary_names: tuple[str, ...]) -> str:
    """The planned probes of a layout as a readable table (position, depth, what each reads)."""
    rows = [
        [
            p.probe.id,
            p.probe.method,
            _num(p.probe.x, 1),
            _num(p.probe.y, 1),
            _num(p.depth_m, 2),
            ", ".join(boundary_names[k] for k in p.observes) or "-",
        ]
        for p in plans
    ]
    if not rows:
        return "(no probes)"
    headers = ["Probe", "Method", "X (m)", "Y (m)", "Depth (m)", "Observes base of"]
    return format_table(headers, rows, left=2)


def _boundary_table(boundaries: dict) -> str:
    rows = [
        [
            name,
            _num(m.std_mean_m),
            _num(m.width90_mean_m),
            _num(m.uncertain_volume_m3, 0),
            "-" if m.confident_fraction is None else f"{100 * m.confident_fraction:.0f}%",
        ]
        for name, m in boundaries.items()
    ]
    headers = ["Base of", "Mean std (m)", "Mean P5-P95 (m)", "Uncertain vol. (m3)", "Confident"]
    return format_table(headers, rows)


def evaluation_text(evaluation, currency: str) -> str:
    cur = f" ({currency})" if currency else ""
    grid = evaluation.grid
    parts = [
        f"Evaluation grid: {grid.n_cells} cells of {grid.spacing_m:g} m",
        "",
        "Baseline (existing probes only)",
        _boundary_table(evaluation.baseline.boundaries),
    ]
    rows = [
        [
            r.name,
            str(len(r.plans)),
            _num(r.metres, 1),
            _num(r.cost, 0),
            _num(r.duration_days, 1),
            _num(r.information_gain_bits, 3),
            "-" if r.gain_per_cost is None else f"{1000 * r.gain_per_cost:.4f}",
            "yes" if r.pareto else "no",
        ]
        for r in evaluation.layouts
    ]
    headers = [
        "Layout",
        "Probes",
        "Metres",
        f"Cost{cur}",
        "Days",
        "Gain (bits)",
        f"Bits per 1000 {currency}".rstrip(),
        "Pareto",
    ]
    parts += ["", "Layouts", format_table(headers, rows) if rows else "(no layouts)"]
    names = evaluation.boundary_names
    for r in evaluation.layouts:
        parts += ["", f"Layout: {r.name}", _boundary_table(r.boundaries), ""]
        parts.append(probe_table(r.plans, names))
    parts += ["", CAUTION]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    from server.core.evaluate import evaluate_project
    from server.core.grid import EmptyGridError
    from server.errors import InputError

    _, project = load_project(args.model)
    try:
        evaluation = evaluate_project(project)
    except EmptyGridError as exc:
        raise InputError("grid_spacing_m", str(exc)) from None
    if evaluation.grid_notice:
        sys.stderr.write(f"notice: {evaluation.grid_notice}\n")
    if args.json:
        sys.stdout.write(json.dumps(evaluation_json(evaluation), allow_nan=False) + "\n")
    else:
        sys.stdout.write(evaluation_text(evaluation, project.currency) + "\n")
    return 0
