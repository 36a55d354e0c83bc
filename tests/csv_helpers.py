"""Reading the CSV files probewise writes: a comment line with the caution, then the table."""

from __future__ import annotations

import re

# The substance of the caution, written here rather than taken from the program.
CAUTION_PHRASES = (
    r"qualified geotechnical professional",
    r"local codes.*licensed practice govern",
    r"clear buried services",
    r"obtain permits",
)


def data_lines(text: str) -> list[str]:
    """The table's lines: comment lines (starting with #) left out."""
    return [line for line in text.splitlines() if not line.startswith("#")]


def caution_line(text: str) -> str:
    """The first line, which must be the caution as a comment."""
    first = text.splitlines()[0]
    assert first.startswith("# "), first
    for phrase in CAUTION_PHRASES:
        assert re.search(phrase, first, flags=re.IGNORECASE), (phrase, first)
    return first
