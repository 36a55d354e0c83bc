"""The caution's substance, written here and not taken from the program.

Every screen, printout and export that informs design carries a caution (docs/model.md, "What
the numbers are not"). The checks below hold the program to what the caution must say, so a
caution rewritten as "Be careful." fails them. Text is compared after undoing HTML escaping,
dropping tags, undoing typographic ligatures (text read back from a PDF) and collapsing
whitespace (wrapped lines, indentation, comment prefixes).
"""

import html
import re
import unicodedata

# What the caution must say, in this order: who judges, what governs, what to do before digging.
CAUTION_PHRASES = (
    "qualified geotechnical professional",
    "local codes",
    "licensed practice govern",
    "clear buried services",
    "obtain permits",
)
# All the phrases within this many characters of the first: one caution, not scattered words.
_SPAN = 300
_PATTERN = re.compile(
    r"(?=("
    + re.escape(CAUTION_PHRASES[0])
    + "".join(rf".{{0,{_SPAN}}}?{re.escape(p)}" for p in CAUTION_PHRASES[1:])
    + "))",
    re.IGNORECASE | re.DOTALL,
)


def plain_text(text: str) -> str:
    """``text`` with tags dropped, entities undone, comment marks removed and spaces collapsed."""
    text = re.sub(r"<[^>]+>", " ", text)
    text = unicodedata.normalize("NFKC", html.unescape(text))  # PDF ligatures: "ﬁ" -> "fi"
    text = re.sub(r"(?m)^\s*#", " ", text)  # CSV and text comments wrap the caution over lines
    return " ".join(text.split())


def count_cautions(text: str) -> int:
    """How many whole cautions ``text`` holds (all phrases, in order, close together)."""
    flat = plain_text(text)
    # The pattern is a lookahead: one match per first phrase followed by all the others.
    return sum(1 for _ in _PATTERN.finditer(flat))


def assert_caution(text: str, times: int = 1) -> None:
    """Fail unless ``text`` carries the caution at least ``times`` times."""
    found = count_cautions(text)
    if found < times:
        flat = plain_text(text)
        missing = [p for p in CAUTION_PHRASES if p.lower() not in flat.lower()]
        raise AssertionError(
            f"caution expected {times} time(s), found {found}; phrases missing: {missing}"
        )
