"""`probewise import-probes MODEL FILE [-o OUT]`: earlier probes from CSV, XLSX, AGS4 or AGS3.

Tables follow docs/import-formats.md (wide: one row per probe; long: one row per layer).
AGS files (AGS4 or AGS3, told apart by their first row) need every layer given a project
unit: by its geology code (``--mapping CODE=UNIT``, ``CODE=-`` to leave it out) or by its
description (``--mapping-text PATTERN=UNIT``, ordered rules, first match wins), and every
location type a method (``--method-for TYPE=METHOD`` or ``--default-method``). Without ``-o``,
with ``--preview``, or while layers are unmapped, it prints what it read (the mapping table,
what each text rule caught, the thickness of each unit in the holes) and writes nothing.
Probes outside the site are refused, with their ids, unless ``--leave-outside`` leaves them
out; locations whose layers break the model's rules are refused unless ``--skip-problems``
leaves them out.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from probewise.app.project import read_model, write_model
from probewise.commands.options import parse_pairs
from probewise.errors import InputError

FORMAT_SUFFIXES = {".csv": "csv", ".txt": "csv", ".xlsx": "xlsx", ".ags": "ags"}
AGS_FORMATS = ("ags", "ags4", "ags3")  # "ags": AGS4 or AGS3, told by the first row
# The flags that set each reader option a message calls for (probewise.errors.OptionNeededError).
OPTION_FLAGS = {
    "leave_outside": "--leave-outside",
    "method_by_type": "--method-for TYPE=METHOD, or --default-method",
}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("model", metavar="MODEL", help="model file (JSON, schema probewise/1)")
    parser.add_argument("file", metavar="FILE", help="probes: .csv, .xlsx or AGS4/AGS3 .ags")
    parser.add_argument(
        "--format",
        choices=("csv", "xlsx", "ags4", "ags3"),
        help="default: extension (.ags: AGS4 or AGS3, told by the first row)",
    )
    parser.add_argument(
        "--mapping",
        action="append",
        metavar="CODE=UNIT",
        help="geology code (AGS, or the unit column of a long table) -> project unit; "
        "CODE=- leaves it out; repeat",
    )
    parser.add_argument(
        "--mapping-file", metavar="JSON", help='mapping as a JSON object {"CODE": "UNIT"}'
    )
    parser.add_argument(
        "--mapping-text",
        action="append",
        metavar="PATTERN=UNIT",
        help="AGS layers whose description contains PATTERN (case-insensitive; /.../ for a "
        "regular expression) -> project unit, where no --mapping decides; in order, first "
        "match wins; PATTERN=- leaves the layer out; repeat",
    )
    parser.add_argument(
        "--method-for",
        action="append",
        metavar="TYPE=METHOD",
        help="AGS location type (LOCA_TYPE, HOLE_TYPE) -> method id",
    )
    parser.add_argument("--default-method", metavar="ID", help="method for rows/types not given")
    parser.add_argument(
        "--replace", action="store_true", help="replace the existing probes instead of adding"
    )
    parser.add_argument(
        "--leave-outside", action="store_true", help="leave out (and list) probes outside the site"
    )
    parser.add_argument(
        "--skip-problems",
        action="store_true",
        help="leave out (and list) rows or locations that break the model's rules",
    )
    parser.add_argument(
        "--preview", action="store_true", help="show what would be read; write nothing"
    )
    parser.add_argument("-o", "--output", metavar="OUT", help="updated model file to write")
    parser.add_argument(
        "--stage",
        metavar="TEXT",
        help="stage label for every imported probe (e.g. 'Phase 2'), for readings --by-stage",
    )


def _read_bytes(path: str) -> bytes:
    p = Path(path)
    try:
        return p.read_bytes()
    except FileNotFoundError:
        raise InputError("FILE", f"file not found: {path}") from None
    except IsADirectoryError:
        raise InputError("FILE", f"is a folder, not a file: {path}") from None
    except OSError as exc:
        raise InputError("FILE", f"cannot read {path}: {exc.strerror or exc}") from None


def _mapping(args: argparse.Namespace) -> dict[str, str]:
    mapping: dict[str, str] = {}
    if args.mapping_file:
        try:
            loaded = json.loads(Path(args.mapping_file).read_text(encoding="utf-8-sig"))
        except FileNotFoundError:
            raise InputError("--mapping-file", f"file not found: {args.mapping_file}") from None
        except (OSError, ValueError) as exc:
            raise InputError("--mapping-file", f"is not readable JSON ({exc})") from None
        if not isinstance(loaded, dict) or not all(
            isinstance(k, str) and isinstance(v, str | None) for k, v in loaded.items()
        ):
            raise InputError("--mapping-file", 'must be a JSON object {"CODE": "UNIT", ...}')
        mapping.update({k: v or "" for k, v in loaded.items()})
    mapping.update(parse_pairs(args.mapping, "--mapping"))
    return mapping


def _table(headers: list[str], rows: list[list[str]], right: tuple[int, ...] = ()) -> str:
    """Plain-text table, columns left-aligned except those in ``right`` (numbers)."""
    cells = [headers, *rows]
    widths = [max(len(r[c]) for r in cells) for c in range(len(headers))]

    def line(row: list[str]) -> str:
        return "  ".join(
            v.rjust(w) if c in right else v.ljust(w)
            for c, (v, w) in enumerate(zip(row, widths, strict=True))
        ).rstrip()

    return "\n".join([line(headers), "  ".join("-" * w for w in widths), *map(line, rows)])


def _show_list(title: str, items: list[str]) -> None:
    if items:
        print(f"{title} ({len(items)}):")
        for item in items:
            print(f"  {item}")


def _probe_rows(probes: list[dict], outside: list[str]) -> list[list[str]]:
    rows = []
    for p in probes:
        observed = ", ".join(f"{u} {d:g}" for u, d in p["observed"].items()) or "-"
        where = "outside the site" if p["id"] in outside else ""
        rows.append(
            [
                p["id"],
                p["method"],
                f"{p['x']:.2f}",
                f"{p['y']:.2f}",
                f"{p['final_depth_m']:g}",
                observed,
                where,
            ]
        )
    return rows


def _print_probes(probes: list[dict], outside: list[str]) -> None:
    headers = ["id", "method", "x", "y", "final m", "observed bases (m)", ""]
    print(_table(headers, _probe_rows(probes, outside), right=(2, 3, 4)))


def run(args: argparse.Namespace) -> int:
    from probewise.errors import OptionNeededError

    try:
        return _run(args)
    except OptionNeededError as exc:
        raise InputError(exc.field, f"{exc.problem} ({OPTION_FLAGS[exc.option]})") from None


def _run(args: argparse.Namespace) -> int:
    fmt = args.format or FORMAT_SUFFIXES.get(Path(args.file).suffix.lower())
    if fmt is None:
        raise InputError("--format", f"cannot tell the format of {args.file!r}; give --format")
    model = read_model(args.model)
    data = _read_bytes(args.file)
    name = Path(args.file).name
    mapping = _mapping(args)
    if fmt in AGS_FORMATS:
        probes, outside, problems, notes = _from_ags(args, model, data, name, mapping, fmt)
        if probes is None:
            return 0
    else:
        probes, outside, problems, notes = _from_table(args, model, data, name, mapping)
        if probes is None:
            return 0

    if problems and not args.skip_problems:
        raise InputError(
            name,
            f"{len(problems)} row(s) or location(s) break the model's rules (listed above); "
            "fix them or leave them out (--skip-problems)",
        )
    if outside and not args.leave_outside:
        from probewise.io.probes_in import outside_error

        raise outside_error(name, outside)
    importable = [p for p in probes if p["id"] not in set(outside)]
    if not importable:
        raise InputError(name, "no probe left to import")
    if args.stage is not None:  # the results of one stage of fieldwork
        if not args.stage.strip():
            raise InputError("--stage", "must be a non-empty text")
        importable = [{**p, "stage": args.stage} for p in importable]

    from probewise.io.probes_in import merge_existing

    updated = merge_existing(model, importable, mode="replace" if args.replace else "append")
    write_model(updated, args.output)
    print(
        f"imported {len(importable)} probe(s) from {name} into {args.output} "
        f"({'replacing' if args.replace else 'added to'} the existing probes)"
    )
    if outside:
        print(f"left out, outside the site: {', '.join(outside)}")
    if problems:
        print(f"left out, breaking the model's rules: {len(problems)} (listed above)")
    for note in notes:
        print(f"note: {note}")
    return 0


def _from_table(args, model, data, name, mapping):
    from probewise.io.probes_in import preview_csv

    if args.mapping_text:
        raise InputError(
            "--mapping-text", "applies to AGS files (it matches layer descriptions), not tables"
        )
    preview = preview_csv(
        data,
        model,
        filename=name if args.format != "xlsx" else str(Path(name).with_suffix(".xlsx")),
        method_default=args.default_method,
        mapping=mapping or None,
    )
    show = args.preview or not args.output
    if show or preview.problems:
        print(f"{name}: {preview.format} layout, {preview.rows} data row(s)")
        print(_table(["column", "read as"], [[c, w] for c, w in preview.columns.items()]))
        print()
        if preview.probes:
            _print_probes(preview.probes, preview.outside_site)
        _show_list("problems", preview.problems)
        _show_list("notes", preview.notes)
        print_thickness_summary(model, preview.probes)
    if show:
        if not args.output and not args.preview:
            print("nothing written: give -o OUT to import")
        return None, None, None, None
    if not preview.probes and not preview.problems:
        raise InputError(name, "has no probe rows to import")
    return preview.probes, preview.outside_site, preview.problems, preview.notes


def _from_ags(args, model, data, name, mapping, fmt):
    from probewise.io.probes_in import (
        ags4_to_existing,
        decide_layers,
        read_ags,
        read_ags3,
        read_ags4,
        resolve_mapping,
    )

    reader = {"ags": read_ags, "ags4": read_ags4, "ags3": read_ags3}[fmt]
    holes = reader(data, filename=name)
    rules = _text_rules(args, model)
    decided = decide_layers(holes, resolve_mapping(mapping, model), rules, model)
    unmapped = list(decided.undecided)
    show = args.preview or not args.output or unmapped
    if show:
        _print_mapping(holes, model, mapping, decided)
    if unmapped and not args.preview:
        shown = ", ".join(f"{c} ({n} layer(s))" for c, n in decided.undecided.items())
        raise InputError(
            "--mapping",
            f"no unit for geology code(s) {shown}; give CODE=UNIT for each (or CODE=- to "
            "leave it out), or --mapping-text PATTERN=UNIT rules that match their descriptions",
        )
    result = None
    if not unmapped:
        result = ags4_to_existing(
            holes,
            model,
            mapping,
            method_by_type=parse_pairs(args.method_for, "--method-for"),
            default_method=args.default_method,
            text_rules=rules,
        )
        if show or result.problems:
            print()
            _print_probes(result.probes, result.outside_site)
            _show_list("problems", result.problems)
            _show_list("notes", result.notes)
            print_thickness_summary(model, result.probes)
    if show:
        if not args.output and not args.preview:
            print("nothing written: give -o OUT to import")
        return None, None, None, None
    return result.probes, result.outside_site, result.problems, result.notes


def _text_rules(args, model):
    from probewise.io.probes_in import parse_text_rules

    return parse_text_rules(args.mapping_text, model, "--mapping-text")


def _print_mapping(holes, model, mapping, decided) -> None:
    """The codes with their units, then what each text rule caught."""
    from probewise.io.probes_in import ags4_legends

    legends = ags4_legends(holes)
    units = {u["name"].lower(): u["name"] for u in model["units"]}
    print(
        f"{holes.filename} ({holes.format}): {len(holes.holes)} location(s), "
        f"{sum(n for *_x, n in legends)} layer(s)"
    )
    rows = []
    for code, desc, count in legends:
        target = mapping.get(code)
        if target is not None:
            shown = "(left out)" if target.strip() in ("", "-") else units.get(target.lower())
        elif code in decided.undecided:
            left = decided.undecided[code]
            shown = "?" if left == count else f"? ({left} not matched by a text rule)"
        else:
            shown = "by text rules"
        rows.append([code, desc[:60], str(count), shown or target])
    print(_table(["code", "description", "layers", "unit"], rows, right=(2,)))
    if decided.hits:
        print()
        print("text rules (first match wins; used where no code mapping decides):")
        rule_rows = []
        for hit in decided.hits:
            example = hit.examples[0][:70] if hit.examples else "-"
            rule_rows.append([hit.rule.pattern, hit.rule.unit_label, str(hit.layers), example])
            rule_rows += [["", "", "", e[:70]] for e in hit.examples[1:]]
        print(_table(["pattern", "unit", "layers", "examples"], rule_rows, right=(2,)))
        idle = [h.rule.pattern for h in decided.hits if h.layers == 0]
        if idle:
            print(f"note: text rule(s) that caught no layer: {', '.join(idle)}")
    types = sorted({h.type or "(blank)" for h in holes.holes})
    print(f"location types: {', '.join(types)}")
    print(f"project units: {', '.join(u['name'] for u in model['units'])}")
    _show_list("problems", list(holes.problems))


def print_thickness_summary(model, probes) -> bool:
    """Each unit's thickness in the holes read, beside the model's range (docs/model.md)."""
    from probewise.app.thickness_stats import display_rows, unit_thicknesses

    summaries = unit_thicknesses(model, probes)
    if not any(s.holes for s in summaries):
        return False
    rows = [
        [r["unit"], r["met"], r["quartiles"], r["mean_all"], r["model"], r["suggested"]]
        for r in display_rows(model, summaries)
    ]
    print()
    print("thickness in the holes read (m; holes that give the unit's top and base):")
    headers = ["unit", "met (share)", "min / Q1 / median / Q3 / max where met", "mean"]
    headers += ["model range", "suggested (P5 / median / P95)"]
    print(_table(headers, rows))
    _show_list("thickness warnings", [w for s in summaries for w in s.warnings])
    return True
