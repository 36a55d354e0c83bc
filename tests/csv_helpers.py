"""Reading the CSV files probewise writes: a comment line with the caution, then the table."""

from __future__ import annotations

from caution_check import assert_caution


def data_lines(text: str) -> list[str]:
    """The table's lines: comment lines (starting with #) left out."""
    return [line for line in text.splitlines() if not line.startswith("#")]


def caution_line(text: str) -> str:
    """The first line, which must be the caution as a comment."""
    first = text.splitlines()[0]
    assert first.startswith("# "), first
    assert_caution(first)
    return first
