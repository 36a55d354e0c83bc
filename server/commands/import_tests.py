"""`probewise import-tests MODEL FILE [--replace] [-o OUT]`: test results by depth onto the
project's existing probes, from a CSV table (probe, depth_m, parameter, value, unit) or an
AGS4 file (groups SCPT, DMTT, ISPT, LNMC, LLPL, CONG, TRIT; docs/import-formats.md).

Without ``-o`` it only reads the file and says what it found. A bad file exits 2 naming the
line and the field; nothing is written.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from probewise.errors import InputError

MAX_BYTES = 100 * 1024 * 1024


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", metavar="MODEL", help="model file (JSON, schema probewise/1)")
    parser.add_argument("file", metavar="FILE", help="test results: .csv or AGS4 .ags")
    parser.add_argument(
        "--replace",
        action="store_true",
        help="replace the results of the probes the file names (default: add to them)",
    )
    parser.add_argument("-o", "--output", metavar="OUT", help="updated model file to write")


def run(args: argparse.Namespace) -> int:
    from probewise.app.project import read_model, write_model
    from probewise.io.tests_in import merge_tests, read_tests

    model = read_model(args.model)
    path = Path(args.file)
    try:
        if path.stat().st_size > MAX_BYTES:
            raise InputError("FILE", f"is larger than {MAX_BYTES} bytes")
        data = path.read_bytes()
    except OSError as exc:
        raise InputError("FILE", f"cannot read {path}: {exc.strerror or exc}") from None
    read = read_tests(data, model, filename=path.name)
    merged = merge_tests(model, read, "replace" if args.replace else "append")
    found = ", ".join(f"{k} {v}" for k, v in read.counts.items())
    line = f"{read.total} results on {len(read.by_probe)} probes ({found})"
    if args.output:
        write_model(merged, args.output)
        sys.stdout.write(f"{line}; wrote {args.output}\n")
    else:
        from probewise.io.model_file import validate_model

        validate_model(merged)
        sys.stdout.write(f"{line}; nothing written (give -o OUT)\n")
    return 0
