"""A small reader of AGS3 text: groups of quoted, comma-separated rows.

AGS3 (Association of Geotechnical and Geoenvironmental Specialists, "Electronic transfer of
geotechnical and geoenvironmental data", edition 3.1, 2004) writes each group as

    "**HOLE"                          group name (``**?NAME`` for a user-defined group)
    "*HOLE_ID","*HOLE_TYPE",...       headings (``*?NAME`` user-defined); a long heading line
                                      ends with a comma and goes on on the next ``*`` line
    "<UNITS>","","m",...              units of the headings
    "BH1","CP",...                    data rows
    "<CONT>","","...more text"        the rest of the row above, field by field

python-ags4 reads AGS4 only, so this reader is our own; it knows only the layout above and
hands back each group's rows as text, keyed by heading, with the file line of each row.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field

from probewise.errors import InputError

CONT = "<CONT>"
UNITS = "<UNITS>"


@dataclass
class Ags3Group:
    """One group; a group written twice (two blocks) gathers the rows of both."""

    name: str
    headings: list[str]  # of the block being read
    rows: list[tuple[int, list[str], list[str]]]  # (file line, cells, headings of its block)
    line: int  # line of the group name
    all_headings: set[str] = field(default_factory=set)  # of every block


def looks_like_ags3(text: str) -> bool:
    """True when the first non-blank line is an AGS3 group name ("**NAME")."""
    for line in text.splitlines():
        if line.strip():
            return line.lstrip("\ufeff").strip().startswith('"**')
    return False


def parse_ags3(text: str, filename: str) -> dict[str, Ags3Group]:
    """Groups of an AGS3 text by name; InputError naming the line for a malformed row."""
    groups: dict[str, Ags3Group] = {}
    group: Ags3Group | None = None
    last = ""  # what the previous row was: a data row, units, headings
    reader = csv.reader(io.StringIO(text.lstrip("\ufeff"), newline=""))
    try:
        for cells in reader:
            line = reader.line_num
            if not any(c.strip() for c in cells):
                continue
            first = cells[0].strip()
            if first.startswith("**"):
                name = first[2:].lstrip("?").strip()
                if not name:
                    raise InputError(f"{filename} line {line}", "a group name is empty")
                if name in groups:  # a second block of the group: its own headings follow
                    group = groups[name]
                    group.headings, group.line = [], line
                else:
                    group = groups[name] = Ags3Group(name, [], [], line)
                last = "**"
                continue
            if group is None:
                raise InputError(
                    f"{filename} line {line}", 'comes before any group name ("**GROUP")'
                )
            if first.startswith("*"):
                if last not in ("**", "*"):
                    raise InputError(
                        f"{filename} line {line}", f"headings after the data of group {group.name}"
                    )
                group.headings = group.headings + [
                    c.strip().lstrip("*").lstrip("?") for c in cells if c.strip()
                ]
                group.all_headings.update(group.headings)
                last = "*"
                continue
            elif first == UNITS:
                last = UNITS
                continue
            elif first == CONT:
                if last != UNITS:  # the units row may be continued too; units are not read
                    _continue_row(group, cells, filename, line)
                continue
            else:
                _add_row(group, cells, filename, line)
            last = first
    except csv.Error as exc:
        raise InputError(f"{filename} line {reader.line_num}", f"unreadable ({exc})") from None
    return groups


def _add_row(group: Ags3Group, cells: list[str], filename: str, line: int) -> None:
    if not group.headings:
        raise InputError(f"{filename} line {line}", f"data of group {group.name} before headings")
    while len(cells) > len(group.headings) and not cells[-1].strip():
        cells = cells[:-1]  # a trailing comma
    if len(cells) > len(group.headings):
        raise InputError(
            f"{filename} line {line}",
            f"has {len(cells)} fields; group {group.name} has {len(group.headings)} headings",
        )
    group.rows.append((line, cells + [""] * (len(group.headings) - len(cells)), group.headings))


def _continue_row(group: Ags3Group, cells: list[str], filename: str, line: int) -> None:
    if not group.rows:
        raise InputError(f"{filename} line {line}", f"{CONT} with no data row above it")
    _line, above, _headings = group.rows[-1]
    if len(cells) > len(above) and any(c.strip() for c in cells[len(above) :]):
        raise InputError(
            f"{filename} line {line}",
            f"has {len(cells)} fields; group {group.name} has {len(group.headings)} headings",
        )
    for i, text in enumerate(cells[1 : len(above)], start=1):
        if text:
            above[i] += text


def group_records(group: Ags3Group) -> list[tuple[str, dict[str, str]]]:
    """(where, {heading: text}) per data row, where = "HOLE row 2 (line 14)"."""
    return [
        (f"{group.name} row {n} (line {line})", dict(zip(headings, cells, strict=True)))
        for n, (line, cells, headings) in enumerate(group.rows, start=1)
    ]
