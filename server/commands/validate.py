"""`probewise validate MODEL.json`: check a model file against schema "probewise/1".

Exit 0 with one line of counts when the file is valid; otherwise the CLI prints the first
problem as ``field: problem`` on stderr and exits 2. Allowed-but-notable things (a planned
probe inside an exclusion) follow the valid line as ``note:`` lines.
"""

from __future__ import annotations

import argparse

from probewise.io.model_file import list_notes, load_model_file, summarise_model


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", metavar="MODEL", help="model file (JSON, schema probewise/1)")


def run(args: argparse.Namespace) -> int:
    model = load_model_file(args.model)
    if model.get("history"):  # history bounds that conflict with other bounds (to_core)
        from probewise.app.project import core_project

        core_project(model)
    print(f"{args.model}: valid ({summarise_model(model)})")
    for note in list_notes(model):
        print(f"note: {note}")
    return 0
