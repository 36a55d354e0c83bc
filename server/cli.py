"""The ``probewise`` command line: one sub-command per job, each in server/commands/.

Bad input of any kind exits with status 2 and one line on stderr naming the field and the
problem; no traceback reaches the user.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from probewise.core.model import ModelLimitError
from probewise.errors import InputError

# sub-command -> (module in probewise.commands, one-line help)
COMMANDS = {
    "serve": ("serve", "run the web app (loads the demo project into a fresh database)"),
    "init": ("init", "write a new model file to start a project from nothing"),
    "validate": ("validate", "check a model file; exit 0 when valid, 2 otherwise"),
    "posterior": ("posterior", "boundary depths and their uncertainty at points"),
    "bounds": ("bounds", "hard bounds on boundary depths at points, with their sources"),
    "evaluate": ("evaluate", "cost, duration and information gain of every layout"),
    "value": ("value", "design cost now, expected saving and net value of every layout"),
    "optimise": ("optimise", "propose a layout for a budget"),
    "rank": ("rank", "rank hand-made, guidance-grid and optimised options"),
    "schedule": ("schedule", "write the scoping schedule of a layout"),
    "import-probes": ("import_probes", "add existing probes from CSV, XLSX, AGS4 or AGS3"),
    "thickness": ("thickness", "each unit's thickness in the existing probes; ranges to check"),
    "import-gis": ("import_gis", "take a site outline, zones or areas from a GIS file"),
    "export": ("export", "export a schedule or the posterior grid to CSV/GeoJSON/GeoPackage"),
    "readings": ("readings", "check every existing reading against its prediction"),
    "fit": ("fit", "fit the ground model to the existing readings"),
    "behaviour": ("behaviour", "does the potential band behave like the fill or the natural soil"),
    "import-tests": ("import_tests", "add test results by depth to existing probes (CSV, AGS4)"),
}


class _Parser(argparse.ArgumentParser):
    """argparse that reports a usage error as one line and exit status 2."""

    def error(self, message: str):  # noqa: D401 - argparse hook
        sys.stderr.write(f"{self.prog}: {message}\n")
        raise SystemExit(2)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="probewise", description="Scope a ground investigation.")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    for name, (module, help_text) in COMMANDS.items():
        mod = importlib.import_module(f"probewise.commands.{module}")
        p = sub.add_parser(name, help=help_text, description=help_text)
        mod.add_arguments(p)
        p.set_defaults(_run=mod.run)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args._run(args) or 0)
    except (InputError, ModelLimitError) as exc:
        sys.stderr.write(f"{exc}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("cancelled\n")
        return 130


if __name__ == "__main__":
    raise SystemExit(main())
