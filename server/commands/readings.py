"""`probewise readings MODEL [--by-stage] [--json]`: every existing reading against its
prediction from the other probes (or from earlier stages only, with ``--by-stage``).

With ``--json`` it prints the document of docs/model-file.md ("CLI output contract"):
``{"readings": [{"probe", "stage", "boundary", "reading_m", "predicted_mean_m",
"predicted_std_m", "precision_m", "z", "flag"}], "boundaries": {"<unit name>": {"n",
"share_within_90", "mean_z2", "verdict"}}}``. Without, a table and a sentence per boundary.
"""

from __future__ import annotations

import argparse
import json
import sys

from probewise.app.project import load_project
from probewise.app.readings import project_readings, reading_notes, readings_json
from probewise.caution import CAUTION_LINE
from probewise.commands.tables import format_table, num


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", help="model file (JSON, schema probewise/1)")
    parser.add_argument(
        "--by-stage",
        action="store_true",
        help="predict each reading from earlier stages only (what was expected before drilling)",
    )
    parser.add_argument("--json", action="store_true", help="print JSON for a machine to read")


def readings_text(report) -> str:
    c = report.checks
    notes = reading_notes(report)
    how = "earlier stages only" if report.by_stage else "every other probe"
    parts = [f"Readings against predictions from {how} (depths in m below ground level)"]
    rows = [
        [
            report.probe_ids[c.probe[j]],
            report.stages[c.stage[j]] if c.stage[j] >= 0 else "-",
            report.boundary_names[c.boundary[j]],
            num(c.reading_m[j]),
            num(c.predicted_mean_m[j]),
            num(c.predicted_std_m[j]),
            num(c.precision_m[j]),
            f"{c.z[j]:.2f}",
            ("FLAG " + notes[j]) if c.flag[j] else "",
        ]
        for j in range(len(c.z))
    ]
    headers = ["Probe", "Stage", "Base of", "Reading", "Predicted", "Std", "Precision", "z", ""]
    parts.append(format_table(headers, rows) if rows else "(no existing readings)")
    parts += ["", "Per boundary (|z| <= 1.645 expected for 90%; mean z^2 about 1)"]
    for name, s in report.summaries.items():
        share = "-" if s.share_within_90 is None else f"{100 * s.share_within_90:.0f}%"
        z2 = "-" if s.mean_z2 is None else f"{s.mean_z2:.2f}"
        parts.append(f"  {name}: n {s.n}, within 90% {share}, mean z^2 {z2}: {s.verdict}")
    parts += ["", CAUTION_LINE]
    return "\n".join(parts)


def run(args: argparse.Namespace) -> int:
    _, project = load_project(args.model)
    report = project_readings(project, by_stage=args.by_stage)
    if args.json:
        sys.stdout.write(json.dumps(readings_json(report), allow_nan=False) + "\n")
    else:
        sys.stdout.write(readings_text(report) + "\n")
    return 0
