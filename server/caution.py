"""The one caution text that every screen, printout and export informing design carries."""

CAUTION = (
    "Results support, and do not replace, the judgement of a qualified geotechnical "
    "professional; local codes, standards and licensed practice govern; clear buried services "
    "and obtain permits before any intrusive work."
)
# The form used in plain text (command output, file comments and fields).
CAUTION_LINE = f"Caution: {CAUTION}"
